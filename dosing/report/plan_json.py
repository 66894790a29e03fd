"""A plan as JSON-ready data: stable keys, SI units, read from its view.

:func:`plan_dict` renders a :class:`~dosing.report.view.PlanView`; the keys
are documented in the README and kept stable (amounts of a flow carry
``_per_h``). Checks and warnings carry their words (metric) and, for the
checks, their numbers by name. :func:`sheet_dict` is the shortcut from a
scenario and its plan.
"""

from __future__ import annotations

from typing import Any

from ..planning.basis import Amounts
from ..planning.job import Scenario
from ..planning.measurements import CACO3_MG_PER_MEQ
from ..planning.plan import Plan
from ..planning.plan_findings import METERING_ERROR
from ..version import __version__
from .view import PlanView, plan_view
from .words import texts, words

__all__ = ["plan_dict", "sheet_dict", "metals_dict"]


def sheet_dict(scenario: Scenario, plan: Plan) -> dict[str, Any]:
    """The plan as plain data with stable keys (SI units, JSON-ready)."""
    return plan_dict(plan_view(scenario, plan))


def plan_dict(v: PlanView) -> dict[str, Any]:
    """The view as plain data with stable keys (SI units, JSON-ready)."""
    plan, scenario = v.plan, v.scenario
    return {
        "title": scenario.title,
        "site": scenario.site,
        "tank": scenario.tank,
        "engine_version": __version__,
        "basis": ({"flow_m3_per_h": plan.basis.m3_per_h, "hours_per_day": scenario.hours_per_day}
                  if v.flow else {"batch_volume_m3": plan.basis.volume_m3}),
        "reagent": plan.reagent.id,
        "reagent_name": plan.reagent.name,
        "active_compound": plan.reagent.compound.formula,
        "ph_start": plan.ph_start,
        "ph_end": plan.ph_end,
        "dose_needed": plan.dose_needed,
        "target": {"ph_min": plan.target.ph_min, "ph_max": plan.target.ph_max,
                   "ph_aim": plan.target.ph_aim},
        "dose": _dose_dict(v),
        "window": _window_dict(v),
        "sensitivity": {
            "ph_per_mmol_l": plan.slope_ph_per_mmol_l,
            "ph_per_percent_of_dose": plan.slope_ph_per_mmol_l * plan.dose_mol_l * 10.0,
            "metering_error": METERING_ERROR,
            "ph_at_low_dose": plan.ph_low_dose,
            "ph_at_high_dose": plan.ph_high_dose,
        },
        "lab_precision": _precision_list(plan),
        "uncertainty": _uncertainty_dict(v),
        "staging": _staging_dict(v),
        "control": _control_dict(v),
        "log_bias": _log_bias_dict(v),
        "cost" + v.suffix: v.cost,
        "currency": scenario.currency or None,
        "water": _water_dict(plan),
        **metals_dict(v),
        "checks": [{"id": c.id, "level": c.level, "message": words(c),
                    "values": c.values} for c in plan.checks],
        "warnings": texts(v.warnings),
        "cautions": list(plan.cautions),
    }


def _amount_dict(v: PlanView, a: Amounts, prefix: str = "") -> dict[str, Any]:
    """A dose in the plan's units: mmol/L and product kg and litres (per hour for a flow)."""
    return {f"{prefix}mmol_per_l": a.mmol_per_l, f"{prefix}kg_product{v.suffix}": a.kg_product,
            f"{prefix}litres_product{v.suffix}": a.litres_product}


def _dose_dict(v: PlanView) -> dict[str, Any]:
    a, sfx = v.dose, v.suffix
    dose = {
        "mmol_per_l": a.mmol_per_l,
        "mg_per_l_product": a.mg_per_l_product,
        "kg_active" + sfx: a.kg_active,
        "kg_product" + sfx: a.kg_product,
        "litres_product" + sfx: a.litres_product,
    }
    if v.flow:
        dose["ml_product_per_min"] = (None if a.litres_product is None
                                      else a.litres_product * 1000 / 60)
    s = v.supply
    for key, value in (("kg_product_per_day", s.kg_product_per_day),
                       ("days_of_supply", s.days), ("batches_of_supply", s.batches)):
        if value is not None:
            dose[key] = value
    return dose


def _window_dict(v: PlanView) -> dict[str, Any]:
    lo, hi = v.band
    return {
        "dose_mmol_per_l": [lo.mmol_per_l, None if hi is None else hi.mmol_per_l],
        "dose_kg_product": [lo.kg_product, None if hi is None else hi.kg_product],
        "dose_litres_product": [lo.litres_product, None if hi is None else hi.litres_product],
        "per": "hour" if v.flow else "batch",
    }


def _precision_list(plan: Plan) -> list[dict[str, Any]]:
    def mmol(x):
        return None if x is None else x * 1000
    return [{"measurement": p.field, "value": p.value, "plus_minus": p.plus_minus,
             "unit": p.unit, "dose_mmol_per_l_low_reading": mmol(p.dose_low_reading_mol_l),
             "dose_mmol_per_l_high_reading": mmol(p.dose_high_reading_mol_l)}
            for p in plan.precision]


def _log_bias_dict(v: PlanView) -> dict[str, Any] | None:
    b = v.plan.log_bias
    if b is None:
        return None
    return {"tank": b.tank, "entries": b.entries, "mean_ratio": b.mean_ratio,
            "sd_ratio": b.sd_ratio, "bench_titration_due": b.due,
            "offered_dose": _amount_dict(v, v.offered), "applied": False}


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
        "totals_mmol_l": {k: x * 1000 for k, x in w.totals_mol_l.items()},
        "strong_ion_balance_meq_l": w.strong_eq_l * 1000,
        "ionic_strength_mol_l": w.ionic_strength,
        "alkalinity_mg_l_as_caco3": w.alkalinity_eq_l * CACO3_MG_PER_MEQ * 1000.0,
        "ionic_strength_after_mol_l": plan.ionic_strength_end,
        "metals_mmol_l": {k: x * 1000 for k, x in w.metals_mol_l.items()},
        "ferrous_oxidised": w.ferrous_oxidised,
    }


def metals_dict(v: PlanView) -> dict[str, Any]:
    """Solids, sludge, dissolved metals and metal caps as JSON-ready data."""
    plan, sfx, sludge, cw = v.plan, v.suffix, v.sludge, v.plan.cap_window
    return {
        "ph_ceiling": plan.ph_ceiling,
        "metals_after_mg_l": dict(plan.metals_after_mg_l),
        "solids": [{"id": x.id, "name": x.name, "formula": x.formula,
                    "mmol_per_l": x.mmol_per_l, "mg_per_l": x.mg_per_l, "kg" + sfx: kg}
                   for x, kg in zip(plan.solids, v.solid_kg)],
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


def _uncertainty_dict(v: PlanView) -> dict[str, Any] | None:
    unc = v.plan.uncertainty
    if unc is None:
        return None
    out: dict[str, Any] = {"samples": unc.samples, "plausible_waters": unc.valid}
    for name, a in zip(("dose_p05", "dose_p50", "dose_p95"), v.spread):
        out[name] = _amount_dict(v, a)
    out.update(p_outside_window=unc.p_outside, p_below_window=unc.p_below,
               p_above_window=unc.p_above,
               spread_shares=[{"input": k, "share": s} for k, s in unc.shares],
               spread_words=words(unc.spread_finding()))
    return out


def _control_dict(v: PlanView) -> dict[str, Any] | None:
    c = v.plan.control
    if c is None:
        return None
    return {"gain_ph_per_percent": c.gain_ph_per_percent,
            "accuracy_needed": c.accuracy_needed,
            "rate_mol_per_h": [c.rate_low_mol_h, c.rate_high_mol_h],
            "rate_kg_product_per_h": None if v.rate_kg_h is None else list(v.rate_kg_h),
            "rate_litres_product_per_h": None if v.rate_l_h is None else list(v.rate_l_h),
            "turndown": c.turndown, "flow_range_m3_per_h": list(c.flow_range_m3_h),
            "flow_range_given": c.flow_range_given, "note": words(c.note),
            "stages": [{"share": st.share, "residence_min": st.residence_min,
                        "volume_m3": st.volume_m3, "turnover_min": st.turnover_min}
                       for st in c.stages]}


def _staging_dict(v: PlanView) -> dict[str, Any] | None:
    st = v.plan.staging
    if st is None:
        return None
    return {"confidence": st.confidence, "p_inside_window_after_trim": st.p_inside,
            "reading_sd_ph": st.reading_sd,
            "first": _amount_dict(v, v.first),
            "ph_after_first_p05_p95": list(st.ph_first_range),
            "metering_step": {st.metering[0]: st.metering[1]},
            "trim": [{"ph_read": r.ph_read, "at_or_past_aim": a is None,
                      **({} if a is None else _amount_dict(v, a, "extra_")),
                      "below_metering": r.below_metering}
                     for r, a in zip(st.trim, v.trim)]}
