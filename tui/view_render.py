"""How Tankside draws its views (mixed into the app).

A new plan marks every view out of date; only the view on screen is drawn
at once, the others when their tab is opened. The sampled uncertainty
redraws only the views that show it (Dose, Sheet). The sweep (four or more
plans) is planned in a worker thread after the dose is shown, never on the
event loop. No chemistry here: the views read the report layer.
"""

from __future__ import annotations

import threading
import time

from rich.text import Text
from textual.widgets import Select, Static, TabbedContent

from dosing.errors import DosingError
from dosing.planning.basis import Batch
from dosing.planning.sweep import default_sizes, strength_grid
from dosing.report.sheet import render_sheet
from dosing.report.train_sheet import render_train

from .widgets.curve import CurvePlot
from .widgets.dose import DosePanel
from .widgets.sweep import SweepTable
from .widgets.train import TrainPanel
from .widgets.trend import TREND_HOURS, TrendPanel

__all__ = ["ViewRendering", "VIEWS"]

#: The views drawn from a plan, by tab id.
VIEWS = ("dose", "curve", "sweep", "sheet", "train", "trend")


class ViewRendering:
    """Drawing for :class:`~tui.app.Tankside`: what is seen, when it changed."""

    _dirty: set[str]
    _sweep_token: int
    _trend_token = 0
    _trend = None       #: (scenario, Simulation) last drawn, redrawn for a units change
    sweep = None
    """The last sweep planned for :attr:`plan` (None until it is ready)."""
    last_show_ms = 0.0
    """Milliseconds from a plan being ready to its view drawn on screen."""

    def _render_views(self, parts=VIEWS) -> None:
        """Mark ``parts`` out of date and draw the one on screen."""
        self._dirty.update(parts)
        self._render_dirty()

    def _render_dirty(self) -> None:
        if self.plan is None or self.scenario is None:
            return
        active = self.query_one(TabbedContent).active
        if active in self._dirty:
            self._dirty.discard(active)
            getattr(self, f"_draw_{active}")()

    def on_tabbed_content_tab_activated(self, _event: TabbedContent.TabActivated) -> None:
        self._render_dirty()

    def _draw_dose(self) -> None:
        s, u = self.scenario, self.units
        if s.train:
            self.query_one(DosePanel).show_train(s, self.train, u, self.stale)
        else:
            self.query_one(DosePanel).show(s, self.plan, u, self.stale, train=self.train)

    def _draw_curve(self) -> None:
        self.query_one(CurvePlot).show(self.plan, self.units)

    def _draw_sheet(self) -> None:
        s, p, u, t = self.scenario, self.plan, self.units, self.train
        width = self._sheet_width()
        if s.train:
            sheet = render_train(s, t, u, width=width)
        else:
            sheet = render_sheet(s, p, u, width=width)
            if t is not None:
                sheet = render_train(s, t, u, width=width) + "\n" + sheet
        # Plain text: the sheet's [reagent-id] must not be read as markup. It is
        # laid out for the pane's width, so no line wraps back to column 0.
        self.query_one("#sheet-text", Static).update(Text(sheet))

    def _draw_train(self) -> None:
        self.query_one(TrainPanel).show(self.scenario, self.steps, self.train, self.units,
                                        self._sheet_width())

    def _draw_sweep(self) -> None:
        s, result = self.scenario, self.sweep
        if s.train or result is None:
            return                           # drawn when the worker has it
        table = self.query_one(SweepTable)
        room = table.size.width or self.query_one("#views").size.width or 78
        mine = s.basis.volume_m3 if isinstance(s.basis, Batch) else s.basis.m3_per_h
        own = min(range(len(result.sizes)), key=lambda k: abs(result.sizes[k] - mine))
        table.show(result, self.units, own=own, room=room)

    def check_action(self, action: str, parameters) -> bool | None:
        """PgUp/PgDn page the views only on the main screen: over a dialog or
        the help they are the dialog's own."""
        if action == "scroll_view" and len(self.screen_stack) > 1:
            return False
        return True

    def _draw_trend(self) -> None:
        """A short simulation of the form's design, run in a worker thread."""
        from dosing.planning.simulate_design import simulation_refusal
        panel = self.query_one(TrendPanel)
        refusal = simulation_refusal(self.scenario)
        if refusal:
            panel.say(f"No trend: {refusal[1]}.")
            return
        done = self._trend
        if done is not None and done[0] is self.scenario:
            panel.show(done[1], self.units)      # the same stream: new units only
            return
        panel.say(f"simulating {TREND_HOURS:g} h of made-up disturbances, 1 and 2 stages...")
        self._trend_token += 1
        token, s, plan = self._trend_token, self.scenario, self.plan

        def work() -> None:
            try:
                result = trend_simulation(s, plan)
            except DosingError as err:
                result = str(err)
            self.call_from_thread(self._trended, token, s, result)
        self.run_worker(work, thread=True, exclusive=True, group="trend")

    def _trended(self, token: int, scenario, result) -> None:
        if token != self._trend_token or scenario is not self.scenario:
            return                           # the form has moved on
        panel = self.query_one(TrendPanel)
        if isinstance(result, str):
            panel.say(f"No trend: {result}")
        else:
            self._trend = (scenario, result)
            panel.show(result, self.units)

    def _sheet_width(self) -> int:
        """Columns the sheet may use in its pane (78 until the pane is laid out)."""
        width = self.query_one("#views").size.width
        return max(30, min(100, width - 5)) if width else 78

    def on_resize(self) -> None:
        self._fit_title()
        self._render_views()

    def _fit_title(self) -> None:
        """The header keeps the file name whole: a short title below 100 columns."""
        self.title = self.TITLE if self.size.width >= 100 else "Tankside"

    def _shown(self, ready: float, drawn: threading.Event | None = None) -> None:
        """Called after the screen refresh that drew a new plan: the
        background work waiting on ``drawn`` may start."""
        self.last_show_ms = (time.perf_counter() - ready) * 1000
        if drawn is not None:
            drawn.set()

    # ------------------------------------------------------------ sweep --
    def _start_sweep(self, drawn: threading.Event | None = None) -> None:
        """Plan the sweep for the plan shown, in a worker thread (once
        ``drawn`` is set, or after half a second)."""
        s, plan = self.scenario, self.plan
        if s is None or plan is None or s.train:
            return
        self._sweep_token += 1
        token = self._sweep_token
        other = self.query_one("#compare", Select).value
        others = () if other == s.reagent.id else (other,)

        def work() -> None:
            if drawn is not None:
                drawn.wait(0.5)
            try:
                result = strength_grid(s, default_sizes(s.basis), others=others,
                                       known={s.reagent.id: plan})
            except DosingError:
                result = None
            self.call_from_thread(self._swept, token, result)
        self.run_worker(work, thread=True, exclusive=True, group="sweep")

    def _swept(self, token: int, result) -> None:
        """Show a sweep, unless a newer one was asked for since."""
        if token != self._sweep_token:
            return
        self.sweep = result
        self._render_views(("sweep",))

    def on_select_changed(self, event: Select.Changed) -> None:
        if event.select.id == "compare":
            self._start_sweep()


def trend_simulation(scenario, plan):
    """The Trend view's simulation: 1 and 2 stages, tight, with feedforward."""
    from dosing.planning.simulate_design import own_design_simulation
    return own_design_simulation(scenario, plan, TREND_HOURS, stages=(1, 2))
