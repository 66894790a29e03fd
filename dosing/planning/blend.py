"""Blending streams before they are dosed: exact mixing, the pH solved, and the reagent it saves.

Streams are mixed by volume (a batch) or by flow (a continuous stream). What
mixing conserves is exact: each component total, the strong-ion balance and
the ionic strength of the strong ions, weighted by amount; the temperature
is weighted the same way (the heat of mixing an acid stream with an alkaline
one is not included, and the sheet says so). The pH of the blend is then
solved by the engine, never averaged.

What blending saves is worked out against dosing each stream alone to the
aim of the train's first dose: with that dose's product where it moves the
stream the right way, and otherwise with the opposite product a plant would
use (:data:`COUNTER`), whose whole amount the blend saves.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from ..chem import Mixture
from ..errors import InputError, UnreachableError
from .basis import Amounts, Batch, Flow, amounts_for
from .effluent import Water
from .findings import Finding, Q, note
from .plan import plan_dose
from .reagents import Reagent, get_reagent
from .train import StepResult, solids_of, water_of

__all__ = ["Blend", "StreamPart", "blend_step", "mix_streams", "COUNTER"]

#: The product a stream dosed alone would take when the train's reagent moves
#: it the wrong way (common practice: caustic and sulfuric acid).
COUNTER = {True: "sulfuric-93", False: "caustic-25"}


@dataclass(frozen=True)
class StreamPart:
    """One stream of a blend, and what dosing it alone would take."""

    name: str
    water: Water
    amount: float                         #: m³ (batch) or m³/h (flow)
    alone_reagent: Reagent | None         #: the product it alone would take
    alone: Amounts | None                 #: that dose, per its own batch or hour


@dataclass(frozen=True)
class Blend:
    """The streams of a blend step, and the reagent blending saves."""

    parts: tuple[StreamPart, ...]
    reagent: Reagent | None               #: the train's first dose product
    blend_dose: Amounts | None            #: that dose on the blend
    saved_kg: float | None                #: that product saved against the streams alone
    counter_kg: Mapping | None = None     #: the opposite product the streams alone would take


def mix_streams(streams: tuple) -> tuple[Mixture, Water, dict[str, float]]:
    """The blended mixture (one row), its template water, and its background ions.

    ``streams`` are (name, Water, amount); amounts weight everything."""
    amounts = np.array([float(a) for _, _, a in streams])
    w = amounts / amounts.sum()
    mixes = [water.mixture(air_equilibrium=False) for _, water, _ in streams]
    tot = sum(wi * m.totals_mol_l[0] for wi, m in zip(w, mixes))
    strong = float(sum(wi * m.strong_eq_l[0] for wi, m in zip(w, mixes)))
    strong_i = float(sum(wi * m.strong_ionic_strength[0] for wi, m in zip(w, mixes)))
    temp = float(sum(wi * m.temperature_c[0] for wi, m in zip(w, mixes)))
    waters = [water for _, water, _ in streams]
    model = next((x.activity for x in waters if not x.activity.charge_only), waters[0].activity)
    ions: dict[str, float] = {}
    for wi, x in zip(w, waters):
        for key, mg in x.ions_mg_l.items():
            ions[key] = ions.get(key, 0.0) + wi * mg
    mix = Mixture.build(tot, strong, strong_i, temp, math.nan, model)
    return mix, waters[0], ions


def _alone(water: Water, amount: float, flow: bool, dose_spec) -> tuple:
    """(product, dose) to take one stream alone to the first dose's aim."""
    if dose_spec is None:
        return None, None
    basis = Flow(amount) if flow else Batch(amount)
    target = dose_spec.target
    reagent = dose_spec.reagent
    aim = target.ph_aim
    if (water.ph < aim) != reagent.raises_ph:
        reagent = get_reagent(COUNTER[reagent.raises_ph])
    try:
        plan = plan_dose(water, reagent, target, basis)
    except (UnreachableError, InputError):
        return reagent, None
    return reagent, (plan.amounts() if plan.dose_needed else amounts_for(0.0, reagent, basis))


def blend_step(spec, basis: Batch | Flow, rest: tuple):
    """The blend step: its water, the streams, what it saves."""
    mix, template, ions = mix_streams(spec.streams)
    water = water_of(mix, template, ions_mg_l=ions)
    flow = isinstance(basis, Flow)
    first = next((s for s in rest if s.kind == "dose"), None)
    parts = tuple(StreamPart(name, w, a, *_alone(w, a, flow, first))
                  for name, w, a in spec.streams)
    blend = _saving(parts, first, water, basis)
    findings = (_blend_words(water, parts, blend), _heat_words())
    return StepResult(spec, water, water, solids=solids_of(water),
                      metals_mg_l={}, findings=findings, blend=blend)


def _saving(parts, first, water: Water, basis) -> Blend:
    """The first dose's product on the blend against each stream alone."""
    if first is None:
        return Blend(parts, None, None, None)
    try:
        plan = plan_dose(water, first.reagent, first.target, basis)
        blended = plan.amounts() if plan.dose_needed else amounts_for(0.0, first.reagent, basis)
    except (UnreachableError, InputError):
        return Blend(parts, first.reagent, None, None)
    same = [p.alone.kg_product for p in parts if p.alone is not None
            and p.alone_reagent.id == first.reagent.id and p.alone.kg_product is not None]
    counter = {}
    for p in parts:
        if p.alone is not None and p.alone_reagent.id != first.reagent.id:
            counter[p.alone_reagent.name] = counter.get(p.alone_reagent.name, 0.0) + (
                p.alone.kg_product or 0.0)
    saved = None if blended.kg_product is None else sum(same) - blended.kg_product
    return Blend(parts, first.reagent, blended, saved, counter or None)


def _blend_words(water: Water, parts, blend: Blend) -> Finding:
    """The blend's pH from its streams', and the reagent saved."""
    q = {"ph": Q(water.ph, "pH")}
    names = {"streams": ", ".join(f"{p.name} (pH {p.water.ph:.2f})" for p in parts)}
    text = "blending {streams} gives pH {ph:.2f}"
    if blend.saved_kg is not None and blend.reagent is not None:
        q["saved_kg"] = Q(blend.saved_kg, "kg")
        names["reagent"] = blend.reagent.name
        text += ("; against dosing each stream alone to the same aim it saves {saved_kg} "
                 "of {reagent}")
        if blend.counter_kg:
            names["counter"] = " and ".join(f"{kg:.3g} kg of {name}"
                                           for name, kg in blend.counter_kg.items())
            text += ", and the {counter} the streams alone would need"
    return Finding("blend", "info", text, q, names)


def _heat_words() -> Finding:
    return note("blend-heat", "the heat of mixing an acid stream with an alkaline one is "
                "not included: blend into a well-mixed tank, slowly, and watch for fumes "
                "and foam where the streams meet", "info")
