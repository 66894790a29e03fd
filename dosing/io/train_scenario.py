"""The ``[[step]]`` list of a scenario: a treatment train, read and checked.

Format (our own; the README shows it whole)::

    [[step]]                      # each step in order; kind is required
    kind = "blend"                # first, or not at all: it makes the water
    [[step.stream]]
    name = "acid rinse"
    volume_m3 = 20                # a batch (or m3_per_h = 6 for a flow)
    [step.stream.effluent]        # as a scenario's [effluent]
    ph = 2.1

    [[step]]
    kind = "oxidise"              # iron(II) to iron(III)
    by = "air"                    # or "peroxide" (product: reagent, default peroxide-35)
    fraction = 1.0                # share of the iron(II), default all of it

    [[step]]
    kind = "dose"
    reagent = "caustic-25"        # a catalogue id
    ph_aim = 9.6                  # the last dose defaults to [target]
    # ph_min = 9.3, ph_max = 9.9  # default aim -/+ 0.3 (the last dose: [target])
    # price_per_kg = 0.3
    # slurry_fraction = 0.15      # lime or magnesia fed as a slurry of this solids

    [[step]]
    kind = "separate"             # clarifier or filter
    removal = 0.98                # share of the solids removed, default 0.98

Every problem is an :class:`~dosing.errors.InputError` naming the step and
key (``step[2].reagent``), which the scenario reader turns into one line.
"""

from __future__ import annotations

import math
from typing import Any, Mapping

from ..errors import InputError
from ..planning.basis import Batch, Flow, Target
from ..planning.effluent import infer_water
from ..planning.reagents import get_reagent, ph_reagent
from ..planning.strengths import as_slurry
from ..planning.train import DEFAULT_REMOVAL, STEP_KINDS, StepSpec

__all__ = ["read_steps", "basis_of_blend", "STEP_KEYS", "INTERMEDIATE_BAND"]

#: Keys each kind of step takes (kind and label for all).
STEP_KEYS = {"blend": ("stream",), "oxidise": ("by", "fraction", "reagent"),
             "dose": ("reagent", "ph_aim", "ph_min", "ph_max", "price_per_kg", "slurry_fraction"),
             "separate": ("removal",)}
_STREAM_KEYS = ("name", "volume_m3", "m3_per_h", "effluent")
#: Half-width of the window of a dose step that is not the last [pH].
INTERMEDIATE_BAND = 0.3


def _number(where: str, value: Any, lo: float, hi: float) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or \
            not math.isfinite(float(value)) or not lo <= value <= hi:
        raise InputError(where, f"{value!r}; allowed: a number from {lo:g} to {hi:g}")
    return float(value)


def read_steps(steps: Any, target: Target | None, measurements_of, model: Mapping
               ) -> tuple[StepSpec, ...]:
    """The train's steps from the parsed ``[[step]]`` list.

    ``measurements_of`` turns a stream's effluent table (with the scenario's
    [model]) into Measurements; ``target`` is the discharge window.
    """
    if not isinstance(steps, list) or not steps or not all(isinstance(s, dict) for s in steps):
        raise InputError("step", "expected one or more [[step]] tables")
    out = []
    last_dose = max((i for i, s in enumerate(steps) if s.get("kind") == "dose"), default=-1)
    for i, table in enumerate(steps, start=1):
        kind = table.get("kind")
        where = f"step[{i}]"
        if kind not in STEP_KINDS:
            raise InputError(f"{where}.kind", f"{kind!r}; allowed: " + ", ".join(STEP_KINDS))
        for key in table:
            if key not in ("kind", "label") + STEP_KEYS[kind]:
                raise InputError(f"{where}.{key}", f"unknown key for a {kind} step; allowed: "
                                 + ", ".join(("label",) + STEP_KEYS[kind]))
        if kind == "blend" and i != 1:
            raise InputError(f"{where}.kind", "a blend makes the water the train starts "
                             "from: give it as the first step")
        label = table.get("label", "")
        if not isinstance(label, str):
            raise InputError(f"{where}.label", "expected text in quotes")
        read = {"blend": _blend, "oxidise": _oxidise, "dose": _dose, "separate": _separate}
        out.append(read[kind](where, table, label, target=target, last=i - 1 == last_dose,
                              measurements_of=measurements_of, model=model))
    return tuple(out)


def _reagent(where: str, table: Mapping, default: str | None = None, *, ph: bool = True):
    rid = table.get("reagent", default)
    if not isinstance(rid, str):
        raise InputError(f"{where}.reagent", "give the product's catalogue id in quotes "
                         "(see `dosing reagents`)")
    try:
        return ph_reagent(rid) if ph else get_reagent(rid)
    except InputError as err:
        raise InputError(f"{where}.reagent", err.reason) from None


def _dose(where, table, label, *, target, last, **_) -> StepSpec:
    reagent = _reagent(where, table)
    if "slurry_fraction" in table:
        reagent = as_slurry(reagent, _number(f"{where}.slurry_fraction",
                                             table["slurry_fraction"], 0.0, 1.0), where)
    if "ph_aim" not in table and not (last and target is not None):
        raise InputError(f"{where}.ph_aim", "missing; a dose step needs its pH aim (the "
                         "last dose may take the [target] window instead)")
    if last and target is not None and not ({"ph_aim", "ph_min", "ph_max"} & set(table)):
        window = target
    else:
        aim = _number(f"{where}.ph_aim", table.get("ph_aim", target.ph_aim if target else 7.0),
                      0.0, 14.0)
        lo = _number(f"{where}.ph_min", table.get("ph_min", aim - INTERMEDIATE_BAND), 0.0, 14.0)
        hi = _number(f"{where}.ph_max", table.get("ph_max", aim + INTERMEDIATE_BAND), 0.0, 14.0)
        try:
            window = Target(lo, hi, aim)
        except InputError as err:
            raise InputError(f"{where}.{err.field.split('.')[-1]}", err.reason) from None
    price = table.get("price_per_kg")
    if price is not None:
        price = _number(f"{where}.price_per_kg", price, 1e-12, 1e6)
    return StepSpec("dose", label, reagent=reagent, target=window, price_per_kg=price)


def _oxidise(where, table, label, **_) -> StepSpec:
    by = table.get("by", "air")
    if by not in ("air", "peroxide"):
        raise InputError(f"{where}.by", f"{by!r}; allowed: \"air\" or \"peroxide\"")
    fraction = _number(f"{where}.fraction", table.get("fraction", 1.0), 0.0, 1.0)
    if by == "air" and "reagent" in table:
        raise InputError(f"{where}.reagent", "air needs no product; give a reagent only "
                         "with by = \"peroxide\"")
    reagent = (_reagent(where, table, "peroxide-35", ph=False) if by == "peroxide"
               else None)
    if reagent is not None and reagent.compound.formula != "H2O2":
        raise InputError(f"{where}.reagent", f"{reagent.id} is not an oxidant; allowed: a "
                         "hydrogen peroxide product (peroxide-35)")
    return StepSpec("oxidise", label, by=by, fraction=fraction, reagent=reagent)


def _separate(where, table, label, **_) -> StepSpec:
    removal = _number(f"{where}.removal", table.get("removal", DEFAULT_REMOVAL), 0.5, 0.9999)
    return StepSpec("separate", label, removal=removal)


def _blend(where, table, label, *, measurements_of, model, **_) -> StepSpec:
    streams = table.get("stream")
    if not isinstance(streams, list) or len(streams) < 2 or \
            not all(isinstance(s, dict) for s in streams):
        raise InputError(f"{where}.stream", "a blend needs two or more [[step.stream]] "
                         "tables, each with its name, its volume_m3 (or m3_per_h) and "
                         "its [step.stream.effluent]")
    out, kinds = [], set()
    for j, s in enumerate(streams, start=1):
        at = f"{where}.stream[{j}]"
        for key in s:
            if key not in _STREAM_KEYS:
                raise InputError(f"{at}.{key}", "unknown key; allowed: "
                                 + ", ".join(_STREAM_KEYS))
        amount_key = "volume_m3" if "volume_m3" in s else "m3_per_h"
        if amount_key not in s:
            raise InputError(f"{at}.volume_m3", "missing; give the stream's volume_m3 "
                             "(a batch) or m3_per_h (a flow)")
        kinds.add(amount_key)
        amount = _number(f"{at}.{amount_key}", s[amount_key], 1e-3, 1e5)
        if not isinstance(s.get("effluent"), dict):
            raise InputError(f"{at}.effluent", "missing; give the stream's measurements "
                             "as [step.stream.effluent]")
        try:
            water = infer_water(measurements_of({"effluent": s["effluent"], "model": model}))
        except InputError as err:
            raise InputError(f"{at}.effluent.{err.field}", err.reason) from None
        out.append((str(s.get("name", f"stream {j}")), water, amount))
    if len(kinds) > 1:
        raise InputError(f"{where}.stream", "give every stream as a volume (batch) or "
                         "every stream as a flow, not a mix")
    return StepSpec("blend", label, streams=tuple(out), per_hour=kinds == {"m3_per_h"})


def basis_of_blend(spec: StepSpec) -> Batch | Flow:
    """A blend's batch (its volumes summed) or flow (its flows summed)."""
    return Flow(spec.amount_total) if spec.per_hour else Batch(spec.amount_total)
