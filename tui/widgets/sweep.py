"""The sweep table: doses for several sizes and two reagents side by side."""

from __future__ import annotations

from textual.widgets import DataTable

from dosing.numbers import fmt
from dosing.sheet import UNIT_SYSTEMS, product_text
from dosing.sweep import Sweep

__all__ = ["SweepTable"]


class SweepTable(DataTable):
    """Rows: tank volumes or flows; columns: reagents (kg = L of product)."""

    def show(self, result: Sweep, units: str) -> None:
        u = UNIT_SYSTEMS[units]
        self.clear(columns=True)
        size_unit = u.flow if result.per_flow else u.water_volume
        per = "per hour" if result.per_flow else "per batch"
        self.add_column(f"size, {size_unit}", key="size")
        for r in result.reagents:
            self.add_column(f"{r.id} ({per})", key=r.id)
        for size, row in zip(result.sizes, result.cells):
            factor = u.flow_per_m3_h if result.per_flow else u.water_volume_per_m3
            cells = [fmt(size * factor)]
            for cell in row:
                a = cell.amounts
                if a is None:
                    cells.append("cannot: " + cell.problem[:40])
                    continue
                cells.append(product_text(a.kg_product, a.litres_product, units))
            self.add_row(*cells)
