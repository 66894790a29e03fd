"""Tankside, the terminal view: edit a scenario, see the dose at once.

Only the engine, the scenario loader and the shared presentation in
``dosing.report.sheet`` are used here; there is no chemistry in the UI. One
factory, :func:`make_app`, builds the app for the command line and for the
tests.
"""

from __future__ import annotations

import copy
import time
from pathlib import Path
from typing import Any

from rich.text import Text
from textual import on
from textual.app import App, ComposeResult
from textual.containers import Horizontal, VerticalScroll
from textual.reactive import reactive
from textual.widgets import (Footer, Header, Label, Select, Static, TabbedContent,
                             TabPane)

from dosing.chem.activity import DEFAULT_CHOICE
from dosing.errors import DosingError, ScenarioError
from dosing.io.files import write_atomic
from dosing.planning.basis import Flow
from dosing.planning.plan import Plan
from dosing.planning.reagents import CATALOGUE, GENERAL_CAUTION
from dosing.io.scenario import build_scenario, load_scenario, scenario_to_toml
from dosing.planning.job import Scenario, make_plan, with_uncertainty
from dosing.planning.train_job import make_train
from dosing.planning.train_plan import TrainPlan
from dosing.report.record import record_of
from dosing.report.sheet import render_sheet
from dosing.report.train_sheet import render_train
from dosing.report.units import UnitSystem
from dosing.io.shiftlog import ShiftLog
from dosing.planning.sweep import default_alternative, default_sizes, strength_grid

from .form import FIELDS, PAIRS, ScenarioForm, field_id
from .screens.help import HelpScreen
from .screens.ask import RecordAnswer, record_dialog
from .screens.path import PathScreen
from .widgets.curve import CurvePlot, TitrationPlot
from .widgets.dose import DosePanel
from .widgets.sweep import SweepTable
from .widgets.train import TrainPanel
from .train_actions import TrainActions
from .titration_actions import TitrationActions
from .train_mode import with_steps

__all__ = ["Tankside", "make_app", "run", "DEFAULT_DATA"]

#: A new, empty job (an invented tank), for when no file is given.
DEFAULT_DATA: dict[str, Any] = {
    "title": "New tank",
    "effluent": {"ph": 3.0, "temperature_c": 20.0, "alkalinity_mg_l_as_caco3": 0.0},
    "batch": {"volume_m3": 20.0},
    "target": {"ph_min": 6.0, "ph_max": 9.0, "ph_aim": 7.5},
    "reagent": {"id": "caustic-50"},
    "model": {"activity": DEFAULT_CHOICE, "open_to_air": False},
}

CAUTION = ("Reagents are corrosive and mixing is hot. " + GENERAL_CAUTION)


def _form_key(key: str) -> str | None:
    """The form field a scenario error key belongs to, if any."""
    if key.startswith(("batch.", "flow.")):
        return "basis.amount"
    for k in [f.key for f in FIELDS] + [p[0] for p in PAIRS]:
        if key == k or key.startswith(k + "."):
            return k
    return None


class Tankside(TrainActions, TitrationActions, App):
    """Edit a dosing scenario and watch the plan follow."""

    CSS_PATH = "tankside.tcss"
    TITLE = "Tankside, neutralisation dosing"
    BINDINGS = [
        ("f1", "help", "help"),
        ("f2", "view('dose')", "dose"),
        ("f3", "view('curve')", "curve"),
        ("f4", "view('sweep')", "sweep"),
        ("f5", "view('sheet')", "sheet"),
        ("ctrl+o", "open", "open"),
        ("ctrl+s", "save", "save"),
        ("f6", "toggle_units", "metric/US"),
        ("f7", "record", "record"),
        ("f8", "titration", "titration"),
        ("f9", "view('train')", "train"),
        ("ctrl+q", "quit", "quit"),
    ]

    plan: reactive[Plan | None] = reactive(None, init=False, always_update=True)
    """The last valid plan (kept while the form holds an error)."""
    scenario: reactive[Scenario | None] = reactive(None, init=False, always_update=True)
    """The scenario the plan was made from."""
    stale: reactive[bool] = reactive(False, init=False)
    """True while the form is invalid and the plan shown is the last valid one."""
    units: reactive[UnitSystem] = reactive("metric", init=False)
    """Unit system of the views: "metric" or "us"."""
    status: reactive[str] = reactive("")
    """One line for the status bar."""
    sampling: reactive[bool] = reactive(False, init=False)
    """True while the plan's uncertainty is being sampled in the background."""
    planning: reactive[bool] = reactive(False, init=False)
    """True while the form's latest values are being planned in the background."""
    train: TrainPlan | None = None
    """The train planned with :attr:`plan` (the scenario's, or one the planner proposes)."""

    def __init__(self, path: str | None = None, data: dict[str, Any] | None = None,
                 db: str | None = None, *, show_timing: bool = True):
        super().__init__()
        #: Status lines say how long planning took (off in layout snapshots).
        self.show_timing = show_timing
        self.path = path
        self._source: str | None = None      # text of the file opened (kept on save)
        self._overwrite_ok: str | None = None  # a path the user agreed to overwrite
        self.db = db
        self._initial = data
        self.last_recompute_ms = 0.0
        self._t0 = 0.0                       # when the latest plan was asked for
        self._generation = 0                 # which form state the latest request is for
        self._pick_compare = False
        self.steps: list[dict[str, Any]] | None = None   # a train's [[step]] tables
        self._refused: str | None = None     # why the file given on start-up did not open
        self._refused_form: dict | None = None   # the form as it stood then

    # --------------------------------------------------------- layout --
    def compose(self) -> ComposeResult:
        yield Header()
        with Horizontal(id="main"):
            yield ScenarioForm(id="form")
            with TabbedContent(id="views", initial="dose"):
                with TabPane("Dose", id="dose"):
                    with VerticalScroll():
                        yield DosePanel(id="dose-panel")
                with TabPane("Curve", id="curve"):
                    yield CurvePlot(id="curve-plot")
                with TabPane("Sweep", id="sweep"):
                    with Horizontal(classes="row"):
                        yield Label("compare with", classes="label")
                        yield Select([(f"{r.id}  {r.name}", r.id) for r in CATALOGUE.values()],
                                     value="caustic-25", allow_blank=False, compact=True,
                                     id="compare", classes="value")
                    yield SweepTable(id="sweep-table")
                with TabPane("Sheet", id="sheet"):
                    with VerticalScroll():
                        yield Static(id="sheet-text")
                with TabPane("Train", id="train"):
                    yield TrainPanel(id="train-panel")
                with TabPane("Titration", id="titration"):
                    with VerticalScroll():
                        plot = TitrationPlot(id="titration-plot")
                        plot.display = False
                        yield plot
                        yield Static("Press F8 to load a bench titration (CSV of titrant "
                                     "mL and pH).", id="titration-text")
        yield Static("", id="status")
        yield Static(CAUTION, id="caution")
        yield Footer()

    def on_mount(self) -> None:
        data = self._initial
        if data is None and self.path:
            try:
                data = dict(load_scenario(self.path).data)
                self._source = _read_text(self.path)
            except ScenarioError as err:
                self._refuse_start(str(err))
                return
        self._load(data or DEFAULT_DATA)
        self.query_one("#" + field_id("effluent.ph")).focus()

    def _refuse_start(self, why: str) -> None:
        """The file named on start-up could not be opened: say so and plan
        nothing (no default plan under its name) until a scenario is opened
        or the operator starts a new one by editing the fields."""
        bad, self.path = self.path, None
        self._refused = f"could not open {bad}: {why}"
        form = self.query_one(ScenarioForm)
        form.load_data(DEFAULT_DATA)
        form.set_train(None)
        self._refused_form = form.to_data()[0]
        self.sub_title = f"{bad} not opened"
        self.status = f"nothing planned: {bad} did not open (Ctrl+O opens another file)"
        self.query_one(DosePanel).show_refusal(self._refused)
        self.query_one("#" + field_id("effluent.ph")).focus()

    # ---------------------------------------------------------- state --
    def _load(self, data: dict[str, Any]) -> None:
        form = self.query_one(ScenarioForm)
        form.load_data(data)
        self.steps = copy.deepcopy(data.get("step")) or None
        form.set_train(self.steps)
        self.sub_title = self.path or "unsaved"
        # The sweep's other product follows the file's reagent once it is planned.
        self._pick_compare = True
        self.recompute()

    def recompute(self) -> None:
        """Read the form and validate it here; plan in a worker thread (the
        view never waits on the chemistry); keep the last plan on any error."""
        self._t0 = time.perf_counter()
        self._generation += 1
        form = self.query_one(ScenarioForm)
        data, errors = form.to_data()
        data = with_steps(data, self.steps)
        scenario = None
        message = ""
        if not errors:
            try:
                scenario = build_scenario(data, self.path or "form")
            except ScenarioError as err:
                key = _form_key(err.key)
                if key:
                    entry = err.key[len(key) + 1:]      # a table's row: name it
                    errors[key] = f"{entry}: {err.reason}" if entry else err.reason
                else:
                    message = f"{err.key or 'scenario'}: {err.reason}"
        form.show_errors(errors)
        if scenario is None:
            self._not_planned(message)
            return
        self.planning = True
        self.status = "planning the latest values..."
        generation = self._generation
        self.run_worker(lambda: self._plan_in_background(generation, scenario), thread=True,
                        exclusive=True, group="plan")

    def _plan_in_background(self, generation: int, scenario: Scenario) -> None:
        """The plan (and train), computed off the event loop (a worker thread).
        A train scenario's plan is its first dose's (the curve shows it)."""
        try:
            if scenario.train:
                train = make_train(scenario)
                plan = next(r.plan for r in train.steps if r.plan is not None)
            else:
                plan = make_plan(scenario, sampled=False)
                train = make_train(scenario, plan)
            result: tuple | str = (plan, train)
        except DosingError as err:
            result = str(err)
        self.call_from_thread(self._planned, generation, scenario, result)

    def _planned(self, generation: int, scenario: Scenario, result: tuple | str) -> None:
        """Show a plan, unless the form has moved on since it was asked for."""
        if generation != self._generation:
            return
        self.planning = False
        if isinstance(result, str):
            self._not_planned(result)
            return
        plan, self.train = result
        self.stale = False
        self.scenario, self.plan = scenario, plan     # the watcher renders the views
        self.last_recompute_ms = (time.perf_counter() - self._t0) * 1000
        self.status = f"planned and shown{self._took()}"
        if self._pick_compare:
            self._pick_compare = False
            self.query_one("#compare", Select).value = default_alternative(scenario.reagent)
        if plan.dose_needed and not scenario.train:
            self.sampling = True
            self.status += "; sampling how sure the dose is..."
            self.run_worker(lambda: self._sample_in_background(scenario, plan), thread=True,
                            exclusive=True, group="sampling")

    def _not_planned(self, message: str) -> None:
        """No plan for the form as it stands: the last one stays, marked stale."""
        self.planning = False
        self.stale = self.plan is not None
        self.status = message or "fix the field marked in red"
        self._render_views()
        self.last_recompute_ms = (time.perf_counter() - self._t0) * 1000

    def _took(self) -> str:
        """The time planning took (" in 39 ms"), or nothing when not shown."""
        return f" in {self.last_recompute_ms:.0f} ms" if self.show_timing else ""

    def _full_plan(self) -> Plan:
        """The plan with its uncertainty (sampled now if the background has not finished)."""
        if self.plan.dose_needed and self.plan.uncertainty is None:
            return with_uncertainty(self.scenario, self.plan)
        return self.plan

    def _sample_in_background(self, scenario, plan) -> None:
        """How sure the dose is, computed off the event loop (a worker thread)."""
        try:
            full = with_uncertainty(scenario, plan)
        except DosingError:
            full = plan
        self.call_from_thread(self._sampled, plan, full)

    def _sampled(self, base, full) -> None:
        """Show the sampled plan, unless the form has moved on since."""
        if self.plan is base:
            self.plan = full
            # Only replace the status this run set (a later message stays).
            if full.uncertainty is not None and self.status.endswith("dose is..."):
                self.status = (f"planned{self._took()}; "
                               f"{full.uncertainty.valid:,} plausible waters sampled")
        self.sampling = False

    def watch_plan(self) -> None:
        self._render_views()

    def watch_units(self) -> None:
        self.query_one(ScenarioForm).set_units(self.units)
        self._render_views()

    def watch_status(self, value: str) -> None:
        self.query_one("#status", Static).update(Text(value))

    def _render_views(self) -> None:
        if self.plan is None or self.scenario is None:
            return
        s, p, u, t = self.scenario, self.plan, self.units, self.train
        width = self._sheet_width()
        if s.train:
            self.query_one(DosePanel).show_train(s, t, u, self.stale)
            sheet = render_train(s, t, u, width=width)
        else:
            self.query_one(DosePanel).show(s, p, u, self.stale, train=t)
            sheet = render_sheet(s, p, u, width=width)
            if t is not None:
                sheet = render_train(s, t, u, width=width) + "\n" + sheet
        self.query_one(CurvePlot).show(p, u)
        # Plain text: the sheet's [reagent-id] must not be read as markup. It is
        # laid out for the pane's width, so no line wraps back to column 0.
        self.query_one("#sheet-text", Static).update(Text(sheet))
        self.query_one(TrainPanel).show(s, self.steps, t, u, width)
        if not s.train:
            self._render_sweep()

    def _sheet_width(self) -> int:
        """Columns the sheet may use in its pane (78 until the pane is laid out)."""
        width = self.query_one("#views").size.width
        return max(30, min(100, width - 8)) if width else 78

    def on_resize(self) -> None:
        self._render_views()

    def _render_sweep(self) -> None:
        s = self.scenario
        other = self.query_one("#compare", Select).value
        others = () if other == s.reagent.id else (other,)
        result = strength_grid(s, default_sizes(s.basis), others=others,
                               known={s.reagent.id: self.plan})
        self.query_one(SweepTable).show(result, self.units)

    # -------------------------------------------------------- handlers --
    @on(ScenarioForm.Edited)
    def _form_edited(self) -> None:
        if self._refused:
            if self.query_one(ScenarioForm).to_data()[0] == self._refused_form:
                return                      # a widget settling, not the operator
            self._refused = None            # the operator starts a new scenario
            self.sub_title = "unsaved"
        self.recompute()

    @on(Select.Changed, "#compare")
    def _compare_changed(self) -> None:
        if self.scenario is not None:
            self._render_sweep()

    def action_help(self) -> None:
        self.push_screen(HelpScreen())

    def action_view(self, name: str) -> None:
        self.query_one(TabbedContent).active = name
        if name == "train":
            self.query_one("#train-table").focus()     # its keys act on the steps

    def action_toggle_units(self) -> None:
        self.units = "us" if self.units == "metric" else "metric"

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
        self._source = _read_text(path)
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
            self.status = (f"{path} exists: press Ctrl+S and Enter again to overwrite it "
                           "(its comments and layout are kept)")
            return
        keep = self._source if path == self.path else None
        try:
            build_scenario(data, path)
            write_atomic(path, scenario_to_toml(data, keep).encode("utf-8"))
        except DosingError as err:
            self.status = f"not saved: {err}"
            return
        self._overwrite_ok = None
        self.path = path
        self._source = _read_text(path)
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


def _read_text(path: str) -> str | None:
    """A scenario file's text, to keep its comments when saving; None if unreadable."""
    try:
        return Path(path).read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError):
        return None


def make_app(path: str | None = None, data: dict[str, Any] | None = None,
             db: str | None = None, *, show_timing: bool = True) -> Tankside:
    """The one factory for the command line and the tests."""
    return Tankside(path=path, data=data, db=db, show_timing=show_timing)


def run(path: str | None = None, db: str | None = None) -> int:
    """Run Tankside in the terminal; returns an exit code."""
    if path is not None and not Path(path).exists():
        raise ScenarioError(path, "", "no such file")
    make_app(path, db=db).run()
    return 0
