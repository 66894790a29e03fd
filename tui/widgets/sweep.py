"""The sweep table: tank sizes (or flows) against product strengths, and
another product side by side (the rows of :mod:`dosing.report.sweep_sheet`)."""

from __future__ import annotations

from rich.text import Text
from textual.widgets import DataTable

from dosing.report.units import UnitSystem
from dosing.planning.sweep import Sweep
from dosing.report.sweep_sheet import GridRow, grid_rows, size_heading, size_labels

__all__ = ["SweepTable", "columns_that_fit"]


def columns_that_fit(widths: list[int], fixed: int, own: int, room: int) -> list[int]:
    """The size columns to show in ``room`` cells: the operator's own column
    always, then its neighbours, the largest sizes dropped first.

    ``widths`` are the size columns' widths (padding included) and ``fixed``
    the width of the label columns before them.

    >>> columns_that_fit([6, 6, 6, 6, 6], 20, 2, 40)
    [1, 2, 3]
    >>> columns_that_fit([6, 6, 6, 6, 6], 20, 2, 34)
    [1, 2]
    >>> columns_that_fit([6, 6, 6, 6, 6], 20, 4, 22)
    [4]
    """
    order = sorted(range(len(widths)), key=lambda k: (abs(k - own), k))
    keep, used = [], fixed
    for k in order:
        if k != own and used + widths[k] > room:
            continue
        keep.append(k)
        used += widths[k]
    return sorted(keep)


class SweepTable(DataTable):
    """Rows: each strength of the product (kg, and L for a solution, per
    batch or per hour); columns: tank volumes or flows, the operator's own
    marked and always in view (sizes that do not fit are left out, the
    largest first)."""

    def show(self, result: Sweep, units: UnitSystem, own: int, room: int) -> None:
        """``own``: index of the operator's size; ``room``: columns available."""
        self.clear(columns=True)
        unit, heads = size_labels(result, units)
        rows = grid_rows(result, units)
        heading = size_heading(result, unit)
        fixed = max([len(heading)] + [len(r.label) for r in rows]) + 2 + \
            max([len(r.unit) for r in rows] + [0]) + 2
        widths = [max([len(h) + (2 if k == own else 0)]
                      + [len(r.cells[k]) for r in rows
                         if k < len(r.cells) and not r.cells[k].startswith("cannot")]) + 2
                  for k, h in enumerate(heads)]
        shown = columns_that_fit(widths, fixed, own, room - 2)     # 2: the scrollbar
        self.add_column(heading, key="product")
        self.add_column("", key="unit")
        for k in shown:
            mark = k == own
            self.add_column(Text(heads[k] + (" ◂" if mark else ""), justify="right",
                                 style="bold" if mark else ""), key=f"size-{k}")
        for row in rows:
            self.add_row(row.label, row.unit, *_cells(row, shown, own))


def _cells(row: GridRow, shown: list[int], own: int) -> list:
    """The cells of one row for the columns shown (a row that cannot be
    planned says why in its first cell)."""
    if row.cells and row.cells[0].startswith("cannot"):
        return [row.cells[0]] + [""] * (len(shown) - 1)
    return [Text(row.cells[k], justify="right", style="bold" if k == own else "")
            if k < len(row.cells) else "" for k in shown]
