"""The Trend view: a short simulation of the current design, as a text plot.

Four hours of made-up disturbances around the form's stream, one stage and
two, each with ratio feedforward and the tight tuning (``dosing simulate``
gives more); the discharge pH of each against the window, and the
comparison's table under it. No chemistry here: the simulation is run by
the app in a worker thread and handed to :meth:`TrendPanel.show`.
"""

from __future__ import annotations

from rich.text import Text
from textual.containers import VerticalScroll
from textual.widgets import Static
from textual_plotext import PlotextPlot

from dosing.report.simulate_report import render_simulation

__all__ = ["TrendPanel", "TREND_HOURS"]

#: Length of the made-up record the view simulates [h].
TREND_HOURS = 4.0
_COLOURS = ("cyan", "magenta", "yellow", "white")


class TrendPlot(PlotextPlot):
    """Discharge pH of each design against time, the window in green."""

    def show(self, sim) -> None:
        p = self.plt
        p.clear_data()
        p.clear_figure()
        lo, hi = sim.window
        for run, colour in zip(sim.runs, _COLOURS):
            every = max(1, run.t_s.size // 400)
            p.plot([float(t) / 3600.0 for t in run.t_s[::every]],
                   [float(v) for v in run.ph[-1][::every]], label=run.design.name,
                   color=colour)
        # Zoomed on the discharge pH; a window edge far outside it is named,
        # not drawn (it would squeeze the lines flat).
        values = [float(v) for run in sim.runs for v in (run.ph[-1].min(), run.ph[-1].max())]
        span = max(values) - min(values)
        y0 = min(min(values), sim.aim) - max(0.2, 0.25 * span)
        y1 = max(max(values), sim.aim) + max(0.2, 0.25 * span)
        for edge in (lo, hi):
            if y0 - 0.5 <= edge <= y1 + 0.5:
                p.hline(edge, "green")
                y0, y1 = min(y0, edge - 0.1), max(y1, edge + 0.1)
        p.hline(sim.aim, "green+")
        p.ylim(y0, y1)
        p.title(f"discharge pH, window {lo:g} to {hi:g} (green where in range), "
                f"aim {sim.aim:g}")
        p.xlabel("hours")
        p.ylabel("pH")
        self.refresh()


class TrendPanel(VerticalScroll):
    """The trend figure and the comparison, or why there is none."""

    def compose(self):
        plot = TrendPlot(id="trend-plot")
        plot.display = False
        yield plot
        yield Static("", id="trend-text")

    def say(self, text: str) -> None:
        """No figure: a line saying why (a batch, a slurry) or that it is running."""
        self.query_one(TrendPlot).display = False
        self.query_one("#trend-text", Static).update(Text(text))

    def show(self, sim, units: str) -> None:
        plot = self.query_one(TrendPlot)
        plot.display = True
        plot.show(sim)
        # The pane's width less its scrollbar and the text's padding.
        width = max(30, (self.size.width or 82) - 4)
        self.query_one("#trend-text", Static).update(
            Text(render_simulation(sim, units, width=width)))
