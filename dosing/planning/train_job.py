"""The train of a scenario, as every front end shows it: its own steps, or the one the planner proposes.

:func:`make_train` plans a scenario's ``[[step]]`` list, or, for a scenario
of one dose whose plan cannot meet the window and the metal caps together,
the train :mod:`.train_proposal` proposes. A proposed train whose discharge
breaks a metal cap on the total basis because of the solids the separation
lets through is planned again with the removal the caps need (total metal
is conserved through the re-adjust, so that removal is known from the
precipitation step), and the sheet says so.
"""

from __future__ import annotations

import math
from dataclasses import replace

from ..errors import InputError, ModelError, ScenarioError, UnreachableError
from .findings import Finding, Q
from .job import Scenario, ferrous_finding, scenario_key
from .plan import Plan
from .train_plan import TrainPlan, plan_train
from .train_proposal import propose

__all__ = ["make_train", "needed_removal"]


def make_train(scenario: Scenario, plan: Plan | None = None) -> TrainPlan | None:
    """The scenario's train, or the one proposed for its one-dose ``plan``;
    None when one dose will do.

    Raises
    ------
    ScenarioError
        Naming the scenario file and the step's key when a step cannot be planned.
    """
    try:
        return _train(scenario, plan)
    except UnreachableError as err:
        raise ScenarioError(scenario.source, "target.ph_aim", str(err)) from None
    except InputError as err:
        raise ScenarioError(scenario.source, scenario_key(err.field), err.reason) from None
    except ModelError as err:
        raise ScenarioError(scenario.source, "[step]", str(err)) from None


def _train(scenario: Scenario, plan: Plan | None) -> TrainPlan | None:
    common = dict(sludge=scenario.sludge, metals_basis=scenario.metals_basis,
                  prices={} if scenario.price_per_kg is None or scenario.reagent is None
                  else {scenario.reagent.id: scenario.price_per_kg})
    if scenario.train:
        tp = plan_train(scenario.train, scenario.water, scenario.basis, scenario.target,
                        scenario.permit, **common)
        extra = _ferrous_in_train(scenario)
        return replace(tp, warnings=tp.warnings + extra) if extra else tp
    if plan is None:
        return None
    found = propose(plan, scenario.permit, scenario.readjust)
    if found is None:
        return None
    steps, why = found
    steps = (replace(steps[0], price_per_kg=scenario.price_per_kg),) + steps[1:]
    tp = plan_train(steps, scenario.water, scenario.basis, scenario.target, scenario.permit,
                    proposed=True, why=why, **common)
    return _with_removal(tp, steps, scenario, why, common)


def needed_removal(tp: TrainPlan) -> tuple[float, list[str]]:
    """The share of the solids the separation must remove for every metal cap
    to hold on the total basis, and the metals no removal can bring under
    (dissolved over the cap already at the precipitation pH)."""
    first = tp.steps[0]
    out, hopeless = 0.0, []
    for c in tp.discharge.metals:
        dissolved = first.metals_mg_l.get(c.metal, 0.0)
        solid = c.dissolved_mg_l + c.suspended_mg_l - dissolved
        if c.met:
            continue
        if dissolved >= c.cap_mg_l or solid <= 0:
            hopeless.append(c.metal)
            continue
        # What passes, (1 - r) of the solid after separation, is solid * (1 - r) / (1 - r0).
        passed_share = 1.0 - tp.steps[1].spec.removal
        out = max(out, 1.0 - (c.cap_mg_l - dissolved) / (solid / passed_share))
    return out, hopeless


def _with_removal(tp: TrainPlan, steps, scenario: Scenario, why: Finding, common) -> TrainPlan:
    if tp.discharge.met or tp.discharge.metals == ():
        return tp
    r, hopeless = needed_removal(tp)
    if hopeless or r <= steps[1].removal:
        return tp
    r = min(math.ceil(r * 1000.0) / 1000.0, 0.999)
    steps = (steps[0], replace(steps[1], removal=r, label="clarifier and filter")) + steps[2:]
    note = Finding("removal-needed", "warning",
                   "meeting the metal caps as total metal (dissolved plus the solids let "
                   "through) needs {removal:.1%} of the solids removed: a clarifier alone "
                   "keeps about 98 %; follow it with a sand or cartridge filter (common "
                   "practice) and check the suspended solids of the discharge",
                   {"removal": Q(r, "%")})
    why = replace(why, quantities={**why.quantities, "removal": Q(r, "%")})
    again = plan_train(steps, scenario.water, scenario.basis, scenario.target, scenario.permit,
                       proposed=True, why=why, **common)
    return replace(again, warnings=again.warnings + (note,))


def _ferrous_in_train(scenario: Scenario) -> tuple[Finding, ...]:
    """The iron(II) warning for a train whose first dose comes before any oxidation."""
    for spec in scenario.train:
        if spec.kind == "oxidise":
            return ()
        if spec.kind == "dose":
            found = ferrous_finding(scenario.water, spec.reagent, spec.target, scenario.basis)
            return (found,) if found else ()
    return ()
