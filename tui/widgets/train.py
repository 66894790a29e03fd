"""The train panel: the steps of a treatment train, editable, and the train as planned.

The table lists the steps (the scenario's, or the one the planner proposes
for a one-dose scenario); below it, the train's sheet. Keys act on the
step under the cursor: ``a`` adds a step after it, Enter edits it, Delete
removes it, Ctrl+Up and Ctrl+Down move it, ``p`` adopts the planner's
proposal as the scenario's own steps. Each posts :class:`TrainPanel.Act`;
the app changes the steps and plans again.
"""

from __future__ import annotations

from dataclasses import dataclass

from rich.text import Text
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.message import Message
from textual.widgets import DataTable, Static

from dosing.planning.job import Scenario
from dosing.planning.train_plan import TrainPlan
from dosing.report.train_sheet import render_train

from ..train_mode import step_summary

__all__ = ["TrainPanel"]

HINT = ("a add after · Enter edit · Del remove · Ctrl+↑/↓ move · p adopt the proposal · "
        "Ctrl+S saves the steps")


class TrainPanel(Vertical):
    """The steps and the planned train."""

    BINDINGS = [Binding("a", "act('add')", "add step", show=False),
                Binding("delete", "act('remove')", "remove step", show=False),
                Binding("ctrl+up", "act('up')", "move up", show=False),
                Binding("ctrl+down", "act('down')", "move down", show=False),
                Binding("p", "act('adopt')", "adopt proposal", show=False)]

    @dataclass
    class Act(Message):
        """The operator asked for ``what`` on step ``index`` (0-based)."""

        what: str
        index: int

    def compose(self):
        yield Static(id="train-head")
        table = DataTable(id="train-table", cursor_type="row", zebra_stripes=True)
        table.add_columns("#", "step", "what", "pH in → out")
        yield table
        yield Static(HINT, id="train-hint", classes="hint")
        with VerticalScroll():
            yield Static(id="train-sheet")

    def show(self, scenario: Scenario, steps: list | None, train: TrainPlan | None,
             units: str, width: int) -> None:
        """The steps (or the proposal) in the table, the train's sheet below."""
        table = self.query_one(DataTable)
        row = table.cursor_row
        table.clear()
        results = train.steps if train is not None else ()
        if steps:
            head = f"Treatment train, {len(steps)} steps (the scenario's own)"
            rows = [(s.get("kind", "?"), step_summary(s)) for s in steps]
        elif train is not None and train.proposed:
            head = ("One dose cannot meet the window and the caps: the planner proposes this "
                    "train. Press p to adopt it as the scenario's steps.")
            rows = [(r.spec.kind, r.spec.label or "") for r in train.steps]
        else:
            head = ("One dose meets this job: no train. Press a to start one from the form's "
                    "dose, or open a scenario with [[step]].")
            rows = []
        for i, (kind, what) in enumerate(rows):
            ph = (f"{results[i].ph_in:.2f} → {results[i].ph_out:.2f}"
                  if i < len(results) else "")
            table.add_row(str(i + 1), kind, what, ph)
        if rows:
            table.move_cursor(row=min(max(row, 0), len(rows) - 1))
        self.query_one("#train-head", Static).update(Text(head, style="bold"))
        sheet = "" if train is None else render_train(scenario, train, units, width=width)
        self.query_one("#train-sheet", Static).update(Text(sheet))

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        self.post_message(self.Act("edit", event.cursor_row))

    def action_act(self, what: str) -> None:
        self.post_message(self.Act(what, self.query_one(DataTable).cursor_row))
