"""What Tankside does with files and the shift log (mixed into the app).

Ctrl+O opens a scenario, Ctrl+S saves the form as one (never over another
file without asking; the opened file's comments and layout are kept, under
a new name too), F7 records the plan in the shift log by the same code as
``dosing log add``.
"""

from __future__ import annotations

from pathlib import Path

from dosing.errors import DosingError, ScenarioError
from dosing.io.files import write_atomic
from dosing.io.scenario import build_scenario, load_scenario, scenario_to_toml
from dosing.io.shiftlog import ShiftLog
from dosing.planning.basis import Flow
from dosing.report.record import record_of

from .form import ScenarioForm, field_id
from .screens.ask import RecordAnswer, record_dialog
from .screens.path import PathScreen
from .train_mode import with_steps

__all__ = ["FileActions", "read_text"]


class FileActions:
    """Open, save and record for :class:`~tui.app.Tankside`."""

    def action_open(self) -> None:
        self.push_screen(PathScreen("Open scenario file:", self.path or ""), self.open_path)

    def open_path(self, path: str | None) -> None:
        if not path:
            return
        try:
            data = dict(load_scenario(path).data)
        except ScenarioError as err:
            self.status = f"not opened: {err}"
            return
        self.path = path
        self._refused = None
        self._source = read_text(path)
        self._load(data)
        # Keystrokes go to the form at once: its first field, as on start-up.
        self.query_one("#" + field_id("effluent.ph")).focus()

    def action_save(self) -> None:
        self.push_screen(PathScreen("Save scenario as:", self.path or "scenario.toml"),
                         self.save_path)

    def save_path(self, path: str | None) -> None:
        if not path:
            return
        data, errors = self.query_one(ScenarioForm).to_data()
        data = with_steps(data, self.steps)
        if errors or self.stale:
            self.status = "not saved: fix the field marked in red first"
            return
        if Path(path).exists() and self._overwrite_ok != path:
            # Never overwrite without asking: the same save again confirms.
            self._overwrite_ok = path
            self.status = f"{path} exists: Ctrl+S and Enter again overwrite it"
            return
        # The opened file's comments and layout go with it, to a new name too.
        keep = self._source
        try:
            build_scenario(data, path)
            write_atomic(path, scenario_to_toml(data, keep).encode("utf-8"))
        except DosingError as err:
            self.status = f"not saved: {err}"
            return
        self._overwrite_ok = None
        self.path = path
        self._source = read_text(path)
        self.sub_title = path
        self.status = f"saved {path}"

    def action_record(self) -> None:
        if self.stale or self.plan is None:
            self.status = "not recorded: fix the field marked in red first"
            return
        if self.planning:
            self.status = "not recorded: the plan for the latest values is not ready; try again"
            return
        doses = () if self.train is None else tuple(
            i for i, r in enumerate(self.train.steps, start=1) if r.spec.kind == "dose")
        self.push_screen(record_dialog(isinstance(self.plan.basis, Flow), doses), self.record)

    def record(self, answer: RecordAnswer | None) -> None:
        """Record the current plan in the shift log (same code as `dosing log add`)."""
        if answer is None:
            return
        data = with_steps(self.query_one(ScenarioForm).to_data()[0], self.steps)
        try:
            plan = None if self.scenario.train else self._full_plan()
            given = answer.given if self.train is not None else (
                None if answer.dosed is None else (answer.dosed,))
            record, dosed = record_of(self.scenario, plan, self.train, given)
            with ShiftLog(self.db) as log:
                entry = log.record_decision(
                    operator=answer.operator, scenario_toml=scenario_to_toml(data),
                    plan=record, dosed_kg=dosed, ph_after=answer.ph_after, note=answer.note)
                where = log.path
        except DosingError as err:
            self.status = f"not recorded: {err}"
            return
        self.status = f"recorded as entry {entry} in {where}"


def read_text(path: str) -> str | None:
    """A scenario file's text, to keep its comments when saving; None if unreadable."""
    try:
        return Path(path).read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError):
        return None
