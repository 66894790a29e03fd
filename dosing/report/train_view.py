"""One typed view of a treatment train, built once, read by the sheet, the JSON and the figure.

:func:`train_view` works out, once, every figure a rendering shows of a
:class:`~dosing.planning.train_plan.TrainPlan`: each step's dose and
product in operator units, the solids it forms and the ones it removes per
batch or hour, its own warnings, the totals per product with their cost,
the sludge, the discharge checks and the train's warnings, dangers first.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..planning.basis import Amounts, Flow
from ..planning.findings import Finding
from ..planning.job import Scenario
from ..planning.train import StepResult
from ..planning.train_plan import ProductTotal, TrainPlan
from .words import sorted_findings

__all__ = ["StepView", "TrainView", "train_view", "STEP_WORDS"]

#: How the sheet names each kind of step.
STEP_WORDS = {"blend": "BLEND", "oxidise": "OXIDISE", "dose": "DOSE", "separate": "SEPARATE"}


@dataclass(frozen=True)
class StepView:
    """One step as the renderings show it (amounts per batch or per hour)."""

    number: int
    result: StepResult
    dose: Amounts | None                   #: a dose step's product, or an oxidant's
    solid_kg: tuple[tuple[str, float, float], ...]    #: (formula, mg/L, kg) present after
    removed_kg: tuple[tuple[str, float, float], ...]  #: (formula, mg/L, kg) a separation took
    warnings: tuple[Finding, ...]          #: the step's own, dangers first

    @property
    def kind(self) -> str:
        return self.result.spec.kind


@dataclass(frozen=True)
class TrainView:
    """Everything a rendering shows of a train, in SI units, computed once."""

    scenario: Scenario
    train: TrainPlan
    steps: tuple[StepView, ...]
    products: tuple[ProductTotal, ...]
    cost: float | None                     #: every product priced, summed; else None
    warnings: tuple[Finding, ...]          #: the train's, dangers first
    checks: tuple[Finding, ...]            #: the discharge checks, dangers first

    @property
    def flow(self) -> bool:
        return isinstance(self.train.basis, Flow)

    @property
    def suffix(self) -> str:
        return "_per_h" if self.flow else ""


def _step_view(i: int, r: StepResult, litres: float) -> StepView:
    dose = None
    if r.plan is not None:
        dose = r.plan.amounts()
    elif r.product is not None:
        dose = r.product
    own = list(r.findings)
    if r.plan is not None:
        own += [f for f in r.plan.warnings + r.plan.checks if f.level in ("danger", "warning")
                or f.id.startswith(("limit-", "ligand-"))]
    return StepView(
        i, r, dose,
        tuple((s.formula, s.mg_per_l, s.mg_per_l * litres / 1e6) for s in r.solids),
        tuple((s.formula, s.mg_per_l, s.mg_per_l * litres / 1e6) for s in r.removed),
        tuple(sorted_findings(own)))


def train_view(scenario: Scenario, train: TrainPlan) -> TrainView:
    """The view of ``train`` (planned for ``scenario``)."""
    litres = train.basis.litres
    costs = [p.cost for p in train.products]
    return TrainView(
        scenario, train,
        tuple(_step_view(i, r, litres) for i, r in enumerate(train.steps, start=1)),
        train.products,
        None if not costs or any(c is None for c in costs) else sum(costs),
        tuple(sorted_findings(train.warnings)),
        tuple(sorted_findings(train.discharge.checks)))
