"""The figure of a simulation: each design's discharge pH against the window,
its pump rates below, and a zoom on the worst excursion. PNG bytes, with
the reagent's cautions and the final word under it (plot._png)."""

from __future__ import annotations

import numpy as np

from .plot import _png, plt
from .units import UNIT_SYSTEMS

__all__ = ["simulation_figure_png"]


def _worst(sim):
    """(run, excursion) furthest from the aim over every design, or None."""
    best = None
    for run in sim.runs:
        for e in run.excursions:
            if best is None or abs(e.peak_ph - sim.aim) > abs(best[1].peak_ph - sim.aim):
                best = (run, e)
    return best


def simulation_figure_png(sim, units: str = "metric") -> bytes:
    u = UNIT_SYSTEMS[units]
    worst = _worst(sim)
    rows = 3 if worst else 2
    fig, axes = plt.subplots(rows, 1, figsize=(9.0, 2.6 * rows + 0.8), dpi=110)
    a_ph, a_rate = axes[0], axes[1]
    lo, hi = sim.window
    kg = sim.reagent.kg_product_per_mol or 0.0
    for run in sim.runs:
        hours = run.t_s / 3600.0
        a_ph.plot(hours, run.ph[-1], lw=0.9, label=run.design.name)
        a_rate.plot(hours, run.rate_mol_s.sum(axis=0) * kg * 3600.0 * u.mass_per_kg, lw=0.8,
                    label=run.design.name)
    for ax in [a_ph] + ([axes[2]] if worst else []):
        ax.axhspan(lo, hi, color="tab:green", alpha=0.12, lw=0, label="target window")
        ax.axhline(sim.aim, color="tab:green", lw=0.6, ls="--")
    a_ph.set_ylabel("discharge pH")
    a_ph.set_title(f"{sim.title}: {sim.reagent.name}, {sim.source}", fontsize=10)
    a_ph.legend(fontsize=7, ncol=3, loc="upper center", frameon=False)
    a_rate.set_ylabel(f"all stages, {u.mass}/h product")
    a_rate.set_xlabel("hours from the start of the record")
    for ax in (a_ph, a_rate):
        ax.grid(True, alpha=0.3)
    if worst:
        run, e = worst
        t0, t1 = (e.start_s - 600.0) / 3600.0, (e.start_s + e.duration_s + 600.0) / 3600.0
        hours = run.t_s / 3600.0
        keep = (hours >= t0) & (hours <= t1)
        for k in range(run.ph.shape[0]):
            axes[2].plot(hours[keep], run.ph[k][keep], lw=0.9, label=f"stage {k + 1} pH")
            axes[2].plot(hours[keep], run.measured_ph[k][keep], lw=0.7, ls=":",
                         label=f"stage {k + 1} probe")
        axes[2].set_title(f"worst excursion: {run.design.name}, peak pH {e.peak_ph:.2f}",
                          fontsize=9)
        axes[2].set_ylabel("pH")
        axes[2].legend(fontsize=7, ncol=4, frameon=False)
        axes[2].grid(True, alpha=0.3)
        bottom = float(np.nanmin(run.ph[:, keep])) if keep.any() else lo
        axes[2].set_ylim(min(bottom, lo) - 0.3, None)
    return _png(fig, sim.reagent.cautions)
