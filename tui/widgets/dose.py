"""The dose panel: the plan in operator units, checks, warnings, cautions."""

from __future__ import annotations

from rich.console import Console, Group
from rich.table import Table
from rich.text import Text
from textual.widgets import Static

from dosing.planning.job import Scenario
from dosing.planning.plan import Plan
from dosing.report.sheet import (caution_lines, check_lines, control_lines, dose_lines,
                                 metal_lines, staging_lines)
from dosing.report.units import UnitSystem
from dosing.report.view import plan_view
from dosing.report.words import texts

__all__ = ["DosePanel"]


def _train_text(scenario, train, units: str) -> Text:
    """A train in a few lines: each step's headline, the discharge, the warnings."""
    from dosing.report.train_sheet import step_headline
    from dosing.report.train_view import train_view
    from dosing.report.words import words
    v = train_view(scenario, train)
    out = Text()
    head = "TREATMENT TRAIN" + (" proposed by the planner" if train.proposed else "")
    out.append(f"{head} for {scenario.title}\n", style="bold")
    for s in v.steps:
        out.append(step_headline(v, s, units) + "\n")
    d = train.discharge
    out.append(f"discharge at pH {d.ph:.2f}: "
               + ("window and every cap met" if d.met else "NOT MET: see the checks (F9)")
               + "\n", style="bold" if d.met else "bold reverse red")
    for w in v.warnings:
        out.append(f"! {words(w, units)}\n",
                   style="bold red" if w.level == "danger" else "yellow")
    return out

def _control_table(view, units: str) -> list:
    """A flow's control design (process gain, accuracy, pump range, stages)
    under its heading; nothing for a batch."""
    rows = control_lines(view, units)
    if not rows:
        return []
    grid = Table.grid(padding=(0, 2))
    grid.add_column(style="bold")
    grid.add_column()
    for label, value in rows:
        grid.add_row(label, value)
    return [Text("CONTROL (continuous stream)", style="bold"), grid, Text("")]


_STYLE = {"!!": "bold red", "! ": "yellow", "- ": "dim", "  ": ""}


class DosePanel(Static):
    """Shows one plan; ``stale`` marks a plan kept while the form is invalid."""

    _group = None           # the plan's renderable, for :attr:`plain_text`
    _plain: str | None = ""

    def show_train(self, scenario: Scenario, train, units: UnitSystem, stale: bool) -> None:
        """A train scenario: its steps and discharge (each step in full on F9)."""
        self.set_class(stale, "stale")
        text = Text()
        if stale:
            text.append("Last valid plan shown: fix the field marked in red.\n",
                        style="bold reverse yellow")
        text.append_text(_train_text(scenario, train, units))
        text.append("\n")
        for c in train.cautions:
            text.append(f"- {c}\n", style="dim")
        self.update(text)
        self.plain_text = text.plain

    def show_refusal(self, why: str) -> None:
        """No plan: the file could not be opened, and why."""
        self.set_class(False, "stale")
        text = Text()
        text.append("NOTHING PLANNED\n", style="bold reverse red")
        text.append(why + "\n\n")
        text.append("Ctrl+O opens another scenario file; editing the fields starts a "
                    "new scenario from the values shown.\n")
        self.update(text)
        self.plain_text = text.plain

    def show(self, scenario: Scenario, plan: Plan, units: UnitSystem, stale: bool,
             train=None) -> None:
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
        if train is not None:
            # One dose cannot do: the planner's train first, then the one dose.
            head.append_text(_train_text(scenario, train, units))
            head.append("\nONE DOSE ALONE, FOR COMPARISON\n", style="bold")
        head.append(f"{plan.reagent.name} for {scenario.title}\n", style="bold")
        staged = Text()
        stage_rows = staging_lines(view, units)
        if stage_rows:
            staged.append("STAGED DOSE\n", style="bold")
            for line in stage_rows:
                staged.append(line + "\n")
        control = _control_table(view, units)
        notes = Text()
        for line in caution_lines(view, units):
            notes.append(line + "\n", style=_STYLE.get(line[:2], ""))
        for mark, message in check_lines(view, units):
            if mark == "  ":
                notes.append(f"· {message}\n", style="dim")
        group = Group(head, table, Text(""), *([staged] if staged else []), *control, notes)
        # Laid out once for the pane's width: the screen then measures and
        # paints plain styled lines (a table re-measured on every refresh
        # cost a change tens of milliseconds).
        self.update(_flat(group, self._width()))
        self._group = group
        self._plain = None

    def _width(self) -> int:
        """Columns the panel's text may use (78 until it is laid out)."""
        width = self.content_size.width or (self.parent.size.width - 3 if self.parent else 0)
        return max(20, width) if width > 0 else 78

    @property
    def plain_text(self) -> str:
        """What the panel shows, as plain text (unwrapped, for searching)."""
        if self._plain is None:
            console = Console(width=200, record=True, file=_Null())
            console.print(self._group)
            self._plain = console.export_text()
        return self._plain

    @plain_text.setter
    def plain_text(self, text: str) -> None:
        self._group, self._plain = None, text


def _flat(renderable, width: int) -> Text:
    """A rich renderable laid out at ``width`` as styled lines of text."""
    console = Console(width=width, file=_Null(), color_system="truecolor")
    out = Text()
    for line in console.render_lines(renderable, console.options.update(width=width),
                                     pad=False):
        for seg in line:
            if not seg.control:
                out.append(seg.text, seg.style)
        out.append("\n")
    return out


class _Null:
    def write(self, _text):
        return 0

    def flush(self):
        pass
