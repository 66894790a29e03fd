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

from .effluent import STILL_WATER_KL_M_H, Water
from ..chem.activity import DAVIES_I_LIMIT
from ..chem import (CARBONATE, Mixture, add_dose, dose_to_ph, solve_ph,
                          speciate)
from ..errors import InputError, ModelError, UnreachableError
from .hazards import Check, assess
from ..chem.metals import METAL_IDS, label
from ..numbers import fmt
from .reagents import GENERAL_CAUTION, Reagent
from .solids import (METAL_PERMIT_KEYS, CapWindow, Solid, cap_window, metals_after_mg_l,
                     metals_present_mol_l, solids_after)
from ..chem.water import henry_co2

__all__ = ["has_grip", "GRIP_MIN", "permit_breaches", "AirExchange", "CalciteCase",
           "CALCITE_SI_FAST", "Target", "Batch", "Flow", "Amounts", "TitrationCurve",
           "Plan", "plan_dose", "titration_curve", "METERING_ERROR"]

#: Relative metering error used for the sensitivity check (common practice:
#: a well-kept metering pump holds its rate within a few per cent).
METERING_ERROR = 0.05
#: The whole window spanning less than this fraction of the dose is called
#: narrow (common practice).
NARROW_BAND = 0.10
#: Highest CO2 pressure a dosing point works at: pure CO2 at 1 atm [atm].
CO2_MAX_ATM = 1.0


@dataclass(frozen=True)
class Target:
    """The permitted pH window and the aim inside it [pH]."""

    ph_min: float
    ph_max: float
    ph_aim: float | None = None

    def __post_init__(self):
        for name in ("ph_min", "ph_max"):
            v = getattr(self, name)
            if not isinstance(v, (int, float)) or not math.isfinite(v) or not 0 <= v <= 14:
                raise InputError(f"target.{name}", f"{v!r} is not a pH; allowed: 0 to 14")
        if self.ph_min >= self.ph_max:
            raise InputError("target.ph_max", f"{self.ph_max:g} must be above "
                             f"ph_min {self.ph_min:g}")
        if self.ph_aim is None:
            object.__setattr__(self, "ph_aim", 0.5 * (self.ph_min + self.ph_max))
        elif not (self.ph_min <= self.ph_aim <= self.ph_max):
            raise InputError("target.ph_aim", f"{self.ph_aim:g} lies outside the "
                             f"window {self.ph_min:g} to {self.ph_max:g}")

    def contains(self, ph: float) -> bool:
        """True if ``ph`` lies inside the window."""
        return self.ph_min <= ph <= self.ph_max


@dataclass(frozen=True)
class Batch:
    """A tank treated as one batch."""

    volume_m3: float

    def __post_init__(self):
        if not (isinstance(self.volume_m3, (int, float)) and math.isfinite(self.volume_m3)
                and 1e-3 <= self.volume_m3 <= 1e6):
            raise InputError("batch.volume_m3", f"{self.volume_m3!r}; allowed: "
                             "above 0 (at least 0.001 m3, one litre) and up to 1,000,000 m3")

    @property
    def litres(self) -> float:
        """Water treated [L] (per batch)."""
        return self.volume_m3 * 1000.0

    #: What every amount of a batch is per, in words.
    per = "per batch"


@dataclass(frozen=True)
class Flow:
    """A continuous stream."""

    m3_per_h: float

    def __post_init__(self):
        if not (isinstance(self.m3_per_h, (int, float)) and math.isfinite(self.m3_per_h)
                and 1e-3 <= self.m3_per_h <= 1e5):
            raise InputError("flow.m3_per_h", f"{self.m3_per_h!r}; allowed: "
                             "above 0 (at least 0.001 m3/h, one litre an hour) and up to 100,000 m3/h")

    @property
    def litres(self) -> float:
        """Water treated [L] (per hour)."""
        return self.m3_per_h * 1000.0

    #: What every amount of a flow is per, in words.
    per = "per hour"


@dataclass(frozen=True)
class Amounts:
    """One dose in the units an operator uses.

    ``kg_product`` and ``litres_product`` are per batch for a
    :class:`Batch` and per hour for a :class:`Flow`; ``litres_product`` is
    None for a solid or a gas, ``kg_product`` None when a solution was given
    by molarity without a density.
    """

    mmol_per_l: float                #: active compound per L of water [mmol/L]
    mg_per_l_product: float | None   #: product per L of water [mg/L]
    kg_product: float | None         #: [kg] per batch or per hour
    litres_product: float | None     #: [L] per batch or per hour
    kg_active: float                 #: active compound [kg] per batch or hour


def amounts_for(dose_mol_l: float, reagent: Reagent, basis: Batch | Flow) -> Amounts:
    """Convert a dose [mol active per L of water] to :class:`Amounts`."""
    kg_per_mol = reagent.kg_product_per_mol
    l_per_mol = reagent.litres_product_per_mol
    mol = dose_mol_l * basis.litres
    return Amounts(
        mmol_per_l=dose_mol_l * 1000.0,
        mg_per_l_product=None if kg_per_mol is None else dose_mol_l * kg_per_mol * 1e6,
        kg_product=None if kg_per_mol is None else mol * kg_per_mol,
        litres_product=None if l_per_mol is None else mol * l_per_mol,
        kg_active=mol * reagent.compound.molar_mass_g_mol / 1000.0)


@dataclass(frozen=True, eq=False)
class TitrationCurve:
    """pH against dose for one water and reagent (arrays of equal length)."""

    dose_mol_l: np.ndarray           #: dose of active compound [mol/L]
    ph: np.ndarray                   #: pH after that dose [-]
    buffer_intensity_eq_l: np.ndarray  #: β of the dosed water [eq/(L pH)]


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
    warnings: tuple[str, ...] = field(default=())
    cautions: tuple[str, ...] = field(default=())
    checks: tuple[Check, ...] = field(default=())
    solids: tuple[Solid, ...] = field(default=())        #: solids at the aim
    metals_after_mg_l: Mapping[str, float] = field(default_factory=dict)
    cap_window: CapWindow | None = None   #: pH range meeting the metal caps
    ph_ceiling: float | None = None       #: highest pH an overdose reaches [-]
    air: AirExchange | None = None        #: CO2 exchange with air, for an open tank
    calcite: CalciteCase | None = None    #: calcite planned to precipitate, and the other case
    precision: tuple = ()                 #: dose at the edges of each reading's precision
    uncertainty: Any = None               #: DoseUncertainty: the plausible waters' doses
    staging: Any = None                   #: Staging: first dose and trim table (batch)
    control: Any = None                   #: ControlDesign: gain, pump range, stages (flow)
    log_bias: Any = None                  #: shiftlog.Bias of this tank, when a log was given
    log_note: str = ""                    #: what the shift log said about this tank

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
    return dose_to_ph(_repeat(mix, ph.size), reagent.vector(), ph)


def _reach_problem(water: Water, reagent: Reagent, ph: float, dose: float,
                   grip: float, ceiling: float | None = None) -> str | None:
    """Why ``reagent`` cannot bring the water to ``ph``, or None if it can."""
    d = _direction(reagent)
    verb = "raises" if d > 0 else "lowers"
    limit = reagent.practical_limit(ph)
    if limit is not None:
        return limit
    if ceiling is not None and ph > ceiling - 0.01:
        return (f"{reagent.name} takes this water no higher than about pH "
                f"{ceiling:.2f} at {water.temperature_c:g} °C, where the water is "
                "saturated with it (more only stays undissolved)")
    if not has_grip(reagent, dose, grip):
        return f"{reagent.name} has no grip on the pH near {ph:g}"
    if dose < -1e-12:
        return (f"{reagent.name} {verb} pH, and this water at pH {water.ph:g} is "
                f"already {'above' if d > 0 else 'below'} pH {ph:g}")
    if reagent.compound.formula == "CO2":
        co2_star = _dissolved_co2_after(water, reagent, dose, ph)
        limit = float(henry_co2(water.temperature_c)) * CO2_MAX_ATM
        if co2_star > limit:
            return (f"reaching pH {ph:g} needs {co2_star * 1000:.3g} mmol/L of "
                    f"dissolved CO2, more than water holds under pure CO2 at 1 atm "
                    f"({limit * 1000:.3g} mmol/L)")
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
    window = (None if not caps else cap_window(
        metals_present_mol_l(end_state), caps, water.temperature_c, water.activity,
        float(end_state.ionic_strength[0]), (target.ph_min, target.ph_max), target.ph_aim))
    hi_curve = edges.far if edges.far is not None else dose
    top = max(hi_curve, dose, edges.near) * 1.5 or 1e-4
    before = speciate(mix_closed(water), water.ph, solids=False)
    checks = (assess(water, reagent, dose, before, end_state, batch_litres=basis.litres,
                     permit=permit)
              + _metal_checks(metals_after, caps, target))
    plan = Plan(water=water, reagent=reagent, target=target, basis=basis,
                ph_start=water.ph, dose_mol_l=dose, ph_end=ph_end,
                band_mol_l=(edges.near, edges.far), slope_ph_per_mmol_l=float(slope),
                ph_low_dose=float(ph_lo), ph_high_dose=float(ph_hi),
                ionic_strength_end=float(end_state.ionic_strength[0]),
                curve=titration_curve(water, reagent, top, points=curve_points),
                dose_needed=edges.needed, cautions=tuple(reagent.cautions) + (GENERAL_CAUTION,),
                checks=checks, solids=solids, metals_after_mg_l=metals_after,
                cap_window=window, ph_ceiling=ceiling,
                air=_air_exchange(water, reagent, target.ph_aim, dose),
                calcite=_calcite_case(water, reagent, dose, end_state, si_without_calcite))
    return replace(plan, warnings=plan_warnings(plan, edges.notes))


@dataclass(frozen=True)
class _Edges:
    """Doses at the window's edges and the aim, and what could not be reached."""

    aim: float
    near: float
    far: float | None
    needed: bool
    notes: tuple[str, ...]


def _edge_doses(water: Water, reagent: Reagent, target: Target,
                ceiling: float | None) -> _Edges:
    """Dose to the aim and the window band; refuse an unreachable aim."""
    edges = (target.ph_min, target.ph_aim, target.ph_max)
    doses, grips = _doses_at(water.mixture(), reagent, edges)
    inside = target.contains(water.ph)
    aim_problem = _reach_problem(water, reagent, target.ph_aim, doses[1], grips[1], ceiling)
    if aim_problem is not None and not (inside and doses[1] < 0):
        raise UnreachableError(f"cannot reach the aim pH {target.ph_aim:g}: "
                               f"{aim_problem}")
    # The window edge nearer the start is the low end of the band.
    near, far = (0, 2) if reagent.raises_ph else (2, 0)
    far_problem = _reach_problem(water, reagent, edges[far], doses[far], grips[far], ceiling)
    notes = []
    if far_problem is not None and not (inside and doses[far] < 0):
        notes.append(f"the far edge of the window (pH {edges[far]:g}) cannot "
                     f"be reached ({far_problem}): overdosing cannot push the "
                     "pH out of the window on that side")
    needed = bool(doses[1] > 0)
    if not needed:
        notes.append(f"the water at pH {water.ph:g} is already inside the "
                     f"window and on the far side of the aim: no dose needed")
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
    lo_hi = add_dose(_repeat(mix, 2), reagent.vector(),
                     dose * np.array([1 - METERING_ERROR, 1 + METERING_ERROR]))
    ph_lo, ph_hi = solve_ph(lo_hi, ph_guess=np.array([ph_end, ph_end]))
    return slope, ph_lo, ph_hi


def permit_breaches(plan: Plan) -> tuple[str, ...]:
    """The permit checks the plan fails (ions and metals), as their messages."""
    return tuple(c.message for c in plan.checks
                 if c.id.startswith("permit-") and c.level == "danger")


def plan_warnings(plan: Plan, notes: tuple[str, ...]) -> tuple[str, ...]:
    """The words that go with the numbers of a plan (one place for the prose)."""
    target, water, dose = plan.target, plan.water, plan.dose_mol_l
    # A plan that breaks the permit says so first, in every record of it.
    warnings: list[str] = [f"PERMIT BREACH: {m}" for m in permit_breaches(plan)]
    warnings += list(water.notes) + list(notes)
    near, far = plan.band_mol_l
    if plan.dose_needed:
        ph_lo, ph_hi = plan.ph_low_dose, plan.ph_high_dose
        out = [p for p in (ph_lo, ph_hi) if not target.contains(float(p))]
        phrase = (f"a {METERING_ERROR:.0%} dosing error moves the pH from "
                  f"{target.ph_aim:.2f} to between {min(ph_lo, ph_hi):.2f} and "
                  f"{max(ph_lo, ph_hi):.2f}")
        if out:
            warnings.append(f"narrow window: {phrase}, outside the window "
                            f"{target.ph_min:g} to {target.ph_max:g}. Dose in "
                            "stages and measure before the last part")
        elif far is not None and (far - near) < NARROW_BAND * dose:
            warnings.append(f"narrow window in dose terms: the whole window spans "
                            f"{(far - near) / dose:.0%} of the dose; {phrase}")
    if plan.ionic_strength_end > DAVIES_I_LIMIT:
        warnings.append(f"ionic strength after dosing {plan.ionic_strength_end:.2f} "
                        "mol/L is beyond the Davies equation's range: confirm with a "
                        "bench titration")
    # The reagent's own hydroxide left as solid (lime or magnesia past saturation).
    undissolved = [s for s in plan.solids
                   if s.id.removesuffix("_hydroxide") in plan.reagent.compound.adds]
    for s in undissolved:
        warnings.append(f"{fmt(s.mg_per_l)} mg/L of the {s.formula} dosed stays "
                        f"undissolved at pH {plan.ph_end:.2f}: the water is saturated "
                        "with it; mix well, allow reaction time and re-measure "
                        "before adding more")
    if plan.cap_window is not None:
        warnings.extend(_cap_words(plan.cap_window, target))
    if plan.air is not None and plan.dose_needed:
        warnings.append(_air_words(plan))
    if plan.calcite is not None:
        warnings.append(_calcite_words(plan))
    return tuple(warnings)


def _calcite_words(plan: Plan) -> str:
    """What a plan with calcite precipitating assumed, and the pH before it forms."""
    c = plan.calcite
    assert c is not None
    why = ("" if c.si_without is None else
           f" (kept dissolved it would leave the water at saturation index "
           f"{c.si_without:+.1f}, where it comes out within the hour)")
    outside = "" if plan.target.contains(c.ph_if_dissolved) else ", outside the window"
    return (f"calcite precipitates: {fmt(c.mol_l * 1000)} mmol/L of CaCO3 goes to the "
            f"sludge{why}, and the dose includes the acid it releases (Ca2+ + HCO3- -> "
            f"CaCO3 + H+). Until it has formed (minutes to hours; faster on old sludge) "
            f"this dose gives pH {c.ph_if_dissolved:.2f}{outside}: let it settle and "
            "measure before adding more")


def _air_words(plan: Plan) -> str:
    """What an open tank's plan assumed about CO2, and the other case's figures."""
    a, t = plan.air, plan.target
    assert a is not None
    tau_days = a.depth_m / STILL_WATER_KL_M_H / 24.0
    source = ("gas transfer 2.1 cm/h, Cole & Caraco 1998; wind and mixing make it "
              "faster")
    how = (f"in {a.hours:g} h a still tank {a.depth_m:g} m deep gets about "
           f"{a.fraction:.0%} of the way to CO2 equilibrium with air ({source})"
           if a.hours > 0 else
           f"CO2 exchanges with air over days (a still tank {a.depth_m:g} m deep: "
           f"time constant about {tau_days:.2g} days; {source}); set model.hours_in_air "
           "for a water that stands")
    when = f"within {a.hours:g} h of dosing" if a.hours > 0 else "soon after dosing"
    outside = "" if t.contains(a.ph_other) else ", outside the window"
    if a.at_equilibrium:
        other = ("" if a.other_dose_mol_l is None else
                 f"; dosed and read within hours this water needs "
                 f"{fmt(a.other_dose_mol_l * 1000)} mmol/L instead")
        return (f"open to air: the dose is planned for CO2 equilibrium with air: {how}. Right after dosing, before the CO2 exchanges, the pH goes to "
                f"about {a.ph_other:.2f}{outside}{other}")
    ratio = None if a.other_dose_mol_l is None else a.other_dose_mol_l / plan.dose_mol_l
    if ratio is not None and 0.9 <= ratio <= 1.1 and not outside:
        return (f"open to air: the dose is planned for the pH {when}, with the carbonate "
                f"as sampled; standing for days changes little (the pH drifts to about "
                f"{a.ph_other:.2f}, and holding the aim would take {ratio:.0%} of this dose)")
    other = ("" if ratio is None else
             f"; holding the aim then needs {fmt(a.other_dose_mol_l * 1000)} mmol/L, "
             f"{ratio:.2g} times this dose")
    return (f"open to air: the dose is planned for the pH {when}, with the carbonate as "
            f"sampled: {how}. Standing for days the water "
            f"exchanges CO2 and the pH drifts to about {a.ph_other:.2f}{outside}{other}: "
            "re-measure after a day and trim; never dose the long-term figure at once")


def _cap_words(cw: CapWindow, target: Target) -> list[str]:
    """Warnings about the metal caps against the discharge window."""
    names = ", ".join(cw.caps_mg_l)
    if cw.ph_range is None:
        return [f"no pH meets every metal cap ({names}) by hydroxide precipitation "
                "alone: the plant needs another step (sulfide, coagulation, ion "
                "exchange); the permit and a licensed engineer decide"]
    lo, hi = cw.ph_range
    if cw.overlap is None:
        return [f"the metal caps ({names}) are met only between pH {lo:.2f} and "
                f"{hi:.2f}, which does not overlap the discharge window "
                f"{target.ph_min:g} to {target.ph_max:g}: precipitate at that pH, "
                "separate the sludge, then adjust the pH into the window"]
    if not cw.met_at_aim:
        return [f"the aim pH {target.ph_aim:g} misses a metal cap; the caps "
                f"({names}) are met between pH {cw.overlap[0]:.2f} and "
                f"{cw.overlap[1]:.2f} inside the window: move the aim there"]
    return []


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


def _metal_checks(metals_after: Mapping[str, float], caps: Mapping[str, float],
                  target: Target) -> tuple[Check, ...]:
    """One permit check per capped metal, at the aim."""
    out = []
    for metal, cap in caps.items():
        value = metals_after[metal]
        over = value > cap
        out.append(Check(f"permit-{metal}_mg_l", "danger" if over else "info",
                         f"permit cap {label(metal)} {cap:g} mg/L: "
                         f"{fmt(value)} mg/L dissolved at pH {target.ph_aim:g}"
                         + (" - EXCEEDS THE CAP" if over else " - within the cap"),
                         {"value_mg_l": value, "cap_mg_l": cap}))
    return tuple(out)


def mix_closed(water: Water) -> Mixture:
    """The water as measured, before any exchange with air."""
    return replace(water.mixture(), co2_air_mol_l=np.full(1, math.nan))


def titration_curve(water: Water, reagent: Reagent, max_dose_mol_l: float,
                    *, points: int = 301) -> TitrationCurve:
    """pH and buffer intensity against dose, from 0 to ``max_dose_mol_l``.

    The two ends are forward solves; in between the curve is laid out on an
    even grid of pH and each dose comes from the direct fixed-pH solve (one
    vectorised call), which puts points where the pH moves, steep jumps
    included.
    """
    if not (math.isfinite(max_dose_mol_l) and max_dose_mol_l > 0):
        raise InputError("max_dose_mol_l", f"{max_dose_mol_l!r}; allowed: above 0")
    if points < 3:
        raise InputError("points", "a curve needs at least 3 points")
    mix = water.mixture()
    vec = reagent.vector()
    ends = add_dose(_repeat(mix, 2), vec, np.array([0.0, max_dose_mol_l]))
    p0, p1 = solve_ph(ends, ph_guess=np.full(2, water.ph))
    grid = np.linspace(p0, p1, points)
    d, _ = dose_to_ph(_repeat(mix, points), vec, grid)
    d[0], d[-1] = 0.0, max_dose_mol_l
    keep = np.isfinite(d) & (d >= 0.0) & (d <= max_dose_mol_l)
    keep[[0, -1]] = True
    grid, d = grid[keep], d[keep]
    order = np.argsort(d, kind="stable")
    grid, d = grid[order], d[order]
    dosed = add_dose(_repeat(mix, d.size), vec, d)
    beta = speciate(dosed, grid).buffer_intensity_eq_l
    return TitrationCurve(d, grid, beta)


def _repeat(mix: Mixture, n: int) -> Mixture:
    """A one-row mixture repeated n times."""
    return mix.take(np.zeros(n, dtype=int))
