"""What Tankside does when the operator edits a train (mixed into the app).

The train panel (:mod:`.widgets.train`) posts what the operator asked for;
these handlers change the step list the app keeps (``self.steps``: the
scenario's [[step]] tables, None for one dose), then plan again. Adding
and editing open a small dialog with the step's fields.
"""

from __future__ import annotations

import copy
from typing import Any

from .form import ScenarioForm
from .screens.ask import Ask, AskScreen
from .train_mode import ADDABLE, STEP_FIELDS, moved, new_step, removed, steps_of
from .widgets.train import TrainPanel

__all__ = ["TrainActions"]


class TrainActions:
    """Train editing for :class:`~tui.app.Tankside`."""

    steps: list[dict[str, Any]] | None

    def on_train_panel_act(self, event: TrainPanel.Act) -> None:
        what, i = event.what, event.index
        if what == "adopt":
            self._adopt()
        elif what == "add":
            self.push_screen(AskScreen(
                "Add a step after the one under the cursor",
                [Ask("kind", "kind", required=True, example=" or ".join(ADDABLE))],
                lambda v: v["kind"].strip().lower(), action="add it"),
                lambda kind: self._add(kind, i))
        elif what == "edit" and self.steps:
            self._edit(i, copy.deepcopy(self.steps[i]), insert=False)
        elif what == "remove" and self.steps:
            self._set_steps(removed(self.steps, i))
        elif what in ("up", "down") and self.steps:
            self._set_steps(moved(self.steps, i, -1 if what == "up" else 1))
            self.query_one("#train-table").move_cursor(row=i + (-1 if what == "up" else 1))

    def _adopt(self) -> None:
        train = getattr(self, "train", None)
        if self.steps or train is None or not train.proposed:
            self.status = "there is no proposal to adopt (the train is already the scenario's)"
            return
        self._set_steps(steps_of(tuple(r.spec for r in train.steps)))
        self.status = "adopted the planner's train: edit its steps here, Ctrl+S to save them"

    def _add(self, kind: str | None, after: int) -> None:
        if kind is None:
            return
        if kind not in ADDABLE:
            self.status = f"{kind!r} is not a step Tankside adds; allowed: " + ", ".join(ADDABLE)
            return
        steps = self.steps
        if not steps:
            first = self._form_dose()
            if first is None:
                return
            steps, after = [first], 0
        aim = next((s.get("ph_aim") for s in reversed(steps) if s.get("kind") == "dose"), None)
        self._edit(min(after + 1, len(steps)), new_step(kind, aim), insert=True, base=steps)

    def _form_dose(self) -> dict[str, Any] | None:
        """The form's one dose as a train's first step (a catalogue product)."""
        data, _ = self.query_one(ScenarioForm).to_data()
        rid = data.get("reagent", {}).get("id")
        if not rid:
            self.status = "a train's steps take catalogue products: pick one in the form first"
            return None
        step = {"kind": "dose", "reagent": rid}
        aim = data.get("target", {}).get("ph_aim")
        return step | ({"ph_aim": aim} if aim is not None else {})

    def _edit(self, i: int, step: dict[str, Any], *, insert: bool, base=None) -> None:
        fields = STEP_FIELDS[step["kind"]]
        asks = [Ask(key, label, unit, number=number, example=example,
                    value="" if step.get(key) is None else f"{step[key]:g}"
                    if isinstance(step.get(key), float) else str(step[key]))
                for key, label, unit, number, example in fields]
        title = f"{'Add' if insert else 'Edit'} step {i + 1}: {step['kind']}"
        self.push_screen(AskScreen(title, asks, lambda v: v, action="plan it"),
                         lambda values: self._edited(i, step, values, insert, base))

    def _edited(self, i, step, values, insert: bool, base) -> None:
        if values is None:
            return
        for key, value in values.items():
            if value in (None, ""):
                step.pop(key, None)
            else:
                step[key] = value
        steps = list(base if base is not None else self.steps or [])
        if insert:
            steps.insert(i, step)
        else:
            steps[i] = step
        self._set_steps(steps)

    def _set_steps(self, steps: list[dict[str, Any]] | None) -> None:
        """A new step list: the form shows what a train leaves unused; plan again."""
        self.steps = steps
        self.query_one(ScenarioForm).set_train(steps)
        self.recompute()
