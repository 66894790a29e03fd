"""The treatment train as text: one headline line per step, then each step as a short block.

The operator reads the steps in order (what goes in, the product in kg and
litres, the pH after, the solids formed and removed, the metals left), then
the totals per product and the sludge, the discharge checks, the warnings
(first that the water must not be discharged between steps) and the
cautions of every product, ending with the final-word line.
"""

from __future__ import annotations

from ..chem.metals import HARDNESS, label as metal_label
from ..planning.job import Scenario
from ..planning.train_plan import TrainPlan
from .numbers import fmt
from .sheet import slope_text, sludge_text
from .text import table, wrap
from .train_view import STEP_WORDS, StepView, TrainView, train_view
from .units import NO_CURRENCY, UNIT_SYSTEMS, money_text, product_text
from .words import words

__all__ = ["render_train", "render_train_view", "step_headline", "step_rows", "total_rows",
           "discharge_line", "is_headline_warning"]


def _amount(v: TrainView, a, units: str) -> str:
    return product_text(a.kg_product, a.litres_product, units, per_hour=v.flow)


def step_headline(v: TrainView, s: StepView, units: str = "metric") -> str:
    """One line: what the step does, with its product and the pH it leaves."""
    r, spec = s.result, s.result.spec
    name = f"{s.number} {STEP_WORDS[spec.kind]}" + (f"  {spec.label}" if spec.label else "")
    per = "" if v.flow else f" {v.train.basis.per}"    # a flow's amounts carry their /h
    if spec.kind == "dose":
        if not r.plan.dose_needed:
            return f"{name}: no dose needed, pH {r.ph_out:.2f}"
        return (f"{name}: {_amount(v, s.dose, units)} of {r.plan.reagent.name}{per}: "
                f"pH {r.ph_in:.2f} to {r.ph_out:.2f}")
    if spec.kind == "separate":
        dry = sum(kg for *_, kg in s.removed_kg)
        u = UNIT_SYSTEMS[units]
        return (f"{name}: removes {spec.removal:.1%} of the solids, "
                f"{fmt(dry * u.mass_per_kg)} {u.mass} dry {v.train.basis.per}")
    if spec.kind == "oxidise":
        how = ("by air" if spec.by == "air" else
               f"with {_amount(v, s.dose, units)} of {spec.reagent.name}{per}"
               if s.dose is not None else f"with {spec.reagent.name}")
        return f"{name}: iron(II) to iron(III) {how}: pH {r.ph_in:.2f} to {r.ph_out:.2f}"
    streams = ", ".join(f"{n} ({a:g} {'m³/h' if spec.per_hour else 'm³'})"
                        for n, _, a in spec.streams)
    return f"{name}: {streams}: pH {r.ph_out:.2f}"


def step_rows(v: TrainView, s: StepView, units: str = "metric") -> list[tuple[str, str]]:
    """The (label, value) rows of one step's block."""
    r, u, per = s.result, UNIT_SYSTEMS[units], v.train.basis.per
    rows: list[tuple[str, str]] = []
    if r.plan is not None and r.plan.dose_needed:
        lo, hi = r.plan.band_mol_l
        band = (f"{_amount(v, r.plan.amounts(lo), units)} to "
                f"{_amount(v, r.plan.amounts(hi), units)}" if hi is not None else "n/a")
        rows.append(("active compound", f"{s.dose.mmol_per_l:.3g} mmol/L of "
                     f"{r.plan.reagent.compound.formula}"))
        rows.append(("window band", f"{band} keeps pH {r.plan.target.ph_min:g} to "
                     f"{r.plan.target.ph_max:g}"))
        rows.append(("sensitivity", slope_text(r.plan, u, v.flow)))
    for formula, mg, kg in s.removed_kg:
        rows.append(("removed", f"{formula} {fmt(mg)} mg/L = {fmt(kg * u.mass_per_kg)} "
                     f"{u.mass} {per}"))
    if r.sludge is not None:
        rows.append(("sludge", f"{fmt(r.sludge.dry_kg * u.mass_per_kg)} {u.mass} dry; as wet "
                     f"cake at {r.sludge.solids_fraction:.0%} solids about "
                     f"{fmt(r.sludge.cake_kg * u.mass_per_kg)} {u.mass} {per}"))
    if s.removed_kg == ():
        for formula, mg, kg in s.solid_kg:
            rows.append(("solids present", f"{formula} {fmt(mg)} mg/L = "
                         f"{fmt(kg * u.mass_per_kg)} {u.mass} {per}"))
    metals = {k: x for k, x in r.metals_mg_l.items() if k not in HARDNESS}
    if metals:
        rows.append(("metals left", ", ".join(f"{metal_label(k)} {fmt(x, floor=1e-3)} mg/L"
                                             for k, x in metals.items())
                     + f" dissolved at pH {r.ph_out:.2f}"))
    return rows


def is_headline_warning(w) -> bool:
    """A train warning shown under the steps' headlines (the rest follow the checks)."""
    return w.level == "danger" or w.id == "hold" or w.id == "train-proposed"


def discharge_line(v: TrainView) -> str:
    d = v.train.discharge
    return f"DISCHARGE at pH {d.ph:.2f}: " + ("window and every cap met" if d.met
                                             else "SOMETHING IS NOT MET, see the checks")


def render_train(scenario: Scenario, train: TrainPlan, units: str = "metric",
                 width: int = 78) -> str:
    """The train's sheet as plain text."""
    return render_train_view(train_view(scenario, train), units, width)


def render_train_view(v: TrainView, units: str = "metric", width: int = 78) -> str:
    """:func:`render_train` of a view already built."""
    out: list[str] = []
    head = f"TREATMENT TRAIN  {v.scenario.title}" + ("  (proposed by the planner)"
                                                    if v.train.proposed else "")
    out.extend(wrap(head, width, ""))
    if v.scenario.site or v.scenario.tank:
        out.extend(wrap(" / ".join(x for x in (v.scenario.site, v.scenario.tank) if x),
                        width, "  "))
    out.append("=" * min(width, max(len(head), 40)))
    for s in v.steps:
        out.extend(wrap(step_headline(v, s, units), width, ""))
    out.extend(wrap(discharge_line(v), width, ""))
    for w in v.warnings:
        if is_headline_warning(w):
            out.extend(wrap(words(w, units), width, "!! "))
    for s in v.steps:
        out.append("")
        out.extend(wrap(f"STEP {step_headline(v, s, units)}", width, ""))
        rows = step_rows(v, s, units)
        if rows:
            table(out, rows, width)
        for w in s.warnings:
            out.extend(wrap(words(w, units), width, "  ! "))
    _totals(out, v, units, width)
    out.append("")
    out.append("DISCHARGE CHECKS")
    for c in v.checks:
        out.extend(wrap(words(c, units), width, " !! " if c.level == "danger" else "    "))
    rest = [w for w in v.warnings if not is_headline_warning(w)]
    if rest:
        out.append("")
        out.append("WARNINGS")
        for w in rest:
            out.extend(wrap(words(w, units), width, "  ! "))
    out.append("")
    out.append("CAUTIONS")
    for msg in v.train.cautions:
        out.extend(wrap(msg, width, "  - "))
    return "\n".join(out) + "\n"


def total_rows(v: TrainView, units: str = "metric") -> list[tuple[str, str]]:
    """The products over the whole train, their cost, and the sludge, as (label, value) rows."""
    per, cur = v.train.basis.per, v.scenario.currency
    rows = [(p.reagent.name, f"{_amount(v, p.amounts, units)}"
             + ("" if v.flow else f" {per}") + " (step "
             + ", ".join(str(i) for i in p.steps) + ")"
             + ("" if p.cost is None else f"; cost {money_text(p.cost, cur)} {per}"))
            for p in v.products]
    sl = v.train.sludge
    if sl is not None:
        rows.append(("sludge", sludge_text(sl, units, per)))
    if v.cost is not None:
        rows.append(("cost", f"{money_text(v.cost, cur)} {per}, every product"
                     + ("" if cur else f" {NO_CURRENCY}")))
    return rows


def _totals(out: list[str], v: TrainView, units: str, width: int) -> None:
    rows = total_rows(v, units)
    if rows:
        out.append("")
        out.append("TRAIN TOTALS")
        table(out, rows, width)
