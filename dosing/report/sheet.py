"""The dose sheet as text, and the rows of it that Tankside shows too.

:func:`render_sheet` is the operator's sheet: the dose first, then how to
dose it, then the chemistry for the engineer, then the cautions. The row
builders (:func:`dose_lines`, :func:`metal_lines`, :func:`check_lines`,
:func:`caution_lines`, :func:`staging_lines` ...) read a
:class:`~dosing.report.view.PlanView` and are shared with the terminal view,
so a dose reads the same everywhere, with the same cautions.
"""

from __future__ import annotations

from ..chem.metals import HARDNESS, label as metal_label
from ..planning.basis import Amounts, Batch, Flow
from ..planning.findings import Q
from ..planning.job import Scenario
from ..planning.plan import Plan
from ..planning.plan_findings import METERING_ERROR
from .numbers import fmt
from .text import hanging, table, wrap
from .units import (KG_PER_LB, L_PER_US_GAL, NO_CURRENCY, UNIT_SYSTEMS, money_text,
                    product_text, volume_text)
from .view import PlanView, plan_view
from .words import bias_words, shown, texts, words

__all__ = ["render_sheet", "render_view", "headline", "dose_lines", "metal_lines",
           "check_lines", "caution_lines", "water_lines", "uncertainty_lines", "log_lines",
           "control_lines", "staging_lines", "staging_words", "trim_rows", "water_rows", "amount_text", "dose_axis", "figure_title",
           "STEEP_PH_PER_PERCENT", "slope_text"]


def amount_text(v: PlanView, a: Amounts, units: str = "metric", digits: int = 3) -> str:
    """A dose of this plan in product units, per hour for a flow."""
    return product_text(a.kg_product, a.litres_product, units, digits, per_hour=v.flow)


def metal_lines(v: PlanView, units: str = "metric") -> list[tuple[str, str]]:
    """Solids, sludge, metals left and metal caps as (label, value) rows.

    Empty when the water holds no metal and the dose forms no solid. Shared
    by the text sheet and the terminal view.
    """
    u, plan = UNIT_SYSTEMS[units], v.plan
    per = plan.basis.per
    rows: list[tuple[str, str]] = []
    if plan.ph_ceiling is not None:
        rows.append(("pH ceiling", f"an overdose of {plan.reagent.name} takes this water "
                     f"no higher than about pH {plan.ph_ceiling:.2f}"))
    for x, kg in zip(plan.solids, v.solid_kg):
        rows.append(("solid formed", f"{x.formula} {fmt(x.mg_per_l)} mg/L = "
                     f"{fmt(kg * u.mass_per_kg)} {u.mass} {per}"))
    if plan.solids:
        rows.append(("sludge", sludge_text(v.sludge, units, per)))
    metals = {k: x for k, x in plan.metals_after_mg_l.items() if k not in HARDNESS}
    if metals:
        rows.append(("metals left", ", ".join(
            f"{metal_label(k)} {fmt(x, floor=1e-3)} mg/L" for k, x in metals.items())
                     + f" dissolved at pH {plan.ph_end:.2f} (estimate: a jar test is "
                     "the check)"))
    cw = plan.cap_window
    if cw is not None:
        if cw.ph_range is None:
            text = "no pH meets every cap by hydroxide precipitation alone"
        else:
            text = (f"every cap met between pH {cw.ph_range[0]:.2f} and "
                    f"{cw.ph_range[1]:.2f}; " + (
                        f"inside the window {cw.overlap[0]:.2f} to {cw.overlap[1]:.2f}"
                        if cw.overlap else "DOES NOT OVERLAP THE pH WINDOW"))
        rows.append(("metal caps", text))
    return rows


def dose_lines(v: PlanView, units: str = "metric") -> list[tuple[str, str]]:
    """The dose as (label, value) rows in the chosen units.

    Shared by the text sheet and Tankside, the terminal view.
    """
    u, plan, scenario = UNIT_SYSTEMS[units], v.plan, v.scenario
    a = v.dose
    per = plan.basis.per
    flow = v.flow
    rows: list[tuple[str, str]] = []

    def product(am, digits: int = 3) -> str:
        return product_text(am.kg_product, am.litres_product, units, digits, per_hour=flow)

    rows.append((f"product {per}", product(a)))
    rows.append(("active compound",
                 f"{fmt(a.kg_active * u.mass_per_kg)} {u.mass}{'/h' if flow else ''} "
                 f"{plan.reagent.compound.formula} ({fmt(a.mmol_per_l)} mmol/L)"))
    if a.mg_per_l_product is not None:
        rows.append(("in the water", f"{fmt(a.mg_per_l_product)} mg/L of product"))
    if flow and a.litres_product is not None:
        rows.append(("metering pump", f"{fmt(a.litres_product * u.product_volume_per_l)} "
                     f"{u.product_volume}/h = {fmt(a.litres_product * 1000 / 60)} mL/min"))
    supply = v.supply
    if supply.kg_product_per_day is not None:
        rows.append(("daily use", f"{fmt(supply.kg_product_per_day * u.mass_per_kg)} "
                     f"{u.mass}/day over {fmt(scenario.hours_per_day)} h"))
    if supply.days is not None:
        rows.append(("storage lasts", f"{fmt(supply.days)} days"))
    if supply.batches is not None:
        n = supply.batches
        rows.append(("storage lasts", f"{fmt(n)} batches" + (
            " - LESS THAN ONE BATCH (see the warnings)" if n < 1 else "")))
    lo, hi = v.band
    # A narrow band gets the digits it needs for its two ends to differ.
    digits = 3
    while hi is not None and digits < 6 and product(lo, digits) == product(hi, digits):
        digits += 1
    hi_txt = "no upper limit" if hi is None else product(hi, digits)
    rows.append(("window band", f"{product(lo, digits)} to {hi_txt} "
                 f"keeps pH {plan.target.ph_min:g} to {plan.target.ph_max:g}"))
    rows.append(("pH", f"{plan.ph_start:.2f} now, {plan.ph_end:.2f} after the dose "
                 f"(aim {plan.target.ph_aim:g})"))
    if plan.dose_needed:
        rows.append(("sensitivity", slope_text(plan, u, flow)
                     + f"; a {METERING_ERROR:.0%} dosing error gives pH "
                     f"{min(plan.ph_low_dose, plan.ph_high_dose):.2f} to "
                     f"{max(plan.ph_low_dose, plan.ph_high_dose):.2f}"))
        if plan.precision:
            rows.append(("lab precision", _precision_text(plan)))
        rows.extend(uncertainty_lines(v, units))
    if v.cost is not None:
        cost = v.cost
        cur = scenario.currency
        rows.append(("cost", f"{money_text(cost, cur)} {per}"
                     + (f", {money_text(cost * scenario.hours_per_day, cur)} per day"
                        if flow else "") + ("" if cur else f" {NO_CURRENCY}")))
    return rows


_MARK = {"danger": "!!", "warning": "! ", "info": "  "}


def check_lines(v: PlanView, units: str = "metric") -> list[tuple[str, str]]:
    """(mark, text) of each chemistry check, dangers first."""
    return [(_MARK[c.level], words(c, units)) for c in v.checks]


def caution_lines(v: PlanView, units: str = "metric") -> list[str]:
    """Warnings, dangers and cautions, as every front end lists them."""
    checks = check_lines(v, units)
    return ([f"!! {m}" for k, m in checks if k == "!!"]
            + [f"! {w}" for w in texts(v.warnings, units)]
            + [f"! {m}" for k, m in checks if k == "! "]
            + [f"- {c}" for c in v.plan.cautions])


def water_rows(v: PlanView, units: str = "metric") -> list[tuple[str, str]]:
    """The water as measured and modelled, the reagent and the target (for the
    engineer), as (label, value) rows; a row with no label continues the one
    before it."""
    rows: list[tuple[str, str]] = []
    u, plan, scenario = UNIT_SYSTEMS[units], v.plan, v.scenario
    w = plan.water
    if isinstance(plan.basis, Batch):
        amount = f"batch of {fmt(plan.basis.volume_m3 * u.water_volume_per_m3)} {u.water_volume}"
    else:
        amount = f"flow of {fmt(plan.basis.m3_per_h * u.flow_per_m3_h)} {u.flow}"
    eff = scenario.data.get("effluent", {})
    measured = [f"pH {w.ph:.2f} at {shown(Q(w.temperature_c, '°C'), units, 'g')}"]
    if "alkalinity_mg_l_as_caco3" in eff:
        measured.append(f"alkalinity {eff['alkalinity_mg_l_as_caco3']:g} mg/L as CaCO3")
    if "acidity_mg_l_as_caco3" in eff:
        measured.append(f"acidity {eff['acidity_mg_l_as_caco3']:g} mg/L as CaCO3")
    rows.append(("water", f"{amount}; {', '.join(measured)}"))
    solutes = ", ".join(f"{_total_name(w, k)} {fmt(x * 1000, floor=1e-4)}"
                        for k, x in (w.totals_mol_l | w.metals_mol_l).items())
    if solutes:
        rows.append(("", f"modelled totals, mmol/L: {solutes}"))
    rows.append(("", f"strong-ion balance {fmt(w.strong_eq_l * 1000)} meq/L, ionic strength "
                 f"{fmt(w.ionic_strength, floor=1e-4)} mol/L, {w.activity.label} activity"))
    if plan.air is not None:
        rows.append(("", _air_line(plan.air)))
    rho = plan.reagent.density_kg_l
    dens = "" if not rho else (f", {rho:.4g} kg/L at 20 °C" if units != "us" else
                               f", {rho * L_PER_US_GAL / KG_PER_LB:.4g} lb/gal at 68 °F")
    rows.append(("reagent", f"{plan.reagent.name} [{plan.reagent.id}]{dens}"))
    rows.append(("target", f"pH {plan.target.ph_min:g} to {plan.target.ph_max:g}, "
                 f"aim {plan.target.ph_aim:g}"))
    return rows


def water_lines(v: PlanView, units: str = "metric", width: int = 78) -> list[str]:
    """:func:`water_rows` as lines of the text sheet."""
    out: list[str] = []
    for label, value in water_rows(v, units):
        if label == "water":
            out.extend(hanging(label, value, width, indent=9))
        elif not label:
            out.extend(wrap(value, width, " " * 9))
        else:
            out.append(f"{label:<9}{value}")
    return out


def headline(v: PlanView, units: str = "metric") -> str:
    """The one line an operator reads first: how much of what, where, to what pH."""
    scenario, plan = v.scenario, v.plan
    where = f" into {scenario.tank}" if scenario.tank else ""
    if not plan.dose_needed:
        return (f"NO DOSE NEEDED{where}: pH {plan.ph_start:.2f} is inside the window "
                f"{plan.target.ph_min:g} to {plan.target.ph_max:g}")
    per = "" if v.flow else f" {plan.basis.per}"
    return (f"DOSE {amount_text(v, v.dose, units)} of {plan.reagent.name}"
            f"{per}{where}: pH {plan.ph_start:.2f} to {plan.ph_end:.2f} "
            f"(window {plan.target.ph_min:g} to {plan.target.ph_max:g})")


def dose_axis(plan: Plan, units: str = "metric") -> tuple[float, str, str]:
    """How a dose axis reads, for the figure and the terminal curve alike:
    (product per mol/L of dose, its unit, the axis label). Mass of product
    where it has one, else volume; a flow's unit carries /h."""
    u = UNIT_SYSTEMS[units]
    r = plan.reagent
    if r.kg_product_per_mol is not None:
        scale = plan.basis.litres * r.kg_product_per_mol * u.mass_per_kg
        unit = u.mass
    else:
        scale = plan.basis.litres * r.litres_product_per_mol * u.product_volume_per_l
        unit = u.product_volume
    label = f"{r.name}, {unit} {plan.basis.per}"
    return scale, unit + ("/h" if isinstance(plan.basis, Flow) else ""), label


def figure_title(scenario: Scenario, when: str = "") -> str:
    """A figure's title: the job, where it is (site / tank) and when it was
    planned, so a printed figure says what it belongs to."""
    where = " / ".join(x for x in (scenario.site, scenario.tank) if x)
    tail = ", ".join(x for x in (where, f"planned {when}" if when else "") if x)
    return f"{scenario.title}\n{tail}" if tail else scenario.title


def render_sheet(scenario: Scenario, plan: Plan, units: str = "metric",
                 width: int = 78) -> str:
    """The operator's dose sheet as plain text: the dose first, then how to
    dose it, then the chemistry for the engineer, then the cautions."""
    return render_view(plan_view(scenario, plan), units, width)


def render_view(v: PlanView, units: str = "metric", width: int = 78) -> str:
    """:func:`render_sheet` of a view already built."""
    scenario, plan = v.scenario, v.plan
    out: list[str] = []
    head = f"DOSE SHEET  {scenario.title}"
    out.extend(wrap(head, width, ""))
    if scenario.site or scenario.tank:
        out.extend(wrap(" / ".join(x for x in (scenario.site, scenario.tank) if x), width,
                         "  "))
    out.append("=" * min(width, max(len(head), 40)))
    out.extend(wrap(headline(v, units), width, ""))
    for breach in texts(v.breaches, units):
        out.extend(wrap(f"!! PERMIT BREACH: {breach}", width, ""))
    out.append("")
    if plan.dose_needed:
        out.append("DOSE")
    else:
        out.append("DOSE  none needed")
    table(out, dose_lines(v, units), width)
    log_rows = log_lines(v, units)
    if log_rows:
        out.append("")
        out.append("SHIFT LOG")
        for line in log_rows:
            out.extend(wrap(line, width, "  "))
    control_rows = control_lines(v, units)
    if control_rows:
        out.append("")
        out.append("CONTROL (continuous stream)")
        table(out, control_rows, width)
    stage_rows = staging_lines(v, units)
    if stage_rows:
        out.append("")
        out.append("STAGED DOSE")
        for line in stage_rows:
            out.extend(wrap(line, width, "  ") if not line.startswith("   ") else [line])
    out.append("")
    out.append("WATER AND MODEL")
    out.extend(water_lines(v, units, width))
    metal_rows = metal_lines(v, units)
    if metal_rows:
        out.append("")
        out.append("SOLIDS AND METALS")
        table(out, metal_rows, width)
    out.append("")
    out.append("CHECKS")
    for mark, msg in check_lines(v, units):
        out.extend(wrap(msg, width, f" {mark} "))
    if v.warnings:
        out.append("")
        out.append("WARNINGS")
        for msg in texts(v.warnings, units):
            out.extend(wrap(msg, width, "  ! "))
    out.append("")
    out.append("CAUTIONS")
    for msg in plan.cautions:
        out.extend(wrap(msg, width, "  - "))
    return "\n".join(out) + "\n"


def uncertainty_lines(v: PlanView, units: str = "metric") -> list[tuple[str, str]]:
    """How sure the dose is, as (label, value) rows for the sheet and the view."""
    unc = v.plan.uncertainty
    if unc is None:
        return []
    per = v.plan.basis.per
    p05, p50, p95 = (amount_text(v, a, units) for a in v.spread)
    risk = (f"the planned dose lands outside the window in {unc.p_outside:.0%} of them"
            + (f" (below {unc.p_below:.0%}, above {unc.p_above:.0%})" if unc.p_outside else ""))
    return [("how sure", f"over {unc.valid:,} plausible waters (the measurements within "
             f"their uncertainty) the dose needed {per} runs {p05} to "
             f"{p95} (5th to 95th percentile), median {p50}; {risk}"),
            ("spread", words(unc.spread_finding(), units))]


def log_lines(v: PlanView, units: str = "metric") -> list[str]:
    """What the shift log says about this tank, with the correction offered (never applied)."""
    plan = v.plan
    if plan.log_bias is None:
        return [plan.log_note] if plan.log_note else []
    return [bias_words(plan.log_bias) + ".",
            f"Offered, not applied: with that bias the dose would be "
            f"{amount_text(v, v.offered, units)} {plan.basis.per}. The plan "
            "above is the model's; decide with the engineer which to dose."]


def control_lines(v: PlanView, units: str = "metric") -> list[tuple[str, str]]:
    """The control design of a flow plan as (label, value) rows."""
    plan = v.plan
    c = plan.control
    if c is None:
        return []
    u = UNIT_SYSTEMS[units]

    def rate(mol_h):
        return amount_text(v, plan.amounts(mol_h / plan.basis.litres), units)
    flows = (f"flow {fmt(c.flow_range_m3_h[0] * u.flow_per_m3_h)} to "
             f"{fmt(c.flow_range_m3_h[1] * u.flow_per_m3_h)} {u.flow}" if c.flow_range_given
             else "the stated flow only (give flow.m3_per_h_min and _max for its range)")
    rows = [("process gain", f"pH moves {fmt(c.gain_ph_per_percent, 2)} per 1 % change of "
             "reagent rate at the aim"),
            ("accuracy", f"the window allows a {c.accuracy_needed:.2%} error in the reagent "
             "rate"),
            ("pump range", f"{rate(c.rate_low_mol_h)} to {rate(c.rate_high_mol_h)} "
             f"(turndown {fmt(c.turndown, 2)}:1) over {flows} and the 5th-95th percentile "
             "dose; replay of logged data gives the measured range"),
            ("stages", words(c.note, units))]
    for i, st in enumerate(c.stages, start=1):
        rows.append((f"stage {i}", f"{st.share:.0%} of the reagent; tank about "
                     f"{fmt(st.volume_m3 * u.water_volume_per_m3)} {u.water_volume} "
                     f"({st.residence_min:g} min at the flow), agitator turnover under "
                     f"{st.turnover_min:g} min"))
    return rows


def staging_words(v: PlanView, units: str = "metric") -> tuple[list[str], list[str]]:
    """The staged dose's words before its trim table (:func:`trim_rows`) and
    after it; both empty when the dose is not staged."""
    plan = v.plan
    st = plan.staging
    if st is None:
        return [], []
    first = product_text(v.first.kg_product, v.first.litres_product, units)
    before = [f"The planned dose leaves the window in {plan.uncertainty.p_outside:.0%} of the "
              "plausible waters: dose in two steps.",
              f"1. First dose {first}: it stays short of the aim in "
              f"{st.confidence:.0%} of them. Mix well, then read the pH (expected "
              f"{st.ph_first_range[0]:.1f} to {st.ph_first_range[1]:.1f}).",
              "2. Add what the table gives for the pH read (between two rows, in "
              f"proportion), mix, read again. Followed, with the pH read to "
              f"±{st.reading_sd:g}, it lands in the window in {st.p_inside:.0%} of the "
              "plausible waters:"]
    unit, step = st.metering
    after = [f"Amounts are rounded to {step:g} {'L' if unit == 'litres' else 'kg'}, "
             "what a batch can be metered to. The table is for the first reading only: "
             "if the pH is still short of the window after the trim, add small amounts "
             "and read after each."]
    return before, after


def staging_lines(v: PlanView, units: str = "metric") -> list[str]:
    """The staged dose and its trim table, as lines an operator follows with a pen."""
    before, after = staging_words(v, units)
    if not before:
        return []
    return (before + [f"   {'pH read':<11} add"]
            + [f"   {ph:<11} {add}" for ph, add in trim_rows(v, units)] + after)


def trim_rows(v: PlanView, units: str = "metric") -> list[tuple[str, str]]:
    """(pH read, what to add) of a staged dose's trim table; empty when not staged."""
    plan, st = v.plan, v.plan.staging
    if st is None:
        return []
    up = plan.reagent.raises_ph
    edge = (f"above {plan.target.ph_max:g}" if up else f"below {plan.target.ph_min:g}")
    rows = []
    for row, extra in zip(st.trim, v.trim):
        if extra is None:
            rows.append((f"{row.ph_read:>5.1f} {'up' if up else 'down'}",
                         f"nothing more ({edge}: stop and call the engineer)"))
            break
        short = row.ph_read < plan.target.ph_min if up else row.ph_read > plan.target.ph_max
        rows.append((f"{row.ph_read:>5.1f}", amount_text(v, extra, units)
                     if not row.below_metering else
                     "below what can be metered: finish with a dilute reagent" if short else
                     "below what can be metered: add nothing"))
    return rows


#: Above this pH change per 1 % of the dose the curve is called near-vertical
#: at the aim and no linear slope is printed (common practice: a dose
#: metered to 1 % should not swing the pH by a whole unit).
STEEP_PH_PER_PERCENT = 1.0


def sludge_text(sl, units: str, per: str) -> str:
    """Dry sludge and the wet cake it makes, for a plan or a train."""
    u = UNIT_SYSTEMS[units]
    return (f"{fmt(sl.dry_kg * u.mass_per_kg)} {u.mass} dry {per}; as wet cake at "
            f"{sl.solids_fraction:.0%} solids about {fmt(sl.cake_kg * u.mass_per_kg)} "
            f"{u.mass} = {volume_text(sl.cake_m3, units)}")


def slope_text(plan: Plan, u, flow: bool) -> str:
    """How the pH answers the dose at the aim, in what the operator adjusts:
    per 1 % of the dose, and per unit of product (per kg/h for a flow)."""
    slope = abs(plan.slope_ph_per_mmol_l)
    per_percent = slope * plan.dose_mol_l * 1000 * 0.01
    if per_percent > STEEP_PH_PER_PERCENT:
        # A slope of 113 pH per 1 % reads as nonsense: the curve is a step here.
        return (f"per 1 % of the dose the pH moves by more than {STEEP_PH_PER_PERCENT:g} "
                "(the curve is near-vertical at the aim): go by the dosing-error range and "
                "a staged dose")
    text = f"pH moves {fmt(per_percent, 2)} per 1 % of the dose at the aim"
    kg_per_mmol = plan.amounts(1e-3).kg_product
    if kg_per_mmol:
        per_mass = slope / (kg_per_mmol * u.mass_per_kg)
        text += f" ({fmt(per_mass, 2)} per {u.mass}{'/h' if flow else ''} of product)"
    return text


def _precision_text(plan: Plan) -> str:
    """How far the dose moves within each reading's precision, one phrase each."""
    parts = []
    for sens in plan.precision:
        changes = [r for r in sens.relative(plan.dose_mol_l) if r is not None]
        if not changes or max(abs(r) for r in changes) < 0.005:
            continue
        unit = f" {sens.unit.split()[0]}" if sens.unit else ""
        lo, hi = (x if abs(x) >= 0.005 else 0.0 for x in (min(changes), max(changes)))
        lo, hi = min(lo, 0.0), max(hi, 0.0)
        parts.append(f"{sens.label} read {sens.plus_minus:.2g}{unit} off changes the dose "
                     f"by {lo:+.0%} to {hi:+.0%}")
    if not parts:
        return "the dose moves less than 1 % within the usual precision of the readings"
    return "; ".join(parts)


def _total_name(w, key: str) -> str:
    """A total's name on the sheet; a fitted site by its pKa."""
    if key.startswith("site_") and w.site_pka:
        i = int(key.split("_")[1]) - 1
        if i < len(w.site_pka):
            return f"site pKa {w.site_pka[i]:.1f}"
    return metal_label(key)


def _air_line(a) -> str:
    """The CO2 assumption of an open tank, in one line for the water block."""
    if a.at_equilibrium:
        return (f"open to air: dose planned at CO2 equilibrium with air ({a.hours:g} h "
                f"standing, {a.depth_m:g} m deep: {a.fraction:.0%} of the way)")
    if a.hours == 0:
        return ("open to air: dose planned with the carbonate as sampled (read soon after "
                "dosing, before CO2 exchanges)")
    return (f"open to air: dose planned with the carbonate as sampled (read within "
            f"{a.hours:g} h; {a.depth_m:g} m deep: {a.fraction:.0%} of the way to CO2 "
            "equilibrium)")
