"""Side-by-side doses for a range of tank volumes (or flows) and reagents.

The dose per litre does not depend on the volume, so a sweep plans once per
reagent and scales; every cell still comes from :func:`plan_dose`.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from ..errors import DosingError
from .plan import Amounts, Batch, Flow, Plan, amounts_for, plan_dose
from .reagents import Reagent, get_reagent
from .strengths import ALTERNATIVE, at_strength, strengths_of
from .job import Scenario

__all__ = ["train_sweep", "SweepCell", "Sweep", "sweep", "strength_grid", "default_alternative",
           "default_sizes"]

def default_alternative(reagent: Reagent) -> str:
    """The catalogue product most worth comparing with ``reagent``."""
    if reagent.id in ALTERNATIVE:
        return ALTERNATIVE[reagent.id]
    return "caustic-50" if reagent.raises_ph else "sulfuric-98"


def default_sizes(basis: Batch | Flow) -> tuple[float, ...]:
    """Tank volumes [m3] or flows [m3/h] around the scenario's own."""
    v = basis.volume_m3 if isinstance(basis, Batch) else basis.m3_per_h
    return tuple(round(v * f, 6) for f in (0.25, 0.5, 1.0, 2.0, 4.0))


@dataclass(frozen=True)
class SweepCell:
    """One size and reagent: the amounts, or why there are none."""

    amounts: Amounts | None
    problem: str = ""


@dataclass(frozen=True)
class Sweep:
    """Rows are sizes, columns reagents."""

    sizes: tuple[float, ...]
    per_flow: bool
    reagents: tuple[Reagent, ...]
    cells: tuple[tuple[SweepCell, ...], ...]


def sweep(scenario: Scenario, reagents: tuple[Reagent | str, ...],
          sizes: tuple[float, ...], *, known: dict[str, Plan] | None = None) -> Sweep:
    """Doses of each reagent for each size (m3 per batch or m3/h).

    ``known`` holds plans already made for this scenario, by reagent id, so
    they are not made again.
    """
    rs = tuple(get_reagent(r) if isinstance(r, str) else r for r in reagents)
    flow = isinstance(scenario.basis, Flow)
    per_reagent = []
    for r in rs:
        if known and r.id in known and known[r.id].reagent is r:
            per_reagent.append((known[r.id].dose_mol_l, ""))
            continue
        try:
            plan = plan_dose(scenario.water, r, scenario.target, scenario.basis,
                             curve_points=3)
            per_reagent.append((plan.dose_mol_l, ""))
        except DosingError as err:
            per_reagent.append((None, str(err)))
    rows = []
    for size in sizes:
        basis = Flow(size) if flow else Batch(size)
        row = []
        for r, (dose, problem) in zip(rs, per_reagent):
            row.append(SweepCell(None, problem) if dose is None
                       else SweepCell(amounts_for(dose, r, basis)))
        rows.append(tuple(row))
    return Sweep(tuple(sizes), flow, rs, tuple(rows))


def strength_grid(scenario: Scenario, sizes: tuple[float, ...], *,
                  strengths: tuple[float, ...] | None = None,
                  others: tuple[Reagent | str, ...] = (),
                  known: dict[str, Plan] | None = None) -> Sweep:
    """Sizes against strengths: the scenario's product at each strength (its
    usual ones by default, see :func:`~dosing.planning.reagents.strengths_of`), then
    ``others`` side by side. Each strength is planned on its own (a weaker
    solution adds more water with the same moles)."""
    r = scenario.reagent
    products = [at_strength(r, w) for w in (strengths or strengths_of(r))]
    for o in others:
        o = get_reagent(o) if isinstance(o, str) else o
        if all(o.id != p.id for p in products):
            products.append(o)
    return sweep(scenario, tuple(products), sizes, known=known)


def train_sweep(train, sizes: tuple[float, ...]) -> Sweep:
    """A train's dose steps against sizes: each step's product for each tank
    volume or flow (a dose per litre of water does not depend on the size,
    so the train is planned once). Each product is named with its step."""
    flow = isinstance(train.basis, Flow)
    steps = [(i, r) for i, r in enumerate(train.steps, start=1) if r.plan is not None]
    products = tuple(replace(r.plan.reagent, name=f"step {i}: {r.plan.reagent.name}")
                     for i, r in steps)
    rows = []
    for size in sizes:
        basis = Flow(size) if flow else Batch(size)
        rows.append(tuple(SweepCell(amounts_for(r.plan.dose_mol_l, r.plan.reagent, basis))
                          for _, r in steps))
    return Sweep(tuple(sizes), flow, products, tuple(rows))
