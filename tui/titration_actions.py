"""What Tankside does with a bench titration (mixed into the app).

F8 asks for the titration file, the sample volume and the titrant; the
curve is scaled with the scenario on screen by the same code as the
command line (:func:`dosing.planning.titration.compare`) and shown in the
Titration view with its figure.
"""

from __future__ import annotations

from dataclasses import replace

from rich.text import Text
from textual.widgets import Static, TabbedContent

from dosing.errors import DosingError
from dosing.io.titration_io import read_titration_csv
from dosing.planning.bench import check_curve, parse_titrant
from dosing.planning.titration import compare
from dosing.report.titration import render_titration

from .screens.ask import TitrationAnswer, titration_dialog
from .widgets.curve import TitrationPlot


class TitrationActions:
    """The F8 action and its answer; needs the app's scenario, units and status."""

    def action_titration(self) -> None:
        if self.stale or self.scenario is None:
            self.status = "fix the field marked in red before scaling a titration"
            return
        self.push_screen(titration_dialog(), self.load_titration)

    def load_titration(self, answer: TitrationAnswer | None) -> None:
        """Scale a bench titration with the current scenario (same code as the CLI)."""
        if answer is None:
            return
        path, sample_ml, titrant_text = answer.path, answer.sample_ml, answer.titrant
        try:
            titrant = parse_titrant(titrant_text)
            vols, phs, lines, notes = read_titration_csv(path)
            curve = check_curve(sample_ml, titrant, vols, phs, lines, source=path)
            curve = replace(curve, notes=tuple(notes) + curve.notes)
            report = compare(curve, self.scenario)
        except DosingError as err:
            self.status = f"titration not loaded: {err}"
            return
        self.query_one("#titration-text", Static).update(
            Text(render_titration(self.scenario, report, self.units,
                                  width=self._sheet_width())))
        plot = self.query_one("#titration-plot", TitrationPlot)
        plot.display = True
        plot.show(curve, report.water, report.scenario.target)
        tabs = self.query_one(TabbedContent)
        tabs.show_tab("titration")          # hidden until a titration is loaded
        tabs.active = "titration"
        gap = report.gap
        self.status = (f"titration {path}: model {gap:+.0%} against direct scaling"
                       if gap is not None else f"titration {path} loaded")
