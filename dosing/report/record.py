"""What a shift-log entry records of a plan: one dose, or a treatment train whole.

The command line (``dosing log add``) and Tankside (F7) both record through
:func:`record_of`, so an entry reads the same whoever made it: a one-dose
plan's data and the product given; a train's data (every step, the
discharge) with what each dose step was given, by step number.
"""

from __future__ import annotations

from typing import Any, Sequence

from ..errors import InputError
from ..planning.job import Scenario
from ..planning.plan import Plan
from ..planning.train_plan import TrainPlan
from .plan_json import sheet_dict
from .train_json import train_dict, train_keys
from .train_view import train_view

__all__ = ["record_of", "litres_to_kg"]


def litres_to_kg(scenario: Scenario, plan: Plan | None, train: TrainPlan | None,
                 litres: Sequence[float]) -> list[float]:
    """Litres of product given (one figure, or one per dose step of a train)
    as kilograms, by each product's density.

    Raises
    ------
    InputError
        (field ``dosed_l``) A product that is not a solution, or a count
        that does not match the doses.
    """
    reagents = ([plan.reagent] if train is None else
                [r.plan.reagent for r in train.steps if r.plan is not None])
    if len(litres) != len(reagents):
        raise InputError("dosed_l", f"give {len(reagents)} figure(s) in litres, one per dose"
                         " step in step order" if train is not None else
                         "this plan has one dose: give one figure in litres")
    out = []
    for reagent, value in zip(reagents, litres):
        if not reagent.litres_product_per_mol or not reagent.kg_product_per_mol:
            raise InputError("dosed_l", f"{reagent.name} is not measured in litres here: "
                             "give what was dosed in kg (--dosed)")
        out.append(value * reagent.kg_product_per_mol / reagent.litres_product_per_mol)
    return out


def record_of(scenario: Scenario, plan: Plan | None, train: TrainPlan | None,
              given_kg: Sequence[float] | None) -> tuple[dict[str, Any], float | None]:
    """(the plan's data to record, the one dosed figure of a one-dose plan).

    ``given_kg``: the product given, one figure for a one-dose plan, one per
    dose step (in step order) for a train.

    Raises
    ------
    InputError
        (field ``dosed``) When the figures do not match the doses.
    """
    if train is None:
        if given_kg is not None and len(given_kg) != 1:
            raise InputError("dosed", "this plan has one dose: give one figure in kg")
        return sheet_dict(scenario, plan), None if given_kg is None else float(given_kg[0])
    data = (train_dict(scenario, train) if plan is None
            else sheet_dict(scenario, plan) | train_keys(train_view(scenario, train)))
    doses = [s["step"] for s in data["steps"] if s["kind"] == "dose"]
    if given_kg is not None:
        if len(given_kg) != len(doses):
            raise InputError("dosed", f"this train has {len(doses)} dose steps "
                             f"({', '.join(map(str, doses))}): give one figure in kg for "
                             "each, in step order, separated by commas")
        data["given_kg"] = {str(step): float(kg) for step, kg in zip(doses, given_kg)}
    return data, None
