"""A treatment train as plain data with stable keys (SI units, JSON-ready).

``steps`` lists every step (``kind``, ``label``, ``ph_in``, ``ph_after``,
its ``dose`` block where it doses, ``solids``, ``removed``, ``sludge``,
``metals_after_mg_l``, its ``warnings``); ``train`` sums them: each
product's total, the sludge, the cost, and the discharge checks with each
metal cap's basis. A scenario of one dose whose plan the planner turned into
a train keeps its one-dose keys and gains these two.
"""

from __future__ import annotations

from typing import Any

from ..version import __version__
from ..planning.job import Scenario
from ..planning.reagents import GENERAL_CAUTION
from ..planning.train_plan import TrainPlan
from .train_view import StepView, TrainView, train_view
from .words import texts, words

__all__ = ["train_dict", "train_keys"]


def _amounts(v: TrainView, a) -> dict[str, Any] | None:
    if a is None:
        return None
    return {"mmol_per_l": a.mmol_per_l, f"kg_product{v.suffix}": a.kg_product,
            f"litres_product{v.suffix}": a.litres_product, f"kg_active{v.suffix}": a.kg_active}


def _step(v: TrainView, s: StepView) -> dict[str, Any]:
    r, spec = s.result, s.result.spec
    out: dict[str, Any] = {"step": s.number, "kind": spec.kind, "label": spec.label,
                           "proposed": spec.proposed, "ph_in": r.ph_in, "ph_after": r.ph_out}
    if spec.reagent is not None:
        out["reagent"] = spec.reagent.id
    if spec.kind == "dose":
        out["target"] = {"ph_min": spec.target.ph_min, "ph_max": spec.target.ph_max,
                         "ph_aim": spec.target.ph_aim}
        out["dose"] = _amounts(v, s.dose) if r.plan.dose_needed else None
    elif spec.kind == "oxidise":
        out.update(by=spec.by, fraction=spec.fraction, oxidant=_amounts(v, s.dose))
    elif spec.kind == "separate":
        out["removal"] = spec.removal
    elif spec.kind == "blend":
        out["streams"] = [{"name": n, "ph": w.ph, ("m3_per_h" if spec.per_hour else
                                                   "volume_m3"): a}
                          for n, w, a in spec.streams]
        b = r.blend
        out["saved_kg_product"] = None if b is None else b.saved_kg
    out["solids"] = [{"formula": f, "mg_per_l": mg, f"kg{v.suffix}": kg}
                     for f, mg, kg in s.solid_kg]
    out["removed"] = [{"formula": f, "mg_per_l": mg, f"kg{v.suffix}": kg}
                      for f, mg, kg in s.removed_kg]
    out["sludge"] = None if r.sludge is None else _sludge(v, r.sludge)
    out["metals_after_mg_l"] = dict(r.metals_mg_l)
    out["warnings"] = texts(s.warnings)
    return out


def _sludge(v: TrainView, sl) -> dict[str, Any]:
    return {f"dry_kg{v.suffix}": sl.dry_kg, f"cake_kg{v.suffix}": sl.cake_kg,
            f"cake_m3{v.suffix}": sl.cake_m3, "cake_solids_fraction": sl.solids_fraction}


def train_keys(v: TrainView) -> dict[str, Any]:
    """The ``steps`` and ``train`` keys."""
    d = v.train.discharge
    return {
        "steps": [_step(v, s) for s in v.steps],
        "train": {
            "proposed": v.train.proposed,
            "products": [{"reagent": p.reagent.id, "reagent_name": p.reagent.name,
                          "steps": list(p.steps), **_amounts(v, p.amounts),
                          f"cost{v.suffix}": p.cost} for p in v.products],
            f"cost{v.suffix}": v.cost,
            "currency": v.scenario.currency or None,
            "sludge": None if v.train.sludge is None else _sludge(v, v.train.sludge),
            "discharge": {
                "ph": d.ph, "in_window": d.in_window, "met": d.met,
                "metal_caps": [{"metal": c.metal, "cap_mg_l": c.cap_mg_l, "basis": c.basis,
                                "dissolved_mg_l": c.dissolved_mg_l,
                                "suspended_mg_l": c.suspended_mg_l,
                                "value_mg_l": c.value_mg_l, "met": c.met} for c in d.metals],
                "checks": [{"id": c.id, "level": c.level, "message": words(c),
                            "values": c.values} for c in v.checks]},
            "warnings": texts(v.warnings),
        },
    }


def train_dict(scenario: Scenario, train: TrainPlan) -> dict[str, Any]:
    """A train scenario's plan as plain data."""
    v = train_view(scenario, train)
    basis = train.basis
    return {
        "kind": "train",
        "title": scenario.title, "site": scenario.site, "tank": scenario.tank,
        "engine_version": __version__,
        "basis": ({"flow_m3_per_h": basis.m3_per_h, "hours_per_day": scenario.hours_per_day}
                  if v.flow else {"batch_volume_m3": basis.volume_m3}),
        "target": {"ph_min": train.target.ph_min, "ph_max": train.target.ph_max,
                   "ph_aim": train.target.ph_aim},
        "ph_start": train.water_in.ph,
        "ph_end": train.discharge.ph,
        **train_keys(v),
        "cautions": list(train.cautions),
        "final_word": GENERAL_CAUTION,
    }
