"""The job a scenario describes, and planning it.

A :class:`Scenario` is one dosing job, validated: the water inferred from
what was measured, the batch or flow, the window, the product, and the plant
figures that go with them (price, storage, permit caps, sludge cake, the
uncertainty of each input). :mod:`dosing.io.scenario` reads it from a TOML
file; the interactive view builds it from its form.

:func:`make_plan` plans it the way every front end shows it: the dose, how
far it moves within each reading's precision, the sampled uncertainty with
a staged dose where a batch is at risk, and the control design of a flow.
Errors name the scenario file and its key (:func:`scenario_key`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any, Mapping

from ..chem.activity import AUTO, DAVIES, DAVIES_I_LIMIT, SIT, kg_water_per_l
from ..errors import InputError, ModelError, ScenarioError, UnreachableError
from .control import control_design
from .effluent import Water, with_sit
from .findings import Finding, Q
from .measurements import Measurements
from .plan import Batch, Flow, Plan, Target, plan_dose
from .precision import lab_sensitivity, precision_warning
from .reagents import Reagent
from .solids import CAKE_DENSITY_KG_L, CAKE_SOLIDS_FRACTION
from .uncertainty import MATERIAL_RISK, Spread, dose_uncertainty, staged_dose

__all__ = ["Scenario", "SECTIONS", "MODEL_FIELDS", "scenario_key", "make_plan",
           "with_uncertainty"]

#: The tables of a scenario file, in the order they are written.
SECTIONS = ("effluent", "batch", "flow", "target", "reagent", "model", "permit", "sludge",
            "uncertainty")
#: Engine fields that a scenario keeps under [model] (the rest of the
#: measurements are under [effluent]).
MODEL_FIELDS = ("activity", "pco2_uatm", "open_to_air", "hours_in_air", "depth_m", "calcite")


@dataclass(frozen=True)
class Scenario:
    """A validated scenario.

    Attributes
    ----------
    title, site, tank : str
        Labels for the sheet and the shift log.
    measurements : Measurements or None
        What the water was inferred from; None for a water found otherwise
        (fitted to a bench titration).
    water : Water
        The effluent inferred from the measurements.
    basis : Batch or Flow
        The amount of water.
    target : Target
        The window and aim.
    reagent : Reagent
        The product.
    price_per_kg : float or None
        Product price per kg, any currency.
    storage_m3, storage_kg : float or None
        Reagent storage available, for days of supply.
    hours_per_day : float
        Hours a flow runs each day [h].
    permit : Mapping[str, float]
        Caps from the [permit] table [mg/L].
    sludge : (float, float)
        Dry-solids fraction [-] and density [kg/L] of the wet sludge cake.
    spread : Spread
        Uncertainty of each input, from the [uncertainty] table.
    flow_range_m3_h : (float, float) or None
        Lowest and highest flow of a stream, for the control design.
    train : tuple of StepSpec
        The steps of a treatment train (:mod:`dosing.planning.train`); empty
        for one dose (the planner may still propose a train).
    readjust : Reagent or None
        The product a proposed train brings the water back into the window
        with ([reagent] readjust_id); None: the planner chooses.
    metals_basis : {"total", "dissolved"}
        What the permit's metal caps cap in a train's discharge.
    source : str
        The file it came from, for messages.
    data : Mapping
        The scenario as plain data (what the scenario writer writes back).
    """

    title: str
    site: str
    tank: str
    measurements: Measurements | None
    water: Water
    basis: Batch | Flow
    target: Target
    reagent: Reagent
    price_per_kg: float | None
    storage_m3: float | None
    storage_kg: float | None
    hours_per_day: float
    permit: Mapping[str, float] = field(default_factory=dict)
    data: Mapping[str, Any] = field(default_factory=dict)
    sludge: tuple[float, float] = (CAKE_SOLIDS_FRACTION, CAKE_DENSITY_KG_L)
    source: str = "<scenario>"
    spread: Spread = field(default_factory=Spread)
    flow_range_m3_h: tuple[float, float] | None = None
    train: tuple = ()                      #: the [[step]] list (StepSpec), empty: one dose
    readjust: Reagent | None = None        #: product to come back into the window, if named
    metals_basis: str = "total"            #: what the permit's metal caps cap
    currency: str = ""                     #: what prices are in ("": as given, unnamed)
    disturbances: tuple = ()               #: [[disturbance]] steps and ramps (Disturbance)

    def storage_lasts(self, litres_used: float | None, kg_used: float | None) -> float | None:
        """How many periods the storage lasts at the given use per period.

        Storage by volume is divided by the litres used, storage by mass by
        the kilograms. None when no storage is given, nothing is used, or the
        use is so small that the ratio is no finite number (a flow of 1e-311
        m3/h would otherwise last "infinity" periods).
        """
        if self.storage_m3 and litres_used:
            periods = self.storage_m3 * 1000.0 / litres_used
        elif self.storage_kg and kg_used:
            periods = self.storage_kg / kg_used
        else:
            return None
        return periods if math.isfinite(periods) else None


def scenario_key(field_name: str) -> str:
    """The scenario key an engine field name came from (``ph`` -> ``effluent.ph``)."""
    head = field_name.split(".")[0]
    if head in SECTIONS or head.startswith("step"):
        return field_name
    if head in MODEL_FIELDS:
        return f"model.{field_name}"
    return f"effluent.{field_name}"


def make_plan(scenario: Scenario, *, sampled: bool = True) -> Plan:
    """Plan the dose a scenario asks for (with its permit caps).

    With ``sampled`` (the default) the plan carries its sampled uncertainty
    and, for a batch at risk, a staged dose (:func:`with_uncertainty`); the
    interactive view plans without and adds them in the background.

    Raises
    ------
    ScenarioError
        Naming the scenario file and the key at fault when the aim cannot
        be reached, an input is refused, or the model cannot give a number.
    """
    try:
        plan = _planned(scenario)
    except UnreachableError as err:
        raise ScenarioError(scenario.source, "target.ph_aim", str(err)) from None
    except InputError as err:
        raise ScenarioError(scenario.source, scenario_key(err.field), err.reason) from None
    except ModelError as err:
        raise ScenarioError(scenario.source, "[effluent]", str(err)) from None
    if not plan.dose_needed or scenario.measurements is None:
        return plan
    sens = lab_sensitivity(_measured(scenario, plan), scenario.reagent,
                           scenario.target.ph_aim)
    words = precision_warning(sens, plan.dose_mol_l)
    ferrous = ferrous_finding(plan.water, scenario.reagent, scenario.target, scenario.basis)
    plan = replace(plan, precision=sens, warnings=plan.warnings + tuple(
        f for f in (words, ferrous) if f is not None))
    if sampled:
        return with_uncertainty(scenario, plan)
    return replace(plan, control=control_design(plan, scenario.flow_range_m3_h))


def _planned(scenario: Scenario) -> Plan:
    """The plan with the activity model the dosed water needs: a water that
    "auto" left with Davies but whose dose takes it past Davies' range is
    planned again with the specific ion interaction model; a dosed water
    past that model's range is refused."""
    plan = plan_dose(scenario.water, scenario.reagent, scenario.target, scenario.basis,
                     permit=scenario.permit)
    m = scenario.measurements
    if (m is not None and m.activity == AUTO and plan.water.activity is DAVIES
            and plan.ionic_strength_end > DAVIES_I_LIMIT):
        water = with_sit(m, plan.ionic_strength_end)
        plan = plan_dose(water, scenario.reagent, scenario.target, scenario.basis,
                         permit=scenario.permit)
    model, end = plan.water.activity, plan.ionic_strength_end
    if model is SIT and end / float(kg_water_per_l(end)) > model.limit_mol_l:
        raise InputError("activity", f"the dosed water's ionic strength, "
                         f"{end / float(kg_water_per_l(end)):.2g} mol/kg, is beyond what the "
                         "specific ion interaction coefficients cover "
                         f"({model.limit_mol_l:g} mol/kg): plan from a bench titration, or "
                         "a weaker reagent")
    return plan


def with_uncertainty(scenario: Scenario, plan: Plan) -> Plan:
    """The plan with its sampled uncertainty and, for a batch at risk, a staged dose."""
    if not plan.dose_needed or scenario.measurements is None:
        return plan
    plan = _sampled(scenario, plan)
    return replace(plan, control=control_design(plan, scenario.flow_range_m3_h))


def _measured(scenario: Scenario, plan: Plan) -> Measurements:
    """The scenario's measurements, with the plan's calcite case and activity
    model (each "auto" may have chosen), for re-inferring its water."""
    return replace(scenario.measurements, calcite=plan.water.calcite,
                   activity=plan.water.activity)


def _sampled(scenario: Scenario, plan: Plan) -> Plan:
    spread = scenario.spread
    unc = dose_uncertainty(_measured(scenario, plan), plan, spread)
    if unc is None:
        return plan
    staging = None
    if isinstance(plan.basis, Batch) and unc.p_outside > MATERIAL_RISK:
        staging = staged_dose(plan, unc, spread)
    return replace(plan, uncertainty=unc, staging=staging)


def ferrous_finding(water: Water, reagent: Reagent, target: Target, basis: Batch | Flow
                    ) -> Finding | None:
    """Iron(II) planned as sampled: the dose with it oxidised first, beside it."""
    fe2 = water.metals_mol_l.get("iron_ii", 0.0)
    if fe2 <= 0.0 or water.ferrous_oxidised:
        return None
    try:
        here = plan_dose(water, reagent, target, basis)
        oxid = plan_dose(replace(water, ferrous_oxidised=True), reagent, target, basis)
    except (InputError, UnreachableError, ModelError):
        return None
    a, b = here.amounts(), oxid.amounts()
    if a.kg_product is None or b.kg_product is None or a.kg_product <= 0:
        return None
    return Finding(
        "ferrous", "warning",
        "iron(II) {fe2_mg_l} is planned as dissolved ferrous iron, as sampled: {kg} {per}. "
        "If the tank aerates, or the iron is oxidised first (as most plants do, since "
        "ferrous iron stays dissolved to about pH 9), the dose becomes {kg_ox} "
        "({change:+.0%}): plan with an oxidise step, or set effluent.oxidise_ferrous",
        {"fe2_mg_l": Q(fe2 * 55845.0, "mg/L"), "kg": Q(a.kg_product, "kg"),
         "kg_ox": Q(b.kg_product, "kg"), "change": Q(b.kg_product / a.kg_product - 1.0, "%")},
        {"per": basis.per})
