"""A planned treatment train: the steps run, the discharge checked, the totals summed.

:func:`plan_train` runs the steps of a train (:mod:`.train`) on the water
entering it, checks the water leaving the last step against the window and
the permit (:mod:`.discharge`) and sums what the operator needs: each
product's total, the sludge of every separation, the cautions of every
product, and the warnings that belong to the train as a whole (the water
must not be discharged between steps; iron(II) planned without oxidation).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

from .basis import Amounts, Batch, Flow, Target, amounts_for
from .discharge import Discharge, discharge_of
from .effluent import Water
from .findings import Finding, Q
from .reagents import GENERAL_CAUTION, Reagent
from .solids import Sludge
from .train import StepResult, StepSpec
from .train_run import run_train

__all__ = ["ProductTotal", "TrainPlan", "plan_train"]


@dataclass(frozen=True)
class ProductTotal:
    """One product over the whole train, per batch or per hour."""

    reagent: Reagent
    amounts: Amounts
    steps: tuple[int, ...]                 #: the steps (1-based) that use it
    price_per_kg: float | None

    @property
    def cost(self) -> float | None:
        if self.price_per_kg is None or self.amounts.kg_product is None:
            return None
        return self.price_per_kg * self.amounts.kg_product


@dataclass(frozen=True)
class TrainPlan:
    """A train as planned."""

    steps: tuple[StepResult, ...]
    basis: Batch | Flow
    target: Target
    discharge: Discharge
    products: tuple[ProductTotal, ...]
    sludge: Sludge | None                  #: every separation's, summed
    proposed: bool                         #: the planner proposed it
    warnings: tuple[Finding, ...]
    cautions: tuple[str, ...]

    @property
    def water_in(self) -> Water:
        return self.steps[0].water_in


def plan_train(steps: tuple[StepSpec, ...], water: Water, basis: Batch | Flow, target: Target,
               permit: Mapping[str, float], *, sludge: tuple[float, float],
               metals_basis: str = "total", proposed: bool = False,
               why: Finding | None = None, prices: Mapping[str, float] | None = None
               ) -> TrainPlan:
    """Run and check a train (see the module notes)."""
    results = run_train(steps, water, basis, sludge=sludge)
    tds = sum(_tds_added(r) for r in results)
    discharge = discharge_of(results[-1].water_out, target, permit, tds, metals_basis)
    warnings = ([why] if why is not None else []) + _hold_words(results, target)
    warnings += [c.wrapped("DISCHARGE BREACH: ", id=f"breach-{c.id}")
                 for c in discharge.checks if c.level == "danger"]
    return TrainPlan(results, basis, target, discharge, _products(results, basis, prices or {}),
                     _sludge_sum(results), proposed, tuple(warnings), _cautions(results))


def _tds_added(r: StepResult) -> float:
    if r.plan is None:
        return 0.0
    found = next((c for c in r.plan.checks if c.id == "discharge"), None)
    return 0.0 if found is None else float(found.values.get("tds_increase_mg_l") or 0.0)


def _hold_words(results, target: Target) -> list[Finding]:
    """The water between steps outside the window: not to be discharged."""
    held = [(i, r.ph_out) for i, r in enumerate(results[:-1], start=1)
            if not target.contains(r.ph_out)]
    if not held:
        return []
    steps = ", ".join(str(i) for i, _ in held[:-1]) + (" and " if len(held) > 1 else "") \
        + str(held[-1][0])
    lo, hi = min(p for _, p in held), max(p for _, p in held)
    return [Finding("hold", "warning",
                    "the water leaving step{s} {steps} (pH {lo:.2f}" + (" to {hi:.2f}" if
                                                                      hi - lo >= 0.005 else "")
                    + ") is outside the discharge window: it must not be discharged; it "
                    "goes on to the next step",
                    {"lo": Q(lo, "pH"), "hi": Q(hi, "pH")},
                    {"s": "s" if len(held) > 1 else "", "steps": steps})]


def _products(results, basis, prices: Mapping[str, float]) -> tuple[ProductTotal, ...]:
    """Each product's total over the steps that use it."""
    mol: dict[str, float] = {}
    where: dict[str, list[int]] = {}
    reagents: dict[str, Reagent] = {}
    for i, r in enumerate(results, start=1):
        reagent, dose = None, 0.0
        if r.plan is not None and r.plan.dose_needed:
            reagent, dose = r.plan.reagent, r.plan.dose_mol_l
        elif r.product is not None:
            reagent, dose = r.spec.reagent, r.product.mmol_per_l / 1000.0
        if reagent is None:
            continue
        mol[reagent.id] = mol.get(reagent.id, 0.0) + dose
        where.setdefault(reagent.id, []).append(i)
        reagents[reagent.id] = reagent
    price = {r.spec.reagent.id: r.spec.price_per_kg for r in results
             if r.spec.reagent is not None and r.spec.price_per_kg is not None}
    return tuple(ProductTotal(reagents[k], amounts_for(v, reagents[k], basis), tuple(where[k]),
                              price.get(k, prices.get(k))) for k, v in mol.items())


def _sludge_sum(results) -> Sludge | None:
    parts = [r.sludge for r in results if r.sludge is not None]
    if not parts:
        return None
    dry = sum(p.dry_kg for p in parts)
    cake = sum(p.cake_kg for p in parts)
    return Sludge(dry, cake, sum(p.cake_m3 for p in parts), parts[0].solids_fraction,
                  parts[0].cake_density_kg_l)


def _cautions(results) -> tuple[str, ...]:
    out: list[str] = []
    for r in results:
        reagent = r.spec.reagent
        if reagent is not None:
            out += [c for c in reagent.cautions if c not in out]
    return tuple(out) + (GENERAL_CAUTION,)
