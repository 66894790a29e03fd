"""Tankside, the terminal view: edit a scenario, see the dose at once.

Only the engine, the scenario loader and the shared presentation in
``dosing.report.sheet`` are used here; there is no chemistry in the UI. One
factory, :func:`make_app`, builds the app for the command line and for the
tests.
"""

from __future__ import annotations

import copy
import threading
import time
from pathlib import Path
from typing import Any

from rich.text import Text
from textual import on
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, ScrollableContainer, VerticalScroll
from textual.reactive import reactive
from textual.widgets import (DataTable, Footer, Header, Label, Select, Static,
                             TabbedContent, TabPane)

from dosing.chem.activity import DEFAULT_CHOICE
from dosing.errors import DosingError, ScenarioError
from dosing.planning.plan import Plan
from dosing.planning.reagents import CATALOGUE, GENERAL_CAUTION
from dosing.io.scenario import build_scenario, load_scenario
from dosing.planning.job import Scenario, make_plan, with_uncertainty
from dosing.planning.train_job import make_train
from dosing.planning.train_plan import TrainPlan
from dosing.report.units import UnitSystem
from dosing.planning.sweep import default_alternative

from .form import FIELDS, PAIRS, ScenarioForm, field_id
from .screens.help import HelpScreen
from .widgets.curve import CurvePlot, TitrationPlot
from .widgets.dose import DosePanel
from .widgets.sweep import SweepTable
from .widgets.train import TrainPanel
from .widgets.trend import TrendPanel
from .train_actions import TrainActions
from .titration_actions import TitrationActions
from .file_actions import FileActions, read_text
from .view_render import VIEWS, ViewRendering
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


class Tankside(ViewRendering, FileActions, TrainActions, TitrationActions, App):
    """Edit a dosing scenario and watch the plan follow."""

    CSS_PATH = "tankside.tcss"
    TITLE = "Tankside, neutralisation dosing"
    # Every key fits the footer at 80 columns: the views share one entry
    # (F1 lists each); the tabs above the views are clickable too.
    BINDINGS = [
        Binding("ctrl+q", "quit", "quit"),
        Binding("f1", "help", "help"),
        Binding("f2", "view('dose')", "views", key_display="f2-5,9,10"),
        Binding("f3", "view('curve')", "curve", show=False),
        Binding("f4", "view('sweep')", "sweep", show=False),
        Binding("f5", "view('sheet')", "sheet", show=False),
        Binding("f9", "view('train')", "train", show=False),
        Binding("f10", "view('trend')", "trend", show=False),
        Binding("ctrl+o", "open", "open"),
        Binding("ctrl+s", "save", "save"),
        Binding("f6", "toggle_units", "units"),
        Binding("f7", "record", "record"),
        Binding("f8", "titration", "titration"),
        # The view on the right scrolls from the keyboard wherever the focus is.
        Binding("pagedown", "scroll_view(1)", "scroll", show=False, priority=True),
        Binding("pageup", "scroll_view(-1)", "scroll", show=False, priority=True),
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
        self.last_recompute_ms = 0.0         # from a change to its plan shown
        self.last_plan_ms = 0.0              # from a change to its plan ready
        self._t0 = 0.0                       # when the latest plan was asked for
        self._generation = 0                 # which form state the latest request is for
        self._pick_compare = False
        self.steps: list[dict[str, Any]] | None = None   # a train's [[step]] tables
        self._refused: str | None = None     # why the file given on start-up did not open
        self._refused_form: dict | None = None   # the form as it stood then
        self._dirty: set[str] = set(VIEWS)   # views not drawn since the plan changed
        self._sweep_token = 0                # which sweep request is the latest

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
                with TabPane("Trend", id="trend"):
                    yield TrendPanel(id="trend-panel")
                with TabPane("Titration", id="titration"):
                    with VerticalScroll():
                        plot = TitrationPlot(id="titration-plot")
                        plot.display = False
                        yield plot
                        yield Static("Press F8 to load a bench titration (CSV of titrant "
                                     "mL and pH).", id="titration-text")
        yield Static("", id="status")
        yield Static(CAUTION, id="caution")
        yield Footer(compact=True, show_command_palette=False)

    def on_mount(self) -> None:
        self._fit_title()
        # The Titration tab appears once F8 has loaded one: the tabs fit 80 columns.
        self.query_one(TabbedContent).hide_tab("titration")
        data = self._initial
        if data is None and self.path:
            try:
                data = dict(load_scenario(self.path).data)
                self._source = read_text(self.path)
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
        self.call_from_thread(self._planned, generation, scenario, result,
                              time.perf_counter())

    def _planned(self, generation: int, scenario: Scenario, result: tuple | str,
                 ready: float | None = None) -> None:
        """Show a plan, unless the form has moved on since it was asked for
        (``ready``: when the worker had it; now if not given)."""
        ready = time.perf_counter() if ready is None else ready
        if generation != self._generation:
            return
        self.planning = False
        if isinstance(result, str):
            self._not_planned(result)
            return
        plan, self.train = result
        self.stale = False
        self.last_plan_ms = (ready - self._t0) * 1000
        self.sweep = None
        self.scenario, self.plan = scenario, plan     # the watcher renders the views
        # The sweep and the sampling wait until the dose is on screen: drawing
        # it does not share the interpreter with them.
        drawn = threading.Event()
        self.call_after_refresh(self._shown, ready, drawn)
        self.last_recompute_ms = (time.perf_counter() - self._t0) * 1000
        self.status = f"planned and shown{self._took()}"
        if self._pick_compare:
            self._pick_compare = False
            with self.prevent(Select.Changed):
                self.query_one("#compare", Select).value = default_alternative(
                    scenario.reagent)
        self._start_sweep(drawn)
        if plan.dose_needed and not scenario.train:
            self.sampling = True
            self.status += "; sampling how sure the dose is..."
            self.run_worker(lambda: self._sample_in_background(scenario, plan, drawn),
                            thread=True, exclusive=True, group="sampling")

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

    def _sample_in_background(self, scenario, plan, drawn: threading.Event | None = None
                              ) -> None:
        """How sure the dose is, computed off the event loop (a worker thread)
        once the plan is drawn (or after half a second)."""
        if drawn is not None:
            drawn.wait(0.5)
        try:
            full = with_uncertainty(scenario, plan)
        except DosingError:
            full = plan
        self.call_from_thread(self._sampled, plan, full)

    def _sampled(self, base, full) -> None:
        """Show the sampled plan, unless the form has moved on since."""
        if self.plan is base:
            # Only the views that show how sure the dose is are drawn again.
            self.set_reactive(Tankside.plan, full)
            self._render_views(("dose", "sheet"))
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
        bar = self.query_one("#status", Static)
        bar.update(Text(value))
        # A message longer than the bar wraps onto a second or third line;
        # the screen is laid out again only when the height changes.
        room = max(20, (bar.size.width or self.size.width) - 2)
        lines = min(3, 1 + (len(value) - 1) // room) if value else 1
        if bar.styles.height is None or bar.styles.height.value != lines:
            bar.styles.height = lines

    # -------------------------------------------------------- handlers --
    @on(ScenarioForm.Edited)
    def _form_edited(self) -> None:
        if self._refused:
            if self.query_one(ScenarioForm).to_data()[0] == self._refused_form:
                return                      # a widget settling, not the operator
            self._refused = None            # the operator starts a new scenario
            self.sub_title = "unsaved"
        self.recompute()

    def action_help(self) -> None:
        self.push_screen(HelpScreen())

    def action_view(self, name: str) -> None:
        self.query_one(TabbedContent).active = name
        if name == "train":
            self.query_one("#train-table").focus()     # its keys act on the steps

    def action_scroll_view(self, pages: int) -> None:
        """Page the active view (its text, or its table) up or down."""
        pane = self.query_one(TabbedContent).active_pane
        if pane is None:
            return
        target = next(iter(pane.query(ScrollableContainer)), None) or \
            next(iter(pane.query(DataTable)), None)
        if target is not None:
            (target.scroll_page_down if pages > 0 else target.scroll_page_up)(animate=False)

    def action_toggle_units(self) -> None:
        self.units = "us" if self.units == "metric" else "metric"

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
