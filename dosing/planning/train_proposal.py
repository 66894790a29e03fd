"""The train the planner proposes when one dose cannot meet the window and the metal caps together.

Metal finishing's everyday case: the hydroxides drop below their caps only
at a pH above the discharge window, so the plant raises the pH, lets the
solids settle or filters them, and brings the clear water back into the
window. :func:`propose` finds that case in a single-dose plan (the pH range
meeting every cap lies wholly outside the window), names the metal that
sets each edge of that range, and returns the steps: dose to the pH inside
the range where the worst metal has most room below its cap, separate
(98 % of the solids, common practice), re-adjust into the window with a
second product: the scenario's ``[reagent] readjust_id``, else sulfuric
acid 93 % (hydrochloric acid 32 % where the permit caps sulfate) to come
down, caustic soda 25 % to go up.

Where no pH meets every cap by hydroxide precipitation (a chelant or
ammonia holds a metal), no train of these steps can, and none is proposed;
the plan's own warnings say what the plant needs instead.
"""

from __future__ import annotations

from typing import Mapping

import numpy as np

from ..chem.metals import label
from .basis import Target
from .findings import Finding, Q
from .plan import Plan
from .reagents import Reagent, get_reagent
from .solids import CapWindow, DissolvedCurves
from .train import DEFAULT_REMOVAL, StepSpec

__all__ = ["propose", "edges_of", "readjust_reagent", "EDGE_MARGIN"]

#: The proposed precipitation dose's window is the caps' pH range, this far
#: inside each edge [pH].
EDGE_MARGIN = 0.05


def edges_of(cw: CapWindow, curves: DissolvedCurves) -> tuple[list[str], list[str]]:
    """The metals that set the lower and the upper edge of the caps' pH range
    (those over their cap just past each edge)."""
    lo, hi = cw.ph_range
    ph = curves.ph
    below, above = int(np.argmin(np.abs(ph - lo))) - 1, int(np.argmin(np.abs(ph - hi))) + 1
    low = [m for m, cap in cw.caps_mg_l.items() if below >= 0 and curves.mg_l[m][below] > cap]
    high = [m for m, cap in cw.caps_mg_l.items()
            if above < ph.size and curves.mg_l[m][above] > cap]
    return low, high


def _best_ph(cw: CapWindow, curves: DissolvedCurves) -> float:
    """The pH in the caps' range where the worst metal has most room below its cap."""
    lo, hi = cw.ph_range
    inside = (curves.ph >= lo) & (curves.ph <= hi)
    worst = np.max([curves.mg_l[m][inside] / cap for m, cap in cw.caps_mg_l.items()], axis=0)
    return round(float(curves.ph[inside][int(np.argmin(worst))]), 1)


def readjust_reagent(up: bool, permit: Mapping[str, float], named: Reagent | None
                     ) -> tuple[Reagent, bool]:
    """The product that brings the water back into the window, and whether
    the planner chose it (the scenario did not)."""
    if named is not None:
        return named, False
    if up:
        return get_reagent("caustic-25"), True
    return get_reagent("hydrochloric-32" if "sulfate_mg_l" in permit else "sulfuric-93"), True


def propose(plan: Plan, permit: Mapping[str, float], named: Reagent | None
            ) -> tuple[tuple[StepSpec, ...], Finding] | None:
    """The train for ``plan``'s water, and why, or None when one dose will do."""
    cw, curves, target = plan.cap_window, plan.dissolved, plan.target
    if cw is None or cw.ph_range is None or cw.overlap is not None or curves is None:
        return None
    p = _best_ph(cw, curves)
    up = p < target.ph_min
    second, chosen = readjust_reagent(up, permit, named)
    lo, hi = cw.ph_range
    steps = (StepSpec("dose", "precipitate", reagent=plan.reagent,
                      target=Target(min(lo + EDGE_MARGIN, p), max(hi - EDGE_MARGIN, p), p),
                      proposed=True),
             StepSpec("separate", "clarifier or filter", removal=DEFAULT_REMOVAL, proposed=True),
             StepSpec("dose", "re-adjust into the window", reagent=second, target=target,
                      proposed=True))
    return steps, _why(cw, curves, p, plan.reagent, second, chosen, target)


def _why(cw: CapWindow, curves: DissolvedCurves, p: float, first: Reagent, second: Reagent,
         chosen: bool, target: Target) -> Finding:
    low, high = edges_of(cw, curves)
    q = {"lo": Q(cw.ph_range[0], "pH"), "hi": Q(cw.ph_range[1], "pH"), "p": Q(p, "pH"),
         "ph_min": Q(target.ph_min, "pH"), "ph_max": Q(target.ph_max, "pH"),
         "removal": Q(DEFAULT_REMOVAL, "%")}
    names = {"low": " and ".join(label(m) for m in low) or "none",
             "high": " and ".join(label(m) for m in high) or "none",
             "first": first.name, "second": second.name,
             "who": ("chosen by the planner; [reagent] readjust_id sets another" if chosen
                     else "as the scenario names it")}
    return Finding(
        "train-proposed", "warning",
        "one dose cannot meet the window {ph_min:g} to {ph_max:g} and the metal caps "
        "together: the caps are met only between pH {lo:.2f} ({low} sets this edge) and "
        "{hi:.2f} ({high} sets this edge). Planned as a train: precipitate at pH {p:.1f} "
        "with {first}, separate the solids (clarifier or filter, {removal:.1%} of them), then "
        "bring the water back into the window with {second} ({who}). Do not discharge "
        "the water after the first step.", q, names)
