"""The dose to a target pH for waters whose components couple.

Where complexes, ion pairs or coupled solids are in play (:mod:`.coupled`),
the charge balance of the dosed water is no longer linear in the dose: the
dose's own ions may complex or precipitate (lime's calcium with sulfate and
carbonate), and dilution shifts every complex. At the target pH the balance
R(d) is still smooth and monotone in the dose d between the kinks where a
solid appears, so the dose is found by a safeguarded secant on R(d) for
every water at once, each trial's equilibrium started from the last (the
direct solve of :mod:`.dose` gives the first step). The ionic strength of
the dosed water is settled along the way.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .coupled import Core, coupled_balance
from .mixture import ReagentVector
from .speciation import Rows, species_at

__all__ = ["dose_coupled"]

#: Trials per water before it is given up (no number: the reagent has no grip).
_MAX_TRIALS = 60


def _take(core: Core | None, idx) -> Core | None:
    if core is None:
        return None
    return Core(core.y[idx], core.x[idx], core.active[idx], core.c[idx], core.iterations)


def _dosed(rows: Rows, n_r: np.ndarray, reagent: ReagentVector, d: np.ndarray) -> Rows:
    """The view of the waters after the dose ``d`` [mol/L], diluted by the product."""
    g = np.maximum(d, -0.5 / max(reagent.volume_l, 1e-300)) if reagent.volume_l else d
    f = 1.0 / (1.0 + g * reagent.volume_l)
    return replace(rows, totals=np.maximum(f[:, None] * (rows.totals + g[:, None] * n_r), 0.0),
                   strong=f * (rows.strong + g * reagent.strong_eq),
                   strong_i=f * (rows.strong_i + np.abs(g) * reagent.ionic_strength))


def _residual(rows, n_r, reagent, ah, d, ionic, core):
    """(charge residual [eq/L], ionic strength [mol/L], core) of the dosed waters."""
    view = _dosed(rows, n_r, reagent, d)
    b = coupled_balance(view.tab, view, species_at(view, ah, ionic), ah, ionic, core)
    return b.residual, b.ionic, b.core


def dose_coupled(rows: Rows, n_r: np.ndarray, reagent: ReagentVector, ah: np.ndarray,
                 first: np.ndarray, slope0: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(dose [mol/L], slope dR/dd [eq/mol]) bringing each water of ``rows`` to
    activity ``ah``; ``first`` and ``slope0`` are the direct solve's dose and
    slope, the start. NaN where a water does not settle."""
    n = rows.totals.shape[0]
    ideal = rows.activity.ideal
    ionic = rows.strong_i.copy()
    d0 = np.zeros(n)
    r0, ionic, core = _residual(rows, n_r, reagent, ah, d0, ionic, None)
    scale = np.abs(rows.strong) + rows.totals.sum(axis=1) + 1e-12
    slope = np.where(np.abs(slope0) > 1e-12, slope0, 1.0)
    d = np.where(np.isfinite(first), first, -r0 / slope)
    dose, out_slope = np.full(n, np.nan), slope.copy()
    live = np.arange(n)
    prev_d, prev_r = d0, r0
    for _ in range(_MAX_TRIALS):
        sub = rows.take(live)
        r, new_i, core_l = _residual(sub, n_r, reagent, ah[live], d, ionic[live],
                                     _take(core, live))
        settled = ideal | (np.abs(new_i - ionic[live]) <= 1e-13 + 1e-9 * new_i)
        ionic[live] = new_i
        with np.errstate(divide="ignore", invalid="ignore"):
            sec = (r - prev_r) / (d - prev_d)
        slope_l = np.where(np.isfinite(sec) & (sec * slope[live] > 0), sec, slope[live])
        step = -r / slope_l
        # Converged: the residual at the inner solve's resolution (its mass
        # balances hold to 1e-11 of each total), or a step too small to matter.
        done = settled & ((np.abs(r) <= 1e-11 * scale[live] + 1e-18)
                          | (np.abs(step) <= 1e-13 * np.abs(d) + 1e-18))
        dose[live[done]], out_slope[live[done]] = d[done], slope_l[done]
        step = np.clip(step, -4.0 * np.abs(d - prev_d) - 1e-9, 4.0 * np.abs(d - prev_d) + 1e-9)
        keep = ~done & np.isfinite(step)
        prev_d, prev_r = d[keep], r[keep]
        slope[live[keep]] = slope_l[keep]
        core = _merge(core, core_l, live, n)
        live, d = live[keep], d[keep] + step[keep]
        if not live.size:
            break
    return dose, out_slope


def _merge(core: Core, part: Core, idx, n: int) -> Core:
    """``core`` with the rows ``idx`` replaced by ``part``."""
    y, x, a, c = core.y.copy(), core.x.copy(), core.active.copy(), core.c.copy()
    y[idx], x[idx], a[idx], c[idx] = part.y, part.x, part.active, part.c
    return Core(y, x, a, c, max(core.iterations, part.iterations))
