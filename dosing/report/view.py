"""One typed view of a plan, built once, read by every rendering.

:func:`plan_view` takes a scenario and its plan and works out, once, every
figure a rendering shows beside the plan's own: the dose and the window band
in product units, the cost, the daily use and how long the storage lasts,
the sludge and the solids per batch or hour, the doses of the uncertainty,
the staged dose and the control design in product, the dose the shift log
offers, and the checks in the order people read them. The text sheet
(:mod:`dosing.report.sheet`), the JSON (:mod:`dosing.report.plan_json`),
Tankside and the figures read this view; none of them reads another's
output.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..planning.basis import Amounts, Flow
from ..planning.findings import Finding, Q, note
from ..planning.job import Scenario
from ..planning.plan import Plan
from ..planning.plan_findings import permit_breaches
from ..planning.solids import Sludge, sludge_of
from .words import sorted_findings

__all__ = ["PlanView", "Supply", "plan_view"]


@dataclass(frozen=True)
class Supply:
    """Daily use and how long the storage lasts (None where it does not apply)."""

    kg_product_per_day: float | None     #: a flow's daily use [kg/day]
    days: float | None                   #: a flow's storage lasts [days]
    batches: float | None                #: a batch's storage lasts [batches]


@dataclass(frozen=True)
class PlanView:
    """Everything a rendering shows of one plan, in SI units, computed once.

    Amounts are per batch for a batch and per hour for a flow.
    """

    scenario: Scenario
    plan: Plan
    dose: Amounts                         #: the planned dose
    band: tuple[Amounts, Amounts | None]  #: doses that keep the pH in the window
    cost: float | None                    #: price of the dose, as the scenario gives it
    supply: Supply
    sludge: Sludge
    solid_kg: tuple[float, ...]           #: each solid of the plan [kg]
    spread: tuple[Amounts, Amounts, Amounts] | None   #: dose needed, 5th, 50th, 95th pct
    first: Amounts | None                 #: the staged first dose
    trim: tuple[Amounts | None, ...]      #: extra per trim row (None: at or past the aim)
    offered: Amounts | None               #: the dose with the shift log's bias
    rate_kg_h: tuple[float, float] | None      #: control design pump range [kg/h]
    rate_l_h: tuple[float, float] | None       #: [L/h]
    checks: tuple[Finding, ...]           #: dangers first, then warnings, then the rest
    breaches: tuple[Finding, ...]         #: permit checks broken
    flags: tuple[Finding, ...] = ()       #: what the view itself flags (storage, staging)

    @property
    def warnings(self) -> tuple[Finding, ...]:
        """Every warning of the plan and of the view: what the sheet flags
        is what the JSON and the log carry."""
        return tuple(self.plan.warnings) + self.flags

    @property
    def flow(self) -> bool:
        """A continuous stream (amounts per hour)."""
        return isinstance(self.plan.basis, Flow)

    @property
    def suffix(self) -> str:
        """Suffix of the JSON amount keys: "_per_h" for a flow, "" for a batch."""
        return "_per_h" if self.flow else ""

    def amounts(self, mol_l: float) -> Amounts:
        """Any other dose of this plan in product units."""
        return self.plan.amounts(mol_l)


def plan_view(scenario: Scenario, plan: Plan) -> PlanView:
    """The view of ``plan`` (made for ``scenario``)."""
    a = plan.amounts()
    lo, hi = plan.band_mol_l
    litres = plan.basis.litres
    unc, st, bias = plan.uncertainty, plan.staging, plan.log_bias
    return PlanView(
        scenario=scenario, plan=plan, dose=a,
        band=(plan.amounts(lo), None if hi is None else plan.amounts(hi)),
        cost=(None if scenario.price_per_kg is None or a.kg_product is None
              else a.kg_product * scenario.price_per_kg),
        supply=_supply(scenario, plan, a),
        sludge=sludge_of(plan.solids, litres, solids_fraction=scenario.sludge[0],
                         cake_density_kg_l=scenario.sludge[1]),
        solid_kg=tuple(x.mg_per_l * litres / 1e6 for x in plan.solids),
        spread=(None if unc is None else
                tuple(plan.amounts(m) for m in (unc.p05_mol_l, unc.p50_mol_l, unc.p95_mol_l))),
        first=None if st is None else plan.amounts(st.first_mol_l),
        trim=() if st is None else tuple(None if r.extra_mol_l is None
                                         else plan.amounts(r.extra_mol_l) for r in st.trim),
        offered=None if bias is None else plan.amounts(plan.dose_mol_l * bias.mean_ratio),
        **_rates(plan),
        checks=tuple(sorted_findings(plan.checks)),
        breaches=permit_breaches(plan),
        flags=_flags(scenario, plan, a))


def _flags(scenario: Scenario, plan: Plan, a: Amounts) -> tuple[Finding, ...]:
    """Warnings that come from the job around the plan: a store that cannot
    hold one batch, a staged dose that still lands outside the window too often."""
    out = []
    supply = _supply(scenario, plan, a)
    if supply.batches is not None and supply.batches < 1:
        out.append(note("storage-short", "LESS THAN ONE BATCH in store ({batches:.2g} "
                        "batches): the store cannot hold this dose; order more before "
                        "starting", "warning", batches=Q(supply.batches)))
    st = plan.staging
    if st is not None and st.p_inside < st.confidence:
        out.append(note("staged-short", "even staged, this lands in the window in only "
                        "{p_inside} of the plausible waters: the window is narrower than "
                        "this product can be metered to. Finish with a dilute reagent in "
                        "small steps, or widen the aim with the engineer", "warning",
                        p_inside=Q(st.p_inside, "%")))
    return tuple(out)


def _supply(scenario: Scenario, plan: Plan, a: Amounts) -> Supply:
    """Daily use and days (or batches) of supply."""
    flow = isinstance(plan.basis, Flow)
    per_day = (a.kg_product * scenario.hours_per_day
               if flow and a.kg_product is not None else None)
    lasts = scenario.storage_lasts(a.litres_product, a.kg_product)
    return Supply(per_day, None if lasts is None or not flow else lasts / scenario.hours_per_day,
                  None if lasts is None or flow else lasts)


def _rates(plan: Plan) -> dict:
    """The control design's pump range in product [kg/h] and [L/h]."""
    c = plan.control
    kg, litres = plan.reagent.kg_product_per_mol, plan.reagent.litres_product_per_mol
    if c is None:
        return {"rate_kg_h": None, "rate_l_h": None}
    return {"rate_kg_h": None if kg is None else (c.rate_low_mol_h * kg, c.rate_high_mol_h * kg),
            "rate_l_h": (None if litres is None
                         else (c.rate_low_mol_h * litres, c.rate_high_mol_h * litres))}
