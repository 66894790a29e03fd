"""Dose planning: from a water, a reagent and a pH window to a dose.

:func:`plan_dose` is the main job of the planner. For a batch (a tank
volume) or a flow, it finds

* the dose that takes the water to the aim pH (a direct solve at fixed pH,
  see :func:`dosing.chem.equilibrium.dose_to_ph`);
* the band of doses that keeps the pH inside the window;
* the slope of pH against dose at the aim, and the pH that a 5 % metering
  error would give, with a warning when that leaves the window;
* the pH after the planned dose by an independent forward solve;
* a titration curve (pH against dose) with the buffer intensity along it;
* the warnings and cautions that belong with the dose.

It refuses, with :class:`~dosing.errors.UnreachableError`, an aim the
reagent cannot reach: the wrong direction (a base on a water already above
the aim), a reagent with no grip on pH there (CO2 below about pH 5), or a
dose past a product's practical limit.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any, Mapping

import numpy as np

from .basis import Amounts, Batch, Flow, Target, amounts_for
from .curve import TitrationCurve, titration_curve
from .effluent import Water
from .findings import Finding, Q, error_text, note
from .plan_findings import METERING_ERROR, metal_checks, plan_warnings
from ..chem import (CARBONATE, Mixture, add_dose, dose_to_ph, solve_ph,
                          speciate)
from ..errors import InputError, ModelError, UnreachableError
from .hazards import assess
from ..chem.metals import METAL_IDS
from .ligand_findings import speciation_findings
from .reagents import GENERAL_CAUTION, Reagent
from .solids import (METAL_PERMIT_KEYS, CapWindow, DissolvedCurves, Solid, cap_window,
                     ideal_activity_finding,
                     dissolved_vs_ph, metals_after_mg_l, solids_after)
from ..chem.water import henry_co2

__all__ = ["has_grip", "GRIP_MIN", "AirExchange", "CalciteCase", "CALCITE_SI_FAST", "Plan",
           "plan_dose", "mix_closed"]

#: Highest CO2 pressure a dosing point works at: pure CO2 at 1 atm [atm].
CO2_MAX_ATM = 1.0


@dataclass(frozen=True, eq=False)
class Plan:
    """Everything the planner says about one dosing decision.

    Doses are mol of active compound per litre of water; see
    :meth:`amounts` for operator units.
    """

    water: Water
    reagent: Reagent
    target: Target
    basis: Batch | Flow
    ph_start: float                     #: measured pH [-]
    dose_mol_l: float                   #: dose to the aim [mol/L]
    ph_end: float                       #: pH after the dose, forward solve [-]
    band_mol_l: tuple[float, float | None]  #: doses that keep pH in the window
    slope_ph_per_mmol_l: float          #: dpH/d(dose) at the aim [pH per mmol/L]
    ph_low_dose: float                  #: pH after the dose less 5 % [-]
    ph_high_dose: float                 #: pH after the dose plus 5 % [-]
    ionic_strength_end: float           #: [mol/L]
    curve: TitrationCurve
    dose_needed: bool                   #: False when the water is already fine
    warnings: tuple[Finding, ...] = field(default=())   #: what goes with the numbers
    cautions: tuple[str, ...] = field(default=())       #: the reagent's safety words
    checks: tuple[Finding, ...] = field(default=())     #: chemistry checks (heat, gas ...)
    solids: tuple[Solid, ...] = field(default=())        #: solids at the aim
    metals_after_mg_l: Mapping[str, float] = field(default_factory=dict)
    cap_window: CapWindow | None = None   #: pH range meeting the metal caps
    dissolved: DissolvedCurves | None = None  #: dissolved metals against pH (dosed water)
    ph_ceiling: float | None = None       #: highest pH an overdose reaches [-]
    air: AirExchange | None = None        #: CO2 exchange with air, for an open tank
    calcite: CalciteCase | None = None    #: calcite planned to precipitate, and the other case
    precision: tuple = ()                 #: dose at the edges of each reading's precision
    uncertainty: Any = None               #: DoseUncertainty: the plausible waters' doses
    staging: Any = None                   #: Staging: first dose and trim table (batch)
    control: Any = None                   #: ControlDesign: gain, pump range, stages (flow)
    log_bias: Any = None                  #: shiftlog.Bias of this tank, when a log was given
    log_note: str = ""                    #: what the shift log said about this tank (no numbers)

    def amounts(self, dose_mol_l: float | None = None) -> Amounts:
        """A dose (default: the planned one) in operator units."""
        return amounts_for(self.dose_mol_l if dose_mol_l is None else dose_mol_l,
                           self.reagent, self.basis)


@dataclass(frozen=True)
class AirExchange:
    """How a plan for an open tank treats CO2 exchange, and the other case.

    The dose is planned either with the carbonate as sampled (dosed and read
    before CO2 exchanges) or at CO2 equilibrium with air (a pond standing
    for days); the figures of the other case say how far apart they are.
    """

    hours: float                     #: time standing open before the pH that counts [h]
    depth_m: float
    fraction: float                  #: of the way to CO2 equilibrium in that time [-]
    at_equilibrium: bool             #: planned at CO2 equilibrium with air
    other_dose_mol_l: float | None   #: dose to the aim in the other case (None: unreachable)
    ph_other: float                  #: pH the planned dose gives in the other case [-]


#: Calcite saturation index the dosed water may be left at before the plan
#: has calcite precipitate ("auto"): well above saturation calcite comes out
#: within a tank's residence time (lime softening runs at an index of 1 to 2);
#: just above it a water stays supersaturated for hours and drops calcite
#: slowly, as scale (common practice).
CALCITE_SI_FAST = 1.0


@dataclass(frozen=True)
class CalciteCase:
    """Calcite planned to precipitate, and what the dose does before it forms."""

    mol_l: float                     #: calcite formed at the aim [mol/L]
    si_without: float | None         #: saturation index had it stayed dissolved [-]
    ph_if_dissolved: float           #: pH the planned dose gives while it stays dissolved


def _calcite_case(water: Water, reagent: Reagent, dose: float, end_state,
                  si_without: float | None) -> CalciteCase | None:
    """The calcite a plan precipitates, with the pH before it forms."""
    mol = float(end_state.calcite_mol_l[0])
    if water.calcite != "precipitates" or mol <= 0:
        return None
    bare = replace(water.mixture(), calcite=False)
    ph = float(solve_ph(add_dose(bare, reagent.vector(), dose))[0])
    return CalciteCase(mol, si_without, ph)


def _air_exchange(water: Water, reagent: Reagent, aim: float, dose: float
                  ) -> AirExchange | None:
    """The other CO2 case for an open tank: its dose to the aim, and the pH the
    planned dose gives there."""
    if not water.open_to_air:
        return None
    at_eq = water.dosed_at_air_equilibrium
    other = water.mixture(air_equilibrium=not at_eq)
    d, grip = dose_to_ph(other, reagent.vector(), np.array([aim]))
    ok = bool(has_grip(reagent, d, grip)[0]) and d[0] >= 0
    ph_other = float(solve_ph(add_dose(other, reagent.vector(), dose), ph_guess=aim)[0])
    return AirExchange(water.hours_in_air, water.depth_m, water.air_fraction, at_eq,
                       float(d[0]) if ok else None, ph_other)


def _direction(reagent: Reagent) -> int:
    return 1 if reagent.raises_ph else -1


#: Charge a mole of reagent brings at the target below which it has no grip
#: on the pH there [eq/mol] (CO2 at low pH, lime past portlandite saturation).
GRIP_MIN = 1e-9


def has_grip(reagent: Reagent, dose, grip) -> np.ndarray:
    """Where the direct dose solve gave a dose the reagent can deliver: finite,
    and the reagent moves the pH its own way at the target."""
    dose, grip = np.asarray(dose, dtype=float), np.asarray(grip, dtype=float)
    return np.isfinite(dose) & (grip * _direction(reagent) > GRIP_MIN)


def _doses_at(mix: Mixture, reagent: Reagent, ph) -> tuple[np.ndarray, np.ndarray]:
    ph = np.atleast_1d(np.asarray(ph, dtype=float))
    return dose_to_ph(mix.repeat(ph.size), reagent.vector(), ph)


def _reach_problem(water: Water, reagent: Reagent, ph: float, dose: float,
                   grip: float, ceiling: float | None = None) -> Finding | None:
    """Why ``reagent`` cannot bring the water to ``ph``, or None if it can."""
    d = _direction(reagent)
    limit = reagent.practical_limit(ph)
    if limit is not None:
        return limit
    r, q = {"reagent": reagent.name}, {"ph": Q(ph, "pH")}
    if ceiling is not None and ph > ceiling - 0.01:
        return note("ceiling", "{reagent} takes this water no higher than about pH "
                    "{ceiling:.2f} at {t:g}, where the water is saturated with it (more "
                    "only stays undissolved)", "warning", r, ceiling=Q(ceiling, "pH"),
                    t=Q(water.temperature_c, "°C"))
    if not has_grip(reagent, dose, grip):
        return note("no-grip", "{reagent} has no grip on the pH near {ph:g}", "warning", r,
                    **q)
    if dose < -1e-12:
        return note("wrong-way", "{reagent} " + ("raises" if d > 0 else "lowers") + " pH, "
                    "and this water at pH {ph_now:g} is already "
                    + ("above" if d > 0 else "below") + " pH {ph:g}", "warning", r,
                    ph_now=Q(water.ph, "pH"), **q)
    if reagent.compound.formula == "CO2":
        co2_star = _dissolved_co2_after(water, reagent, dose, ph)
        limit = float(henry_co2(water.temperature_c)) * CO2_MAX_ATM
        if co2_star > limit:
            return note("co2-saturation", "reaching pH {ph:g} needs {need:.3g} of dissolved "
                        "CO2, more than water holds under pure CO2 at 1 atm ({limit:.3g})",
                        "warning", None, need=Q(co2_star * 1000, "mmol/L"),
                        limit=Q(limit * 1000, "mmol/L"), **q)
    return None


def _dissolved_co2_after(water: Water, reagent: Reagent, dose: float, ph: float) -> float:
    dosed = add_dose(water.mixture(), reagent.vector(), dose)
    sp = speciate(dosed, ph)
    return float(sp.concentration(CARBONATE, 0)[0])


def plan_dose(water: Water, reagent: Reagent, target: Target,
              basis: Batch | Flow, *, permit: Mapping[str, float] | None = None,
              curve_points: int = 301) -> Plan:
    """Plan the dose of ``reagent`` that brings ``water`` into ``target``.

    Calcite: with ``water.calcite`` "auto" the dose is first planned with
    calcite kept dissolved; if that leaves the water more supersaturated
    than :data:`CALCITE_SI_FAST`, it is planned again with calcite
    precipitating (and the plan says what the dose does before it forms).

    Parameters
    ----------
    water : Water
        From :func:`dosing.planning.effluent.infer_water`.
    reagent : Reagent
        A catalogue or custom product.
    target : Target
        The pH window and aim.
    basis : Batch or Flow
        A tank volume or a flow; scales kilograms and litres.
    permit : mapping, optional
        Discharge caps [mg/L]: ions (``sulfate_mg_l``, ``chloride_mg_l``,
        ``sodium_mg_l``, ``calcium_mg_l``, ``tds_increase_mg_l``), checked by
        :func:`dosing.planning.hazards.assess`, and dissolved metals (``zinc_mg_l``
        ...), checked at the aim with the pH range that meets them.
    curve_points : int
        Points on the titration curve.

    Raises
    ------
    UnreachableError
        The aim cannot be reached with this reagent (and the water is not
        already inside the window).
    ModelError
        The forward solve does not reproduce the aim (never expected).
    """
    plan = _plan_once(water, reagent, target, basis, permit, curve_points)
    si = _calcite_si(plan)
    if water.calcite == "auto" and plan.dose_needed and si is not None \
            and si > CALCITE_SI_FAST:
        plan = _plan_once(replace(water, calcite="precipitates"), reagent, target, basis,
                          permit, curve_points, si_without_calcite=si)
    return plan


def _calcite_si(plan: Plan) -> float | None:
    """The calcite saturation index the plan's checks found after the dose."""
    for c in plan.checks:
        if c.id == "calcite":
            return float(c.values["calcite_si"])
    return None


def _plan_once(water: Water, reagent: Reagent, target: Target, basis: Batch | Flow,
               permit: Mapping[str, float] | None, curve_points: int,
               si_without_calcite: float | None = None) -> Plan:
    """One plan with the water's calcite setting as it is."""
    mix = water.mixture()
    ceiling = _ceiling(water, reagent)
    edges = _edge_doses(water, reagent, target, ceiling)
    dose = edges.aim if edges.needed else 0.0
    _refuse_swamping(reagent, dose)
    dosed = add_dose(mix, reagent.vector(), dose)
    ph_end = float(solve_ph(dosed, ph_guess=target.ph_aim if edges.needed else water.ph)[0])
    if edges.needed and abs(ph_end - target.ph_aim) > 1e-6:
        raise ModelError(f"forward solve gives pH {ph_end:.6f} for the dose to "
                         f"pH {target.ph_aim:g}; the model is not trustworthy here")
    end_state = speciate(dosed, ph_end)
    slope, ph_lo, ph_hi = _sensitivity(mix, reagent, target.ph_aim, dose, ph_end)
    solids = solids_after(end_state, water.temperature_c, water.activity)
    metals_after = metals_after_mg_l(end_state)
    caps = _metal_caps(permit, metals_after)
    curves = (dissolved_vs_ph(dosed, float(end_state.ionic_strength[0]))
              if metals_after else None)
    window = (None if not caps else cap_window(curves, caps, (target.ph_min, target.ph_max),
                                               target.ph_aim))
    hi_curve = edges.far if edges.far is not None else dose
    top = max(hi_curve, dose, edges.near) * 1.5 or 1e-4
    before = speciate(mix_closed(water), water.ph, solids=False)
    checks = (assess(water, reagent, dose, before, end_state, batch_litres=basis.litres,
                     permit=permit)
              + metal_checks(metals_after, caps, target))
    plan = Plan(water=water, reagent=reagent, target=target, basis=basis,
                ph_start=water.ph, dose_mol_l=dose, ph_end=ph_end,
                band_mol_l=(edges.near, edges.far), slope_ph_per_mmol_l=float(slope),
                ph_low_dose=float(ph_lo), ph_high_dose=float(ph_hi),
                ionic_strength_end=float(end_state.ionic_strength[0]),
                curve=titration_curve(water, reagent, top, points=curve_points),
                dose_needed=edges.needed, cautions=tuple(reagent.cautions) + (GENERAL_CAUTION,),
                checks=checks, solids=solids, metals_after_mg_l=metals_after,
                cap_window=window, dissolved=curves, ph_ceiling=ceiling,
                air=_air_exchange(water, reagent, target.ph_aim, dose),
                calcite=_calcite_case(water, reagent, dose, end_state, si_without_calcite))
    ideal = ideal_activity_finding(dosed, ph_end, solids, water.temperature_c)
    notes = edges.notes + speciation_findings(end_state, metals_after, caps) + (
        (ideal,) if ideal is not None else ())
    return replace(plan, warnings=plan_warnings(plan, notes))


def _refuse_swamping(reagent: Reagent, dose: float) -> None:
    """A product so weak that it outweighs the water it treats is refused."""
    share = dose * (reagent.litres_product_per_mol or 0.0)
    if share > PRODUCT_VOLUME_MAX:
        raise InputError("reagent", f"{reagent.name} would take {share:.3g} L of product "
                         "per litre of water, more than the water itself: the tank or "
                         "line cannot hold it and the water would be mostly product; "
                         "use a stronger product")


#: Product volume per volume of water past which a dose is refused [-].
PRODUCT_VOLUME_MAX = 1.0


@dataclass(frozen=True)
class _Edges:
    """Doses at the window's edges and the aim, and what could not be reached."""

    aim: float
    near: float
    far: float | None
    needed: bool
    notes: tuple[Finding, ...]


def _edge_doses(water: Water, reagent: Reagent, target: Target,
                ceiling: float | None) -> _Edges:
    """Dose to the aim and the window band; refuse an unreachable aim."""
    edges = (target.ph_min, target.ph_aim, target.ph_max)
    doses, grips = _doses_at(water.mixture(), reagent, edges)
    inside = target.contains(water.ph)
    aim_problem = _reach_problem(water, reagent, target.ph_aim, doses[1], grips[1], ceiling)
    if aim_problem is not None and not (inside and doses[1] < 0):
        raise UnreachableError(f"cannot reach the aim pH {target.ph_aim:g}: "
                               f"{error_text(aim_problem)}")
    # The window edge nearer the start is the low end of the band.
    near, far = (0, 2) if reagent.raises_ph else (2, 0)
    far_problem = _reach_problem(water, reagent, edges[far], doses[far], grips[far], ceiling)
    notes = []
    if far_problem is not None and not (inside and doses[far] < 0):
        notes.append(far_problem.wrapped(
            "the far edge of the window (pH {far_edge:g}) cannot be reached (",
            "): overdosing cannot push the pH out of the window on that side",
            id="far-edge", far_edge=Q(edges[far], "pH")))
    needed = bool(doses[1] > 0)
    if not needed:
        notes.append(note("no-dose-needed", "the water at pH {ph:g} is already inside the "
                          "window and on the far side of the aim: no dose needed", "info",
                          ph=Q(water.ph, "pH")))
    return _Edges(float(doses[1]), max(float(doses[near]), 0.0),
                  None if far_problem is not None else float(doses[far]), needed,
                  tuple(notes))


def _sensitivity(mix: Mixture, reagent: Reagent, aim: float, dose: float,
                 ph_end: float) -> tuple[float, float, float]:
    """dpH/d(dose) at the aim [pH per mmol/L] and the pH at the dose -/+ 5 %."""
    h = 1e-3
    pair, _ = _doses_at(mix, reagent, (aim - h, aim + h))
    ddose_dph = (pair[1] - pair[0]) / (2 * h)
    slope = 1.0 / (ddose_dph * 1000.0) if ddose_dph != 0 else math.inf
    lo_hi = add_dose(mix.repeat(2), reagent.vector(),
                     dose * np.array([1 - METERING_ERROR, 1 + METERING_ERROR]))
    ph_lo, ph_hi = solve_ph(lo_hi, ph_guess=np.array([ph_end, ph_end]))
    return slope, ph_lo, ph_hi


def _ceiling(water: Water, reagent: Reagent) -> float | None:
    """Highest pH an overdose of a sparingly soluble base reaches, or None.

    For lime, quicklime and magnesia the hydroxide's solubility caps the
    pH (what makes magnesia safe against overdosing); found by a forward
    solve with a dose far past any plan.
    """
    metal = [k for k in reagent.compound.adds if k in METAL_IDS]
    if not metal or not reagent.raises_ph:
        return None
    dosed = add_dose(water.mixture(), reagent.vector(), _OVERDOSE_MOL_L)
    return float(solve_ph(dosed, ph_guess=12.0)[0])


#: Overdose used to find a sparingly soluble base's ceiling [mol/L]:
#: several times any dose a water needs.
_OVERDOSE_MOL_L = 1.0


def _metal_caps(permit, metals_after) -> dict[str, float]:
    """The permit's caps on dissolved metals, by metal id [mg/L]."""
    caps = {}
    for key, cap in (permit or {}).items():
        if key in METAL_PERMIT_KEYS:
            metal = key.removesuffix("_mg_l")
            if metal not in metals_after:
                raise InputError(f"permit.{key}", f"a cap on {metal} but the effluent "
                                 f"gives no {metal}; add effluent.metals_mg_l.{metal} or "
                                 "remove the cap")
            caps[metal] = float(cap)
    return caps


def mix_closed(water: Water) -> Mixture:
    """The water as measured, before any exchange with air."""
    return replace(water.mixture(), co2_air_mol_l=np.full(1, math.nan))


