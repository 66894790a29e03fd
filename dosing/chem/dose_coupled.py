"""The dose to a target pH for waters whose components couple, or whose activity model is species-wise.

Where complexes, ion pairs or coupled solids are in play (:mod:`.coupled`),
the charge balance of the dosed water is no longer linear in the dose: the
dose's own ions may complex or precipitate (lime's calcium with sulfate and
carbonate), and dilution shifts every complex. At the target pH the balance
R(d) is still smooth and monotone in the dose d between the kinks where a
solid appears, so the dose is found by a safeguarded secant on R(d) for
every water at once, each trial's equilibrium started from the last (the
direct solve of :mod:`.dose` gives the first step). The ionic strength of
the dosed water is settled along the way.

A dose whose ions take no part in the coupling (sodium, potassium,
chloride, nitrate: caustic, potash, hydrochloric or nitric acid) changes
the coupled part only by diluting it and by the ionic strength. Then the
balance times the dilution factor is linear in the dose with the coupled
part held, as in the direct solve, and each pass solves it exactly
(:func:`_dose_direct`); passes repeat only for the dilution and the ionic
strength, whose fixed point is stepped by a secant.

Under a species-wise activity model (SIT) every ion's γ depends on the
whole water, the dose's own ions included, so the direct solve's
constants taken at the undosed water's medium do not hold: such waters
take the secant too, each trial a dosed water.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .coupled import Core, coupled_balance
from .mixture import ReagentVector
from .solve_coupled import FixedPointSecant
from .speciation import Rows, balance, species_at

__all__ = ["dose_coupled"]

#: Trials per water before it is given up (no number: the reagent has no grip).
_MAX_TRIALS = 60
#: Largest |dR/dd| a product can give [eq per mol]: a mole delivers a few
#: equivalents (lime two, soda ash two, sodium sulfide two), and its dilution
#: and the complexes it forms change the balance by less than that.
SLOPE_MAX = 1e3


def _take(core: Core | None, idx) -> Core | None:
    return None if core is None else core.take(idx)


def _dilution(reagent: ReagentVector, d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(dose as given, dilution factor 1 / (1 + g v)); a removal is capped at
    half the water's volume."""
    g = np.maximum(d, -0.5 / max(reagent.volume_l, 1e-300)) if reagent.volume_l else d
    return g, 1.0 / (1.0 + g * reagent.volume_l)


def _dosed(rows: Rows, n_r: np.ndarray, reagent: ReagentVector, d: np.ndarray) -> Rows:
    """The view of the waters after the dose ``d`` [mol/L], diluted by the product."""
    g, f = _dilution(reagent, d)
    return replace(rows, totals=np.maximum(f[:, None] * (rows.totals + g[:, None] * n_r), 0.0),
                   strong=f * (rows.strong + g * reagent.strong_eq),
                   strong_i=f * (rows.strong_i + np.abs(g) * reagent.ionic_strength))


def _residual(rows, n_r, reagent, ah, d, ionic, core):
    """(charge residual [eq/L], ionic strength [mol/L], core) of the dosed waters."""
    view = _dosed(rows, n_r, reagent, d)
    sp = species_at(view, ah, ionic)
    if view.tab is None:                    # nothing couples: a species-wise model only
        b = balance(view, sp)
        return b.residual, b.ionic, None
    b = coupled_balance(view.tab, view, sp, ah, ionic, core)
    return b.residual, b.ionic, b.core


def dose_coupled(rows: Rows, n_r: np.ndarray, reagent: ReagentVector, ah: np.ndarray,
                 first: np.ndarray, slope0: np.ndarray, ionic0: np.ndarray | None = None
                 ) -> tuple[np.ndarray, np.ndarray]:
    """(dose [mol/L], slope dR/dd [eq/mol]) bringing each water of ``rows`` to
    activity ``ah``; ``first``, ``slope0`` and ``ionic0`` are the direct
    solve's dose, slope and ionic strength of the dosed water (None: ideal),
    the start. NaN where a water does not settle."""
    if rows.tab is not None and not np.any(n_r[rows.tab.cols]):
        start = rows.strong_i if ionic0 is None else np.where(np.isfinite(ionic0), ionic0,
                                                               rows.strong_i)
        return _dose_direct(rows, n_r, reagent, ah, first, start)
    n = rows.totals.shape[0]
    ideal = rows.activity.ideal
    ionic = rows.strong_i.copy()
    d0 = np.zeros(n)
    r0, ionic, core = _residual(rows, n_r, reagent, ah, d0, ionic, None)
    scale = np.abs(rows.strong) + rows.totals.sum(axis=1) + 1e-12
    # A start slope outside what any product can deliver (a few equivalents
    # per mole) is not a slope: the secant finds its own from 1.
    sane = np.isfinite(slope0) & (np.abs(slope0) > 1e-12) & (np.abs(slope0) < SLOPE_MAX)
    slope = np.where(sane, slope0, 1.0)
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
                          | ((np.abs(step) <= 1e-13 * np.abs(d) + 1e-18)
                             & (np.abs(r) <= 1e-7 * scale[live] + 1e-15)))
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


def _merge(core: Core | None, part: Core | None, idx, n: int) -> Core | None:
    """``core`` with the rows ``idx`` replaced by ``part`` (None: nothing couples)."""
    if core is None or part is None:
        return core
    y, x, a, c = core.y.copy(), core.x.copy(), core.active.copy(), core.c.copy()
    y[idx], x[idx], a[idx], c[idx] = part.y, part.x, part.active, part.c
    return Core(y, x, a, c, max(core.iterations, part.iterations))


def _dose_direct(rows: Rows, n_r: np.ndarray, reagent: ReagentVector, ah: np.ndarray,
                 first: np.ndarray, ionic0: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`dose_coupled` for a dose that touches no coupled column.

    After the dose d (dilution f = 1 / (1 + d v)) the balance reads
    f (S + d s_r + sum_u (T_u + d n_u) q_u + C / f) + w = 0 over the
    uncoupled columns u, with C the charge of the coupled part at the last
    trial (nearly proportional to the dilution, so C / f is nearly fixed)
    and w what does not dilute (H+ - OH-, carbonate held by air); times
    1 + d v it is linear in d, as in the direct solve.
    """
    n = rows.totals.shape[0]
    ideal = rows.activity.ideal
    d = np.where(np.isfinite(first), first, 0.0)
    ionic = ionic0.copy()
    # The inner solves hold each mass balance to 1e-11 of its total: a dose
    # step whose charge is below that resolution is noise.
    floor = 1e-11 * (np.abs(rows.strong) + rows.totals.sum(axis=1)) + 1e-18
    unc = np.ones(rows.totals.shape[1], dtype=bool)
    unc[rows.tab.cols] = False
    opened = np.isfinite(rows.co2)
    dose, slope = np.full(n, np.nan), np.full(n, np.nan)
    secant, core, live = FixedPointSecant.start(n), None, np.arange(n)
    for _ in range(_MAX_TRIALS):
        sub, dl = rows.take(live), d[live]
        view = _dosed(sub, n_r, reagent, dl)
        sp = species_at(view, ah[live], ionic[live])
        b = coupled_balance(view.tab, view, sp, ah[live], ionic[live], _take(core, live))
        air = _held_by_air(view, opened[live])
        scaled = np.where(unc[None, :] & ~air, sp.q, 0.0)
        f = 1.0 / (1.0 + dl * reagent.volume_l)
        w = sp.h - sp.oh + np.einsum("nm,nm->n", np.where(air, b.free, 0.0), sp.q)
        coupled = b.residual - view.strong - np.einsum("nm,nm->n", view.totals, scaled) - w
        den = reagent.strong_eq + scaled @ n_r + reagent.volume_l * w
        with np.errstate(divide="ignore", invalid="ignore"):
            new = -(sub.strong + np.einsum("nm,nm->n", sub.totals, scaled) + coupled / f + w
                    ) / den
        # The ionic strength the new dose implies: the strong ions' share
        # moves with the dose exactly, the rest is taken as it stands.
        implied = b.ionic - view.strong_i + _dosed_strong_i(sub, reagent, new)
        moved = np.zeros(live.size, dtype=bool) if ideal else \
            np.abs(implied - ionic[live]) > 1e-13 + 1e-9 * implied
        done = ~moved & (np.abs((new - dl) * den) <= floor[live]) & np.isfinite(new)
        dose[live[done]], slope[live[done]] = new[done], f[done] * den[done]
        if not ideal and moved.any():
            w_ = live[moved]
            ionic[w_] = secant.next(w_, ionic[w_], implied[moved])
        core = _merge(core, b.core, live, n) if core is not None else b.core
        d[live] = new
        live = live[~done & np.isfinite(new)]
        if not live.size:
            break
    return dose, slope


def _dosed_strong_i(rows: Rows, reagent: ReagentVector, d: np.ndarray) -> np.ndarray:
    """Ionic strength of the strong ions after the dose ``d`` [mol/L] (as :func:`_dosed`)."""
    g, f = _dilution(reagent, np.where(np.isfinite(d), d, 0.0))
    return f * (rows.strong_i + np.abs(g) * reagent.ionic_strength)


def _held_by_air(view: Rows, opened: np.ndarray) -> np.ndarray:
    """(n, mc) True for carbonate held by air outside the coupled part (its
    concentration does not follow the dilution)."""
    held = np.zeros(view.totals.shape, dtype=bool)
    if view.carb >= 0:
        held[:, view.carb] = opened
    return held
