"""One [effluent] table as editable rows: metals, solutes, background ions.

Each entry the scenario holds is a row (its name, its value, its unit):
change the value to change it, clear it to remove it. The ``add`` box
takes ``name=value`` (several separated by ``;``); Enter turns them into
rows. Names and values are checked by the scenario validator, as for a
file, and its reason shows under the table. No chemistry here.
"""

from __future__ import annotations

from typing import Any

from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.widgets import Input, Label

from dosing.io.typed import parse_pairs, read_number

__all__ = ["PairsBox", "parse_pairs", "read_number"]


def _fmt(v: Any) -> str:
    return f"{v:g}" if isinstance(v, (int, float)) else str(v)


def pairs_id(key: str) -> str:
    """Widget id of the table for a scenario key (``effluent.metals_mg_l``)."""
    return "p-" + key.replace(".", "--").replace("_", "-")


class PairsBox(Vertical):
    """The rows of one [effluent] table; the form reads them with :meth:`read`."""

    def __init__(self, key: str, title: str, unit: str, example: str):
        super().__init__(id=pairs_id(key), classes="pairs")
        self.key = key
        self.title = title
        self.unit = unit
        self.example = example
        #: name -> the box holding its value, in the order shown
        self._rows: dict[str, Input] = {}

    def compose(self) -> ComposeResult:
        yield Label(f"{self.title}, {self.unit}", classes="pairs-title")
        yield Vertical(classes="pairs-rows")
        with Horizontal(classes="pairs-row"):
            yield Label("add", classes="label")
            yield Input(placeholder=self.example, classes="value pairs-add", compact=True,
                        id=self.id + "-add")
        error = Label("", classes="error", id=self.id + "-error")
        error.display = False
        yield error

    @property
    def add_box(self) -> Input:
        return self.query_one(".pairs-add", Input)

    def set_values(self, values: dict[str, Any] | None) -> None:
        """Show a table's entries as rows (the add box empties)."""
        self.query_one(".pairs-rows", Vertical).remove_children()
        self._rows = {}
        for name, value in (values or {}).items():
            self._add_row(name, _fmt(value))
        self.add_box.value = ""

    def _add_row(self, name: str, text: str) -> None:
        if name in self._rows:
            self._rows[name].value = text
            return
        box = Input(text, classes="value", compact=True,
                    id=f"{self.id}--{len(self._rows)}")
        self._rows[name] = box
        row = Horizontal(Label(name, classes="label"), box,
                         Label(self.unit, classes="unit"), classes="pairs-row")
        self.query_one(".pairs-rows", Vertical).mount(row)

    def read(self) -> tuple[dict[str, float] | None, str]:
        """The table as the form now shows it (None when empty), and a reason
        when a value cannot be read. A cleared row is left out (removed)."""
        out: dict[str, float] = {}
        for name, box in self._rows.items():
            text = box.value.strip()
            if not text:
                continue
            try:
                out[name] = read_number(text)
            except ValueError as err:
                return None, (f"{name}: {err}" if "could be" in str(err)
                              else f"{name}: {text!r} is not a number")
        text = self.add_box.value.strip()
        if text:
            try:
                out.update(parse_pairs(text))
            except ValueError as err:
                return None, f"add: {err}"
        return (out or None), ""

    def take_added(self) -> bool:
        """Turn what the add box holds into rows; False (box kept) if it
        cannot be read."""
        try:
            added = parse_pairs(self.add_box.value)
        except ValueError:
            return False
        for name, value in added.items():
            self._add_row(name, _fmt(value))
        self.add_box.value = ""
        return True

    def show_error(self, reason: str) -> None:
        label = self.query_one(f"#{self.id}-error", Label)
        label.update(reason)
        label.display = bool(reason)
        self.add_box.set_class(bool(reason), "bad")

    def on_input_submitted(self, event: Input.Submitted) -> None:
        if event.input is self.add_box:
            event.stop()
            self.take_added()
