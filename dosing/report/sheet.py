"""The one place that turns a plan into what people read: text and JSON.

The command line, Tankside, the terminal view and the shift log all call these
functions, so a dose reads the same everywhere, with the same cautions.

* :func:`sheet_dict` - the plan as JSON-ready data with stable keys (SI).
* :func:`render_sheet` - the operator's dose sheet as text, in metric or US
  customary units.
* :class:`Units` and :data:`UNIT_SYSTEMS` - conversions, in one place.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, replace
from typing import Any, Literal

from ..chem.metals import HARDNESS, label as metal_label
from ..numbers import fmt
from ..planning.job import Scenario
from ..planning.measurements import CACO3_MG_PER_MEQ
from ..planning.plan import METERING_ERROR, Batch, Flow, Plan, permit_breaches
from ..planning.solids import Sludge, sludge_of
from ..version import __version__

__all__ = ["Units", "UnitSystem", "UNIT_SYSTEMS", "sheet_dict", "render_sheet",
           "render_fleet", "figure_title", "dose_axis",
           "metals_dict", "metal_lines",
           "fmt", "product_text", "dose_lines", "check_lines", "caution_lines", "in_units",
           "render_replay", "render_titration"]

L_PER_US_GAL = 3.785411784     # exact by definition (NIST SP 811)
KG_PER_LB = 0.45359237         # exact by definition (NIST SP 811)


@dataclass(frozen=True)
class Units:
    """A unit system for the sheet."""

    name: str
    mass: str
    mass_per_kg: float
    product_volume: str
    product_volume_per_l: float
    water_volume: str
    water_volume_per_m3: float
    flow: str
    flow_per_m3_h: float


#: The unit systems by name (the keys of :data:`UNIT_SYSTEMS`).
UnitSystem = Literal["metric", "us"]

UNIT_SYSTEMS: dict[str, Units] = {
    "metric": Units("metric", "kg", 1.0, "L", 1.0, "m³", 1.0, "m³/h", 1.0),
    "us": Units("us", "lb", 1.0 / KG_PER_LB, "gal", 1.0 / L_PER_US_GAL,
                "gal", 1000.0 / L_PER_US_GAL, "gpm", 1000.0 / L_PER_US_GAL / 60.0),
}


def product_text(kg: float | None, litres: float | None, units: str = "metric",
                 digits: int = 3, *, per_hour: bool = False) -> str:
    """An amount of product as "16.8 kg = 11.0 L" in the unit system
    ("16.8 kg/h = 11.0 L/h" with ``per_hour``: a flow's amounts carry their
    time base everywhere)."""
    u = UNIT_SYSTEMS[units]
    h = "/h" if per_hour else ""
    parts = []
    if kg is not None:
        parts.append(f"{fmt(kg * u.mass_per_kg, digits)} {u.mass}{h}")
    if litres is not None:
        parts.append(f"{fmt(litres * u.product_volume_per_l, digits)} {u.product_volume}{h}")
    return " = ".join(parts) if parts else "n/a"


def plan_amount(plan: Plan, mol_l: float, units: str = "metric", digits: int = 3) -> str:
    """A dose of this plan in product units, per hour for a flow."""
    a = plan.amounts(mol_l)
    return product_text(a.kg_product, a.litres_product, units, digits,
                        per_hour=isinstance(plan.basis, Flow))


def _key_suffix(plan: Plan) -> str:
    """Suffix of JSON amount keys: "_per_h" for a flow, "" for a batch."""
    return "_per_h" if isinstance(plan.basis, Flow) else ""


def _sludge(scenario: Scenario, plan: Plan) -> Sludge:
    """The plan's sludge with the scenario's cake, per batch or per hour."""
    return sludge_of(plan.solids, plan.basis.litres, solids_fraction=scenario.sludge[0],
                     cake_density_kg_l=scenario.sludge[1])


def _daily(scenario: Scenario, plan: Plan) -> dict[str, float | None]:
    """Daily use and days of supply, for a flow."""
    a = plan.amounts()
    out: dict[str, float | None] = {"kg_product_per_day": None, "days_of_supply": None,
                                    "batches_of_supply": None}
    if isinstance(plan.basis, Flow):
        if a.kg_product is not None:
            out["kg_product_per_day"] = a.kg_product * scenario.hours_per_day
    supply = scenario.storage_lasts(a.litres_product, a.kg_product)
    if supply is not None:
        if isinstance(plan.basis, Flow):
            out["days_of_supply"] = supply / scenario.hours_per_day
        else:
            out["batches_of_supply"] = supply
    return out


def sheet_dict(scenario: Scenario, plan: Plan) -> dict[str, Any]:
    """The plan as plain data with stable keys (SI units, JSON-ready)."""
    flow = isinstance(plan.basis, Flow)
    a = plan.amounts()
    cost = None
    if scenario.price_per_kg is not None and a.kg_product is not None:
        cost = a.kg_product * scenario.price_per_kg
    return {
        "title": scenario.title,
        "site": scenario.site,
        "tank": scenario.tank,
        "engine_version": __version__,
        "basis": ({"flow_m3_per_h": plan.basis.m3_per_h, "hours_per_day": scenario.hours_per_day}
                  if flow else {"batch_volume_m3": plan.basis.volume_m3}),
        "reagent": plan.reagent.id,
        "reagent_name": plan.reagent.name,
        "active_compound": plan.reagent.compound.formula,
        "ph_start": plan.ph_start,
        "ph_end": plan.ph_end,
        "dose_needed": plan.dose_needed,
        "target": {"ph_min": plan.target.ph_min, "ph_max": plan.target.ph_max,
                   "ph_aim": plan.target.ph_aim},
        "dose": _dose_dict(scenario, plan),
        "window": _window_dict(plan),
        "sensitivity": {
            "ph_per_mmol_l": plan.slope_ph_per_mmol_l,
            "ph_per_percent_of_dose": plan.slope_ph_per_mmol_l * plan.dose_mol_l * 10.0,
            "metering_error": METERING_ERROR,
            "ph_at_low_dose": plan.ph_low_dose,
            "ph_at_high_dose": plan.ph_high_dose,
        },
        "lab_precision": _precision_list(plan),
        "uncertainty": _uncertainty_dict(plan),
        "staging": _staging_dict(plan),
        "control": _control_dict(plan),
        "log_bias": _log_bias_dict(plan),
        "cost" + _key_suffix(plan): cost,
        "water": _water_dict(plan),
        **metals_dict(scenario, plan),
        "checks": [{"id": c.id, "level": c.level, "message": c.message,
                    "values": dict(c.values)} for c in plan.checks],
        "warnings": list(plan.warnings),
        "cautions": list(plan.cautions),
    }


def _dose_dict(scenario: Scenario, plan: Plan) -> dict[str, Any]:
    a, sfx = plan.amounts(), _key_suffix(plan)
    dose = {
        "mmol_per_l": a.mmol_per_l,
        "mg_per_l_product": a.mg_per_l_product,
        "kg_active" + sfx: a.kg_active,
        "kg_product" + sfx: a.kg_product,
        "litres_product" + sfx: a.litres_product,
    }
    if isinstance(plan.basis, Flow):
        dose["ml_product_per_min"] = (None if a.litres_product is None
                                      else a.litres_product * 1000 / 60)
    dose.update({k: v for k, v in _daily(scenario, plan).items() if v is not None})
    return dose


def _window_dict(plan: Plan) -> dict[str, Any]:
    lo, hi = plan.band_mol_l
    a_lo = plan.amounts(lo)
    a_hi = plan.amounts(hi) if hi is not None else None
    return {
        "dose_mmol_per_l": [a_lo.mmol_per_l, None if a_hi is None else a_hi.mmol_per_l],
        "dose_kg_product": [a_lo.kg_product, None if a_hi is None else a_hi.kg_product],
        "dose_litres_product": [a_lo.litres_product,
                                None if a_hi is None else a_hi.litres_product],
        "per": "hour" if isinstance(plan.basis, Flow) else "batch",
    }


def _precision_list(plan: Plan) -> list[dict[str, Any]]:
    def mmol(x):
        return None if x is None else x * 1000
    return [{"measurement": p.field, "value": p.value, "plus_minus": p.plus_minus,
             "unit": p.unit, "dose_mmol_per_l_low_reading": mmol(p.dose_low_reading_mol_l),
             "dose_mmol_per_l_high_reading": mmol(p.dose_high_reading_mol_l)}
            for p in plan.precision]


def _log_bias_dict(plan: Plan) -> dict[str, Any] | None:
    b = plan.log_bias
    if b is None:
        return None
    return {"tank": b.tank, "entries": b.entries, "mean_ratio": b.mean_ratio,
            "sd_ratio": b.sd_ratio, "bench_titration_due": b.due,
            "offered_dose": _amount_dict(plan, plan.dose_mol_l * b.mean_ratio),
            "applied": False}


def _water_dict(plan: Plan) -> dict[str, Any]:
    w, air = plan.water, plan.air
    return {
        "temperature_c": w.temperature_c,
        "activity_model": w.activity.name,
        "open_to_air": w.open_to_air,
        "air_exchange": None if air is None else {
            "hours_in_air": air.hours, "depth_m": air.depth_m,
            "fraction_to_equilibrium": air.fraction,
            "planned_at_air_equilibrium": air.at_equilibrium,
            "other_case_dose_mmol_per_l": (None if air.other_dose_mol_l is None
                                           else air.other_dose_mol_l * 1000),
            "other_case_ph": air.ph_other},
        "totals_mmol_l": {k: v * 1000 for k, v in w.totals_mol_l.items()},
        "strong_ion_balance_meq_l": w.strong_eq_l * 1000,
        "ionic_strength_mol_l": w.ionic_strength,
        "alkalinity_mg_l_as_caco3": w.alkalinity_eq_l * CACO3_MG_PER_MEQ * 1000.0,
        "ionic_strength_after_mol_l": plan.ionic_strength_end,
        "metals_mmol_l": {k: v * 1000 for k, v in w.metals_mol_l.items()},
        "ferrous_oxidised": w.ferrous_oxidised,
    }


def metals_dict(scenario: Scenario, plan: Plan) -> dict[str, Any]:
    """Solids, sludge, dissolved metals and metal caps as JSON-ready data."""
    sfx = _key_suffix(plan)
    litres = plan.basis.litres
    sludge = _sludge(scenario, plan)
    cw = plan.cap_window
    return {
        "ph_ceiling": plan.ph_ceiling,
        "metals_after_mg_l": dict(plan.metals_after_mg_l),
        "solids": [{"id": x.id, "name": x.name, "formula": x.formula,
                    "mmol_per_l": x.mmol_per_l, "mg_per_l": x.mg_per_l,
                    "kg" + sfx: x.mg_per_l * litres / 1e6} for x in plan.solids],
        "sludge": {"dry_kg" + sfx: sludge.dry_kg, "cake_kg" + sfx: sludge.cake_kg,
                   "cake_m3" + sfx: sludge.cake_m3,
                   "cake_solids_fraction": sludge.solids_fraction,
                   "cake_density_kg_l": sludge.cake_density_kg_l},
        "metal_caps": None if cw is None else {
            "caps_mg_l": dict(cw.caps_mg_l),
            "ph_range": None if cw.ph_range is None else list(cw.ph_range),
            "overlap_with_window": None if cw.overlap is None else list(cw.overlap),
            "met_at_aim": cw.met_at_aim},
    }


def metal_lines(scenario: Scenario, plan: Plan, units: str = "metric") -> list[tuple[str, str]]:
    """Solids, sludge, metals left and metal caps as (label, value) rows.

    Empty when the water holds no metal and the dose forms no solid. Shared
    by the text sheet and the terminal view.
    """
    u = UNIT_SYSTEMS[units]
    per = plan.basis.per
    rows: list[tuple[str, str]] = []
    if plan.ph_ceiling is not None:
        rows.append(("pH ceiling", f"an overdose of {plan.reagent.name} takes this water "
                     f"no higher than about pH {plan.ph_ceiling:.2f}"))
    litres = plan.basis.litres
    for x in plan.solids:
        rows.append(("solid formed", f"{x.formula} {fmt(x.mg_per_l)} mg/L = "
                     f"{fmt(x.mg_per_l * litres / 1e6 * u.mass_per_kg)} {u.mass} {per}"))
    if plan.solids:
        sl = _sludge(scenario, plan)
        rows.append(("sludge", f"{fmt(sl.dry_kg * u.mass_per_kg)} {u.mass} dry {per}; as "
                     f"wet cake at {sl.solids_fraction:.0%} solids about "
                     f"{fmt(sl.cake_kg * u.mass_per_kg)} {u.mass} = "
                     f"{fmt(sl.cake_m3 * u.water_volume_per_m3)} {u.water_volume}"))
    metals = {k: v for k, v in plan.metals_after_mg_l.items() if k not in HARDNESS}
    if metals:
        rows.append(("metals left", ", ".join(
            f"{metal_label(k)} {fmt(v, floor=1e-3)} mg/L" for k, v in metals.items())
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


def dose_lines(scenario: Scenario, plan: Plan, units: str = "metric") -> list[tuple[str, str]]:
    """The dose as (label, value) rows in the chosen units.

    Shared by the text sheet and Tankside, the terminal view.
    """
    u = UNIT_SYSTEMS[units]
    a = plan.amounts()
    per = plan.basis.per
    flow = isinstance(plan.basis, Flow)
    rows: list[tuple[str, str]] = []

    def product(am, digits: int = 3) -> str:
        return product_text(am.kg_product, am.litres_product, units, digits, per_hour=flow)

    rows.append((f"product {per}", product(a)))
    rows.append(("active compound",
                 f"{fmt(a.kg_active * u.mass_per_kg)} {u.mass}{'/h' if flow else ''} "
                 f"{plan.reagent.compound.formula}"
                 f" ({fmt(a.mmol_per_l)} mmol/L"
                 + (f", {fmt(a.mg_per_l_product)} mg/L of product)" if a.mg_per_l_product
                    is not None else ")")))
    if flow and a.litres_product is not None:
        rows.append(("metering pump", f"{fmt(a.litres_product * u.product_volume_per_l)} "
                     f"{u.product_volume}/h = {fmt(a.litres_product * 1000 / 60)} mL/min"))
    supply = _daily(scenario, plan)
    if supply["kg_product_per_day"] is not None:
        rows.append(("daily use", f"{fmt(supply['kg_product_per_day'] * u.mass_per_kg)} "
                     f"{u.mass}/day over {fmt(scenario.hours_per_day)} h"))
    if supply["days_of_supply"] is not None:
        rows.append(("storage lasts", f"{fmt(supply['days_of_supply'])} days"))
    if supply["batches_of_supply"] is not None:
        n = supply["batches_of_supply"]
        rows.append(("storage lasts", f"{fmt(n)} batches" + (
            " - !! LESS THAN ONE BATCH: the store cannot hold this dose; order more "
            "before starting" if n < 1 else "")))
    lo, hi = plan.band_mol_l
    # A narrow band gets the digits it needs for its two ends to differ.
    digits = 3
    while hi is not None and digits < 6 and (
            product(plan.amounts(lo), digits) == product(plan.amounts(hi), digits)):
        digits += 1
    hi_txt = "no upper limit" if hi is None else product(plan.amounts(hi), digits)
    rows.append(("window band", f"{product(plan.amounts(lo), digits)} to {hi_txt} "
                 f"keeps pH {plan.target.ph_min:g} to {plan.target.ph_max:g}"))
    rows.append(("pH", f"{plan.ph_start:.2f} now, {plan.ph_end:.2f} after the dose "
                 f"(aim {plan.target.ph_aim:g})"))
    if plan.dose_needed:
        rows.append(("sensitivity", _slope_text(plan, u, flow)
                     + f"; a {METERING_ERROR:.0%} dosing error gives pH "
                     f"{min(plan.ph_low_dose, plan.ph_high_dose):.2f} to "
                     f"{max(plan.ph_low_dose, plan.ph_high_dose):.2f}"))
        if plan.precision:
            rows.append(("lab precision", _precision_text(plan)))
        rows.extend(uncertainty_lines(plan, units))
    if scenario.price_per_kg is not None and a.kg_product is not None:
        cost = a.kg_product * scenario.price_per_kg
        rows.append(("cost", f"{fmt(cost)} {per}"
                     + (f", {fmt(cost * scenario.hours_per_day)} per day" if flow else "")))
    return rows


_MARK = {"danger": "!!", "warning": "! ", "info": "  "}


def check_lines(plan: Plan, units: str = "metric") -> list[tuple[str, str]]:
    """(mark, text) of each chemistry check, dangers first."""
    order = {"danger": 0, "warning": 1, "info": 2}
    return [(_MARK[c.level], in_units(c.message, units))
            for c in sorted(plan.checks, key=lambda c: order[c.level])]


def caution_lines(plan: Plan, units: str = "metric") -> list[str]:
    """Warnings, dangers and cautions, as every front end lists them."""
    checks = check_lines(plan, units)
    return ([f"!! {m}" for k, m in checks if k == "!!"]
            + [f"! {in_units(w, units)}" for w in plan.warnings]
            + [f"! {m}" for k, m in checks if k == "! "]
            + [f"- {c}" for c in plan.cautions])


L_PER_FT3 = 28.316846592       # exact by definition (NIST SP 811)
_NUM = r"(-?\d[\d,]*(?:\.\d+)?)"


def in_units(text: str, units: str) -> str:
    """A check or warning as the engine words it (SI), with the US
    equivalents of its temperatures, temperature changes and gas volumes
    beside them when ``units`` is "us".

    Examples
    --------
    >>> in_units("the water ends near 46 °C; a rise of about 0.85 K", "us")
    'the water ends near 46 °C (115 °F); a rise of about 0.85 K (1.5 °F)'
    >>> in_units("up to 1,200 L of CO2 gas can come off", "us")
    'up to 1,200 L (42.4 ft³) of CO2 gas can come off'
    """
    if units != "us":
        return text

    def num(m) -> float:
        return float(m[1].replace(",", ""))
    text = re.sub(_NUM + r" °C\b", lambda m: f"{m[1]} °C ({num(m) * 1.8 + 32:.0f} °F)", text)
    text = re.sub(_NUM + r" K\b", lambda m: f"{m[1]} K ({fmt(num(m) * 1.8, 2)} °F)", text)
    return re.sub(_NUM + r" L of (\S+) gas",
                  lambda m: f"{m[1]} L ({fmt(num(m) / L_PER_FT3)} ft³) of {m[2]} gas", text)


def _wrap(text: str, width: int, indent: str) -> list[str]:
    import textwrap
    return textwrap.wrap(text, width=width, initial_indent=indent,
                         subsequent_indent=" " * len(indent))


def _table(out: list[str], rows: list[tuple[str, str]], width: int) -> None:
    """Append (label, value) rows, values wrapped under their column."""
    label_w = max(len(r[0]) for r in rows)
    for label, value in rows:
        first, *rest = _wrap(value, width - label_w - 4, "") or [""]
        out.append(f"  {label:<{label_w}}  {first}")
        out.extend(" " * (label_w + 4) + r.strip() for r in rest)


def water_lines(scenario: Scenario, plan: Plan, units: str = "metric",
                width: int = 78) -> list[str]:
    """The water as measured and modelled, the reagent and the target (for the engineer)."""
    out: list[str] = []
    u = UNIT_SYSTEMS[units]
    w = plan.water
    if isinstance(plan.basis, Batch):
        amount = f"batch of {fmt(plan.basis.volume_m3 * u.water_volume_per_m3)} {u.water_volume}"
    else:
        amount = f"flow of {fmt(plan.basis.m3_per_h * u.flow_per_m3_h)} {u.flow}"
    eff = scenario.data.get("effluent", {})
    measured = [f"pH {w.ph:.2f} at {in_units(f'{w.temperature_c:g} °C', units)}"]
    if "alkalinity_mg_l_as_caco3" in eff:
        measured.append(f"alkalinity {eff['alkalinity_mg_l_as_caco3']:g} mg/L as CaCO3")
    if "acidity_mg_l_as_caco3" in eff:
        measured.append(f"acidity {eff['acidity_mg_l_as_caco3']:g} mg/L as CaCO3")
    out.extend(_hanging("water", f"{amount}; {', '.join(measured)}", width, indent=9))
    solutes = ", ".join(f"{_total_name(w, k)} {fmt(v * 1000, floor=1e-4)}"
                        for k, v in (w.totals_mol_l | w.metals_mol_l).items())
    if solutes:
        out.extend(_wrap(f"modelled totals, mmol/L: {solutes}", width, "         "))
    out.extend(_wrap(f"strong-ion balance {fmt(w.strong_eq_l * 1000)} meq/L, ionic strength "
                     f"{fmt(w.ionic_strength, floor=1e-4)} mol/L, "
                     f"{w.activity.label} activity", width, "         "))
    if plan.air is not None:
        out.extend(_wrap(_air_line(plan.air), width, "         "))
    rho = plan.reagent.density_kg_l
    dens = "" if not rho else (f", {rho:.4g} kg/L at 20 °C" if units != "us" else
                               f", {rho * L_PER_US_GAL / KG_PER_LB:.4g} lb/gal at 68 °F")
    out.append(f"reagent  {plan.reagent.name} [{plan.reagent.id}]{dens}")
    out.append(f"target   pH {plan.target.ph_min:g} to {plan.target.ph_max:g}, "
               f"aim {plan.target.ph_aim:g}")
    return out


def headline(scenario: Scenario, plan: Plan, units: str = "metric") -> str:
    """The one line an operator reads first: how much of what, where, to what pH."""
    where = f" into {scenario.tank}" if scenario.tank else ""
    if not plan.dose_needed:
        return (f"NO DOSE NEEDED{where}: pH {plan.ph_start:.2f} is inside the window "
                f"{plan.target.ph_min:g} to {plan.target.ph_max:g}")
    per = "" if isinstance(plan.basis, Flow) else f" {plan.basis.per}"
    return (f"DOSE {plan_amount(plan, plan.dose_mol_l, units)} of {plan.reagent.name}"
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
    out: list[str] = []
    head = f"DOSE SHEET  {scenario.title}"
    out.extend(_wrap(head, width, ""))
    if scenario.site or scenario.tank:
        out.extend(_wrap(" / ".join(x for x in (scenario.site, scenario.tank) if x), width,
                         "  "))
    out.append("=" * min(width, max(len(head), 40)))
    out.extend(_wrap(headline(scenario, plan, units), width, ""))
    for breach in permit_breaches(plan):
        out.extend(_wrap(f"!! PERMIT BREACH: {breach}", width, ""))
    out.append("")
    if plan.dose_needed:
        out.append("DOSE")
    else:
        out.append("DOSE  none needed")
    _table(out, dose_lines(scenario, plan, units), width)
    log_rows = log_lines(plan, units)
    if log_rows:
        out.append("")
        out.append("SHIFT LOG")
        for line in log_rows:
            out.extend(_wrap(line, width, "  "))
    control_rows = control_lines(plan, units)
    if control_rows:
        out.append("")
        out.append("CONTROL (continuous stream)")
        _table(out, control_rows, width)
    stage_rows = staging_lines(plan, units)
    if stage_rows:
        out.append("")
        out.append("STAGED DOSE")
        for line in stage_rows:
            out.extend(_wrap(line, width, "  ") if not line.startswith("   ") else [line])
    out.append("")
    out.append("WATER AND MODEL")
    out.extend(water_lines(scenario, plan, units, width))
    metal_rows = metal_lines(scenario, plan, units)
    if metal_rows:
        out.append("")
        out.append("SOLIDS AND METALS")
        _table(out, metal_rows, width)
    out.append("")
    out.append("CHECKS")
    for mark, msg in check_lines(plan, units):
        out.extend(_wrap(msg, width, f" {mark} "))
    if plan.warnings:
        out.append("")
        out.append("WARNINGS")
        for msg in plan.warnings:
            out.extend(_wrap(in_units(msg, units), width, "  ! "))
    out.append("")
    out.append("CAUTIONS")
    for msg in plan.cautions:
        out.extend(_wrap(msg, width, "  - "))
    return "\n".join(out) + "\n"


def render_replay(report: dict[str, Any], units: str = "metric", width: int = 78) -> str:
    """The replay summary as text for the engineer."""
    u = UNIT_SYSTEMS[units]
    r = report
    rate = r["dose_rate"]
    conv = u.mass_per_kg if rate["unit"] == "kg/h" else u.product_volume_per_l
    rate_unit = (f"{u.mass}/h" if rate["unit"] == "kg/h" else f"{u.product_volume}/h")
    out = [f"REPLAY  {r['scenario']}  [{r['reagent']}]", "=" * 40]
    out += _hanging("data", f"{r['source']}: {r['rows']:,} rows, {r['first']} to "
                    f"{r['last']} ({fmt(r['hours_covered'] / 24)} days)", width, indent=9)
    out += [f"planned  {r['rows_planned']:,} rows; not planned {r['rows_not_planned']:,}"]
    for key, v in r["not_planned"].items():
        out.append(f"           {v['rows']:>9,}  {v['why']}")
    t = r["total"]
    out += ["", "REAGENT",
            f"  total          {fmt(t['kg_product'] * u.mass_per_kg)} {u.mass}"
            + (f" = {fmt(t['litres_product'] * u.product_volume_per_l)} {u.product_volume}"
               if t["litres_product"] else "")
            + (f", cost {fmt(t['cost'])}" if t["cost"] is not None else ""),
            f"  per day        mean {fmt(r['daily']['mean_kg_product'] * u.mass_per_kg)} "
            f"{u.mass}, max {fmt(r['daily']['max_kg_product'] * u.mass_per_kg)} {u.mass} "
            f"over {r['daily']['days']} days"]
    if r["days_of_supply"] is not None:
        out.append(f"  storage lasts  {fmt(r['days_of_supply'])} days at the mean daily use")
    out += ["", "DOSE RATE (metering pump sizing)",
            f"  mean {fmt(rate['mean'] * conv)}  95th percentile {fmt(rate['p95'] * conv)}  "
            f"max {fmt(rate['max'] * conv)}  {rate_unit}",
            f"  lowest steady rate (5th percentile of non-zero) "
            f"{fmt(rate['p5_nonzero'] * conv if rate['p5_nonzero'] else None)} {rate_unit}; "
            f"turndown needed {fmt(rate['turndown'])} : 1",
            "  (percentiles from 2.3 % wide bins)", "",
            f"RAW EFFLUENT outside the window {fmt(r['hours_outside_window'])} h"
            + (f" ({r['fraction_outside_window']:.0%} of the time)"
               if r["fraction_outside_window"] is not None else ""), "", "CAUTIONS"]
    for c in r["cautions"]:
        out.extend(_wrap(c, width, "  - "))
    return "\n".join(out) + "\n"


def render_fleet(report: dict[str, Any], units: str = "metric", width: int = 78) -> str:
    """The fleet replay as text: one line per site, then totals per product."""
    r = report
    out = [f"FLEET REPLAY  {r['fleet']}  {len(r['sites'])} sites, {r['rows']:,} rows "
           f"({r['rows_planned']:,} planned), {r['workers']} Dask workers", "=" * 40,
           "", f"{'site':<18} {'product':>18} {'per day':>12} {'95th pct rate':>14} "
           f"{'raw outside':>11}", f"{'':<18} {'over the record':>18} {'mean':>12} "
           f"{'(pump sizing)':>14} {'window':>11}"]
    for name, site in r["sites"].items():
        out.append(_fleet_site_line(name, site, units))
        if site["rows_not_planned"]:
            top = max(site["not_planned"].items(), key=lambda kv: kv[1]["rows"])
            out.extend(_wrap(f"{site['rows_not_planned']:,} of {site['rows']:,} rows not "
                             f"planned (most: {top[1]['why']})", width, " " * 19))
    out += ["", "BY PRODUCT (amounts of different products are never added)"]
    for pid, p in r["products"].items():
        unpriced = p["sites_without_price"]
        if not unpriced:
            cost = f", cost {fmt(p['cost'])}"
        elif len(unpriced) < len(p["sites"]):
            cost = f", cost {fmt(p['cost'])} not counting {', '.join(unpriced)} (no price)"
        else:
            cost = ""
        n = len(p["sites"])
        line = (f"{p['reagent_name']} [{pid}], {n} site{'s' if n != 1 else ''}: "
                f"{product_text(p['kg_product'], p['litres_product'] or None, units)}{cost}")
        out.extend(_wrap(line, width, "  "))
    out += ["", "CAUTIONS"]
    for c in r["cautions"]:
        out.extend(_wrap(c, width, "  - "))
    return "\n".join(out) + "\n"


def _fleet_site_line(name: str, site: dict[str, Any], units: str) -> str:
    """One site of the fleet table: total product, mean per day, 95th
    percentile rate and hours the raw effluent was outside the window."""
    u = UNIT_SYSTEMS[units]
    rate = site["dose_rate"]
    if rate["unit"] == "kg/h":
        total = f"{fmt(site['total']['kg_product'] * u.mass_per_kg)} {u.mass}"
        day = f"{fmt(site['daily']['mean_kg_product'] * u.mass_per_kg)} {u.mass}"
        p95 = f"{fmt(rate['p95'] * u.mass_per_kg)} {u.mass}/h"
    else:
        total = f"{fmt(site['total']['litres_product'] * u.product_volume_per_l)} " \
                f"{u.product_volume}"
        day = f"{fmt(site['daily']['mean_litres_product'] * u.product_volume_per_l)} " \
              f"{u.product_volume}"
        p95 = f"{fmt(rate['p95'] * u.product_volume_per_l)} {u.product_volume}/h"
    label = name if len(name) <= 18 else name[:17] + "…"
    return (f"{label:<18} {total:>18} {day:>12} {p95:>14} "
            f"{fmt(site['hours_outside_window']) + ' h':>11}")


def _amount_dict(plan: Plan, mol_l: float, prefix: str = "") -> dict[str, Any]:
    """A dose in the plan's units: mmol/L and product kg and litres (per hour for a flow)."""
    a, sfx = plan.amounts(mol_l), _key_suffix(plan)
    return {f"{prefix}mmol_per_l": mol_l * 1000, f"{prefix}kg_product{sfx}": a.kg_product,
            f"{prefix}litres_product{sfx}": a.litres_product}


def _uncertainty_dict(plan: Plan) -> dict[str, Any] | None:
    unc = plan.uncertainty
    if unc is None:
        return None
    sfx = _key_suffix(plan)
    out: dict[str, Any] = {"samples": unc.samples, "plausible_waters": unc.valid}
    for name, mol in (("dose_p05", unc.p05_mol_l), ("dose_p50", unc.p50_mol_l),
                      ("dose_p95", unc.p95_mol_l)):
        a = plan.amounts(mol)
        out[name] = {"mmol_per_l": mol * 1000, "kg_product" + sfx: a.kg_product,
                     "litres_product" + sfx: a.litres_product}
    out.update(p_outside_window=unc.p_outside, p_below_window=unc.p_below,
               p_above_window=unc.p_above,
               spread_shares=[{"input": k, "share": v} for k, v in unc.shares],
               spread_words=unc.words())
    return out


def _control_dict(plan: Plan) -> dict[str, Any] | None:
    c = plan.control
    if c is None:
        return None
    kg = plan.reagent.kg_product_per_mol
    litres = plan.reagent.litres_product_per_mol
    return {"gain_ph_per_percent": c.gain_ph_per_percent,
            "accuracy_needed": c.accuracy_needed,
            "rate_mol_per_h": [c.rate_low_mol_h, c.rate_high_mol_h],
            "rate_kg_product_per_h": (None if kg is None else
                                      [c.rate_low_mol_h * kg, c.rate_high_mol_h * kg]),
            "rate_litres_product_per_h": (None if litres is None else
                                          [c.rate_low_mol_h * litres,
                                           c.rate_high_mol_h * litres]),
            "turndown": c.turndown, "flow_range_m3_per_h": list(c.flow_range_m3_h),
            "flow_range_given": c.flow_range_given, "note": c.note,
            "stages": [{"share": st.share, "residence_min": st.residence_min,
                        "volume_m3": st.volume_m3, "turnover_min": st.turnover_min}
                       for st in c.stages]}


def _staging_dict(plan: Plan) -> dict[str, Any] | None:
    st = plan.staging
    if st is None:
        return None
    return {"confidence": st.confidence, "p_inside_window_after_trim": st.p_inside,
            "first": _amount_dict(plan, st.first_mol_l),
            "ph_after_first_p05_p95": list(st.ph_first_range),
            "trim": [{"ph_read": r.ph_read, "at_or_past_aim": r.extra_mol_l is None,
                      **({} if r.extra_mol_l is None
                         else _amount_dict(plan, r.extra_mol_l, "extra_"))}
                     for r in st.trim]}


def uncertainty_lines(plan: Plan, units: str = "metric") -> list[tuple[str, str]]:
    """How sure the dose is, as (label, value) rows for the sheet and the view."""
    unc = plan.uncertainty
    if unc is None:
        return []
    per = plan.basis.per

    def prod(mol):
        return plan_amount(plan, mol, units)
    risk = (f"the planned dose lands outside the window in {unc.p_outside:.0%} of them"
            + (f" (below {unc.p_below:.0%}, above {unc.p_above:.0%})" if unc.p_outside else ""))
    return [("how sure", f"over {unc.valid:,} plausible waters (the measurements within "
             f"their uncertainty) the dose needed {per} runs {prod(unc.p05_mol_l)} to "
             f"{prod(unc.p95_mol_l)} (5th to 95th percentile), median "
             f"{prod(unc.p50_mol_l)}; {risk}"),
            ("spread", unc.words())]


def log_lines(plan: Plan, units: str = "metric") -> list[str]:
    """What the shift log says about this tank, with the correction offered (never applied)."""
    if plan.log_bias is None:
        return [plan.log_note] if plan.log_note else []
    b = plan.log_bias
    return [b.words() + ".",
            f"Offered, not applied: with that bias the dose would be "
            f"{plan_amount(plan, plan.dose_mol_l * b.mean_ratio, units)} {plan.basis.per}. The plan "
            "above is the model's; decide with the engineer which to dose."]


def control_lines(plan: Plan, units: str = "metric") -> list[tuple[str, str]]:
    """The control design of a flow plan as (label, value) rows."""
    c = plan.control
    if c is None:
        return []
    u = UNIT_SYSTEMS[units]

    def rate(mol_h):
        return plan_amount(plan, mol_h / plan.basis.litres, units)
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
            ("stages", c.note)]
    for i, st in enumerate(c.stages, start=1):
        rows.append((f"stage {i}", f"{st.share:.0%} of the reagent; tank about "
                     f"{fmt(st.volume_m3 * u.water_volume_per_m3)} {u.water_volume} "
                     f"({st.residence_min:g} min at the flow), agitator turnover under "
                     f"{st.turnover_min:g} min"))
    return rows


def staging_lines(plan: Plan, units: str = "metric") -> list[str]:
    """The staged dose and its trim table, as lines an operator follows with a pen."""
    st = plan.staging
    if st is None:
        return []

    def prod(mol):
        a = plan.amounts(mol)
        return product_text(a.kg_product, a.litres_product, units)
    out = [f"The planned dose leaves the window in {plan.uncertainty.p_outside:.0%} of the "
           "plausible waters: dose in two steps.",
           f"1. First dose {prod(st.first_mol_l)}: it stays short of the aim in "
           f"{st.confidence:.0%} of them. Mix well, then read the pH (expected "
           f"{st.ph_first_range[0]:.1f} to {st.ph_first_range[1]:.1f}).",
           "2. Add what the table gives for the pH read (between two rows, in "
           f"proportion), mix, read again. Followed, it lands in the window in "
           f"{st.p_inside:.0%} of the plausible waters:",
           f"   {'pH read':<11} add"]
    up = plan.reagent.raises_ph
    edge = (f"above {plan.target.ph_max:g}" if up else f"below {plan.target.ph_min:g}")
    for row in st.trim:
        if row.extra_mol_l is None:
            out.append(f"   {row.ph_read:>5.1f} {'up' if up else 'down':<4}  nothing more "
                       f"({edge}: stop and call the engineer)")
            break
        out.append(f"   {row.ph_read:>5.1f}       {prod(row.extra_mol_l)}")
    out.append("The table is for the first reading only: if the pH is still short of the "
               "window after the trim, add small amounts and read after each.")
    if st.p_inside < st.confidence:
        out.append(f"!! Even staged, this lands in the window in only {st.p_inside:.0%} of "
                   "the plausible waters: the window is narrower than this product can be "
                   "metered to. Finish with a dilute reagent in small steps, or widen the "
                   "aim with the engineer.")
    return out


#: Above this pH change per 1 % of the dose the curve is called near-vertical
#: at the aim and no linear slope is printed (common practice: a dose
#: metered to 1 % should not swing the pH by a whole unit).
STEEP_PH_PER_PERCENT = 1.0


def _slope_text(plan: Plan, u, flow: bool) -> str:
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
        parts.append(f"{sens.label} ±{sens.plus_minus:.2g}{unit} {lo:+.0%} to {hi:+.0%}")
    if not parts:
        return "the dose moves less than 1 % within the usual precision of the readings"
    return "dose change within the readings' usual precision: " + ", ".join(parts)


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


def _plus_minus(value: float, err: float | None, unit: str) -> str:
    """'1.20 ± 0.12 mmol/L', or a note in place of the error when the curve cannot tell it."""
    shown = fmt(value, zero_below=1e-4)         # below 0.1 µmol/L: nothing the curve resolves
    if err is None:
        return f"{shown}{unit} (not determined)"
    return f"{shown} ± {fmt(err, 2)}{unit}"


def render_titration(scenario: Scenario, comparison, units: str = "metric",
                     width: int = 78) -> str:
    """Both titration methods side by side (a :class:`~dosing.planning.titration.Comparison`),
    then the model plan's sheet."""
    from ..planning.titration import FIT_LABELS
    report = comparison.to_dict()
    d, m = report["direct"], report["model"]
    per = "per_h" if "kg_product_per_h" in d else "per_batch"
    kg, lit = d[f"kg_product_{per}"], d[f"litres_product_{per}"]
    plan: Plan = comparison.plan
    a = plan.amounts()
    label = plan.basis.per

    def prod(k, l_):
        return product_text(k, l_, units)

    scaled = (f"{fmt(d['dose_mmol_per_l'])} mmol/L, {prod(kg, lit)} {label}"
              if d["dose_mmol_per_l"] is not None
              else "no dose by equivalents for this reagent (see the warnings)")
    out = _wrap(f"BENCH TITRATION  {report['points']} points, {fmt(report['sample_ml'])} mL "
                f"sample, titrant {report['titrant']}", width, "") + ["=" * 40]
    out += _hanging("direct scaling", f"{fmt(d['ml_titrant_at_aim'])} mL titrant to pH "
                    f"{plan.target.ph_aim:g} -> {scaled}", width)
    out += _hanging("model fit", f"{fmt(a.mmol_per_l)} mmol/L, "
                    f"{prod(a.kg_product, a.litres_product)} {label}", width)
    gap = report["gap_model_vs_direct"]
    if gap is not None:
        out += _hanging("", f"the model is {gap:+.1%} against the direct scaling", width)
    spec = report.get("spectrum")
    if m.get("used") == "spectrum" and spec:
        balance = fmt(spec["strong_ion_balance_meq_l"])
        out.extend(_wrap(f"buffer spectrum strong-ion balance {balance} "
                         f"meq/L, carbonate {fmt(spec['carbonate_mmol_l'], floor=1e-4)} mmol/L; "
                         f"pH misfit {spec['rms_ph']:.3f} RMS (the simple fit misses by "
                         f"{m['rms_ph']:.3f})", width, "                "))
        for r in spec["regions"]:
            out.extend(_wrap(r["words"], width, "                  - "))
        out.extend(_spectrum_bars(spec["sites"]))
        out = _titration_warnings(out, report, width)
        out += ["", "PLAN WITH THE FITTED WATER", ""]
        out.append(render_sheet(comparison.scenario, plan, units, width))
        return "\n".join(out)
    out += _hanging("fitted water", ", ".join(
        f"{FIT_LABELS[k][0]} {_plus_minus(v, m['stderr'][k], FIT_LABELS[k][1])}"
        for k, v in m["fitted"].items()) + f"; pH misfit {m['rms_ph']:.3f} RMS", width)
    out = _titration_warnings(out, report, width)
    out += ["", "PLAN WITH THE FITTED WATER", ""]
    out.append(render_sheet(comparison.scenario, plan, units, width))
    return "\n".join(out)


def _hanging(label: str, text: str, width: int, indent: int = 16) -> list[str]:
    """A label and its text, the text wrapped under itself."""
    import textwrap
    return textwrap.wrap(f"{label:<{indent}}{text}", width, subsequent_indent=" " * indent,
                         break_on_hyphens=False)


def _spectrum_bars(sites: list[dict[str, float]], bar: int = 30) -> list[str]:
    """The fitted sites as a text bar chart over pKa (for the sheet and the view)."""
    if not sites:
        return []
    top = max(x["mmol_per_l"] for x in sites) or 1.0
    out = ["", "buffer spectrum (fitted sites, mmol/L)"]
    for x in sites:
        n = max(1, round(bar * x["mmol_per_l"] / top))
        out.append(f"  pKa {x['pka']:>4.1f}  {'█' * n:<{bar}}  {fmt(x['mmol_per_l'])}")
    return out


def _titration_warnings(out: list[str], report: dict[str, Any], width: int) -> list[str]:
    if report["warnings"]:
        out += ["", "TITRATION WARNINGS"]
        for w in report["warnings"]:
            out.extend(_wrap(w, width, "  ! "))
    return out
