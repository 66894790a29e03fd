"""The sizes-against-strengths grid as rows, text, JSON and CSV.

One place for the layout the command line and Tankside share: a product (or
strength) per pair of rows, kilograms and litres of product (per batch, or
per hour for a flow: the pump rate), one column per tank volume or flow.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from typing import Any

from .numbers import csv_text, fmt
from ..planning.reagents import GENERAL_CAUTION
from ..planning.job import Scenario
from .text import wrap
from .units import UNIT_SYSTEMS
from ..planning.sweep import Sweep

__all__ = ["GridRow", "grid_rows", "size_labels", "size_heading", "render_sweep",
           "sweep_dict", "sweep_csv", "SWEEP_NOTE"]

#: What the grid leaves out, said under it.
SWEEP_NOTE = ("Each product is planned as the sheet plans it; its own plan (dosing plan) "
              "has the checks a grid leaves out: heat, gas, permit caps, sludge.")


@dataclass(frozen=True)
class GridRow:
    """One row of the grid: a product's label (on its first row), the unit
    of the row and one text per size."""

    label: str
    unit: str
    cells: tuple[str, ...]


def size_labels(result: Sweep, units: str = "metric") -> tuple[str, tuple[str, ...]]:
    """The size unit and one heading per size."""
    u = UNIT_SYSTEMS[units]
    unit = u.flow if result.per_flow else u.water_volume
    factor = u.flow_per_m3_h if result.per_flow else u.water_volume_per_m3
    return unit, tuple(f"{fmt(s * factor)}" for s in result.sizes)


def size_heading(result: Sweep, unit: str) -> str:
    """What the size columns are: "tank volume, m³" or "flow, m³/h"."""
    return f"{'flow' if result.per_flow else 'tank volume'}, {unit}"


def grid_rows(result: Sweep, units: str = "metric") -> list[GridRow]:
    """Rows of the grid: kg (and L for a liquid) per product, or why not."""
    u = UNIT_SYSTEMS[units]
    per = "/h" if result.per_flow else ""
    rows: list[GridRow] = []
    for j, r in enumerate(result.reagents):
        column = [row[j] for row in result.cells]
        problem = next((c.problem for c in column if c.amounts is None), "")
        if problem:
            rows.append(GridRow(r.name, "", (f"cannot: {problem}",)))
            continue
        kg = tuple(fmt(c.amounts.kg_product * u.mass_per_kg)
                   if c.amounts.kg_product is not None else "n/a" for c in column)
        rows.append(GridRow(r.name, u.mass + per, kg))
        if r.form == "liquid":
            rows.append(GridRow("", u.product_volume + per, tuple(
                fmt(c.amounts.litres_product * u.product_volume_per_l) for c in column)))
    return rows


def _cautions(result: Sweep) -> list[str]:
    out: list[str] = []
    for r in result.reagents:
        out.extend(c for c in r.cautions if c not in out)
    return out + [GENERAL_CAUTION]


def render_sweep(result: Sweep, scenario: Scenario, units: str = "metric",
                 width: int = 78) -> str:
    """The grid as text, fitted to ``width`` (78 by default)."""
    unit, heads = size_labels(result, units)
    what = ("product per hour for each flow (the pump rate)" if result.per_flow
            else "product per batch for each tank volume")
    col = max(9, *(len(h) + 1 for h in heads))
    label_w = max(18, width - 6 - col * len(heads))
    head, aim = (("TRAIN STEPS AGAINST SIZES", "each dose step to its own aim, the last to pH")
                 if scenario.train else ("SIZES AGAINST STRENGTHS", "to pH"))
    out = [f"{head}  {scenario.title}", "=" * 40,
           *wrap(f"{what}, {aim} {fmt(scenario.target.ph_aim)}", width, ""), "",
           f"{size_heading(result, unit):<{label_w + 6}}" + "".join(f"{h:>{col}}"
                                                                  for h in heads)]
    for row in grid_rows(result, units):
        label = row.label if len(row.label) <= label_w else row.label[:label_w - 1] + "…"
        if row.cells and row.cells[0].startswith("cannot"):
            out.append(f"{label:<{label_w}}")
            out.extend(wrap(row.cells[0], width, "    "))
            continue
        out.append(f"{label:<{label_w}} {row.unit:>5}" + "".join(f"{c:>{col}}"
                                                            for c in row.cells))
    out += [""] + wrap(SWEEP_NOTE, width, "") + ["", "CAUTIONS"]
    for c in _cautions(result):
        out.extend(wrap(c, width, "  - "))
    return "\n".join(out) + "\n"


def sweep_dict(result: Sweep, scenario: Scenario) -> dict[str, Any]:
    """The grid as plain data (SI units; per hour for a flow)."""
    products = []
    for j, r in enumerate(result.reagents):
        cells = []
        for row in result.cells:
            a = row[j].amounts
            cells.append({"problem": row[j].problem} if a is None else
                         {"kg_product": a.kg_product, "litres_product": a.litres_product,
                          "mmol_per_l": a.mmol_per_l})
        products.append({"id": r.id, "name": r.name, "strength_percent": r.mass_fraction * 100
                         if r.molarity_mol_l is None else None, "cells": cells})
    return {"scenario": scenario.title, "per": "hour" if result.per_flow else "batch",
            "size_unit": "m3/h" if result.per_flow else "m3", "sizes": list(result.sizes),
            "aim_ph": scenario.target.ph_aim, "products": products, "note": SWEEP_NOTE,
            "cautions": _cautions(result)}


def sweep_csv(result: Sweep, scenario: Scenario) -> str:
    """One line per size and product, SI units, the cautions first as ``#`` lines."""
    d = sweep_dict(result, scenario)
    buf = io.StringIO()
    for c in d["cautions"]:
        buf.write(f"# {c}\n")
    per = "_per_h" if result.per_flow else ""
    size = "flow_m3_h" if result.per_flow else "volume_m3"
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([size, "product_id", "product", "strength_percent", f"kg_product{per}",
                f"litres_product{per}", "not_planned_because"])
    for p in d["products"]:
        for s, cell in zip(d["sizes"], p["cells"]):
            w.writerow([f"{s:.9g}", csv_text(p["id"]), csv_text(p["name"]),
                        _g(p["strength_percent"]),
                        _g(cell.get("kg_product")), _g(cell.get("litres_product")),
                        cell.get("problem", "")])
    return buf.getvalue()


def _g(x) -> str:
    return "" if x is None else f"{x:.6g}"
