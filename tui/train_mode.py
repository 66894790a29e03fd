"""Trains in Tankside, as plain data: the [[step]] list the operator edits.

No UI here: functions over the scenario data (the TOML tables) so they are
tested without the app. A train scenario names each dose's product in its
step, so the form's [reagent] section is left out of it, and a train that
starts with a blend takes its water and amount from the streams, so the
form's [effluent] and tank or flow are left out too.
"""

from __future__ import annotations

import copy
from typing import Any

from dosing.planning.train import StepSpec

__all__ = ["with_steps", "new_step", "moved", "removed", "steps_of", "step_summary",
           "ADDABLE", "STEP_FIELDS"]

#: Kinds the operator may add in Tankside (a blend's streams are edited in the file).
ADDABLE = ("dose", "oxidise", "separate")
#: The fields each kind's dialog asks for: (key, label, unit, number, example).
STEP_FIELDS = {
    "dose": (("reagent", "product id", "", False, "caustic-25, sulfuric-93 ..."),
             ("ph_aim", "pH aim", "", True, "the last dose: the window's aim"),
             ("ph_min", "pH min", "", True, "optional"), ("ph_max", "pH max", "", True,
                                                          "optional"),
             ("price_per_kg", "price", "per kg", True, "optional"),
             ("label", "label", "", False, "optional")),
    "oxidise": (("by", "by", "", False, "air or peroxide"),
                ("fraction", "fraction", "", True, "of the iron(II), 0 to 1"),
                ("label", "label", "", False, "optional")),
    "separate": (("removal", "removal", "", True, "share of the solids, 0.5 to 0.9999"),
                 ("label", "label", "", False, "optional")),
    "blend": (("label", "label", "", False, "optional"),),
}


def with_steps(data: dict[str, Any], steps: list[dict[str, Any]] | None) -> dict[str, Any]:
    """The form's data made a train's (or left as one dose when ``steps`` is None)."""
    out = copy.deepcopy(data)
    out.pop("step", None)
    if not steps:
        return out
    out["step"] = copy.deepcopy(steps)
    out.pop("reagent", None)
    if steps[0].get("kind") == "blend":
        for section in ("effluent", "batch", "flow"):
            out.pop(section, None)
    return out


def new_step(kind: str, last_aim: float | None = None) -> dict[str, Any]:
    """A new step of ``kind`` with the usual settings (common practice)."""
    if kind == "dose":
        return {"kind": "dose", "reagent": "caustic-25",
                "ph_aim": 7.5 if last_aim is None else last_aim}
    if kind == "oxidise":
        return {"kind": "oxidise", "by": "air"}
    return {"kind": "separate", "removal": 0.98}


def moved(steps: list[dict[str, Any]], i: int, by: int) -> list[dict[str, Any]]:
    """Step ``i`` moved up (-1) or down (+1); a blend stays first."""
    j = i + by
    if not (0 <= i < len(steps) and 0 <= j < len(steps)):
        return steps
    if "blend" in (steps[i].get("kind"), steps[j].get("kind")):
        return steps
    out = list(steps)
    out[i], out[j] = out[j], out[i]
    return out


def removed(steps: list[dict[str, Any]], i: int) -> list[dict[str, Any]] | None:
    """Step ``i`` taken out (None when no step is left: one dose again)."""
    out = [s for k, s in enumerate(steps) if k != i]
    return out or None


def steps_of(specs: tuple[StepSpec, ...]) -> list[dict[str, Any]]:
    """A proposed train as [[step]] tables, to adopt and edit."""
    out = []
    for s in specs:
        table: dict[str, Any] = {"kind": s.kind}
        if s.label:
            table["label"] = s.label
        if s.kind == "dose":
            table |= {"reagent": s.reagent.id, "ph_aim": round(s.target.ph_aim, 2),
                      "ph_min": round(s.target.ph_min, 2), "ph_max": round(s.target.ph_max, 2)}
            if s.price_per_kg is not None:
                table["price_per_kg"] = s.price_per_kg
        elif s.kind == "separate":
            table["removal"] = round(s.removal, 4)
        elif s.kind == "oxidise":
            table |= {"by": s.by, "fraction": s.fraction}
        out.append(table)
    return out


def step_summary(step: dict[str, Any]) -> str:
    """What a step asks for, in a few words (the table's middle column)."""
    kind = step.get("kind", "?")
    if kind == "dose":
        aim = step.get("ph_aim")
        return f"{step.get('reagent', '?')} to pH {aim:g}" if isinstance(aim, (int, float)) \
            else f"{step.get('reagent', '?')} to the window"
    if kind == "oxidise":
        return f"by {step.get('by', 'air')}"
    if kind == "separate":
        return f"removes {float(step.get('removal', 0.98)):.1%} of the solids"
    if kind == "blend":
        return f"{len(step.get('stream', []))} streams (edit them in the file)"
    return ""
