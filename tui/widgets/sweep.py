"""The sweep table: tank sizes (or flows) against product strengths, and
another product side by side (the rows of :mod:`dosing.report.sweep_sheet`)."""

from __future__ import annotations

from rich.text import Text
from textual.widgets import DataTable

from dosing.report.units import UnitSystem
from dosing.planning.sweep import Sweep
from dosing.report.sweep_sheet import grid_rows, size_heading, size_labels

__all__ = ["SweepTable"]


class SweepTable(DataTable):
    """Rows: each strength of the product (kg, and L for a solution, per
    batch or per hour); columns: tank volumes or flows."""

    def show(self, result: Sweep, units: UnitSystem) -> None:
        self.clear(columns=True)
        unit, heads = size_labels(result, units)
        self.add_column(size_heading(result, unit), key="product")
        self.add_column("", key="unit")
        for k, h in enumerate(heads):
            self.add_column(Text(h, justify="right"), key=f"size-{k}")
        for row in grid_rows(result, units):
            cells = list(row.cells) + [""] * (len(heads) - len(row.cells))
            self.add_row(row.label, row.unit,
                         *(c if c.startswith("cannot") else Text(c, justify="right")
                           for c in cells))
