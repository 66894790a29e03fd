"""The dose panel: the plan in operator units, checks, warnings, cautions."""

from __future__ import annotations

from rich.console import Console, Group
from rich.table import Table
from rich.text import Text
from textual.widgets import Static

from dosing.planning.job import Scenario
from dosing.planning.plan import Plan
from dosing.report.sheet import (caution_lines, check_lines, dose_lines, metal_lines,
                                 staging_lines)
from dosing.report.units import UnitSystem
from dosing.report.view import plan_view
from dosing.report.words import texts

__all__ = ["DosePanel"]

_STYLE = {"!!": "bold red", "! ": "yellow", "- ": "dim", "  ": ""}


class DosePanel(Static):
    """Shows one plan; ``stale`` marks a plan kept while the form is invalid."""

    def show(self, scenario: Scenario, plan: Plan, units: UnitSystem, stale: bool) -> None:
        # A plan kept while the form is invalid is dimmed under its banner:
        # it is not the dose for what the form now says.
        self.set_class(stale, "stale")
        view = plan_view(scenario, plan)
        table = Table.grid(padding=(0, 2))
        table.add_column(style="bold")
        table.add_column()
        for label, value in dose_lines(view, units) + metal_lines(view, units):
            table.add_row(label, value)
        head = Text()
        if stale:
            head.append("Last valid plan shown: fix the field marked in red.\n",
                        style="bold reverse yellow")
        # A plan that breaks the permit says so first, above the dose.
        for breach in texts(view.breaches, units):
            head.append(f"PERMIT BREACH: {breach}\n", style="bold reverse red")
        head.append(f"{plan.reagent.name} for {scenario.title}\n", style="bold")
        staged = Text()
        stage_rows = staging_lines(view, units)
        if stage_rows:
            staged.append("STAGED DOSE\n", style="bold")
            for line in stage_rows:
                staged.append(line + "\n")
        notes = Text()
        for line in caution_lines(view, units):
            notes.append(line + "\n", style=_STYLE.get(line[:2], ""))
        for mark, message in check_lines(view, units):
            if mark == "  ":
                notes.append(f"· {message}\n", style="dim")
        group = Group(head, table, Text(""), staged, notes)
        self.update(group)
        console = Console(width=200, record=True, file=_Null())
        console.print(group)
        self.plain_text = console.export_text()
        """What the panel shows, as plain text."""


class _Null:
    def write(self, _text):
        return 0

    def flush(self):
        pass
