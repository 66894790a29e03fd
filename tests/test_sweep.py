"""Sizes against strengths (issue 18): the grid of tank sizes (or flows)
against product strengths, on the command line, as CSV and in Tankside."""

from __future__ import annotations

import asyncio
import csv
import io
from pathlib import Path

import pytest

from dosing.planning.reagents import get_reagent
from dosing.planning.strengths import STRENGTHS, at_strength, strengths_of
from dosing.io.scenario import load_scenario
from dosing.planning.sweep import default_sizes, strength_grid
from tests.test_robustness import _one_line, _strict_json, run

thermo_electrochem = pytest.importorskip("thermo.electrochem")

ROOT = Path(__file__).resolve().parents[1]
BATCH = str(ROOT / "scenarios" / "acid-rinse-caustic.toml")     # caustic-25, a tank
FLOW = str(ROOT / "scenarios" / "flow-metering-pump.toml")      # hydrochloric-32, a flow


# Laliberté 2009, J. Chem. Eng. Data 54, 1725, as coded in ChEDL thermo
# (thermo.electrochem.Laliberte_density), 20 °C, for the strengths inside its
# fit ranges (NaOH w <= 0.503, HCl w <= 0.376; sulfuric acid only at the
# dilute day-tank strength, where the model agrees with handbook tables).
# Bar 0.003 g/cm3, as for the catalogue densities in test_reagents.py.
@pytest.mark.parametrize("formula, cas, fraction", [
    ("NaOH", "1310-73-2", 0.20), ("NaOH", "1310-73-2", 0.32),
    ("HCl", "7647-01-0", 0.10), ("HCl", "7647-01-0", 0.20),
    ("H2SO4", "7664-93-9", 0.25)])
def test_strength_densities_against_laliberte(formula, cas, fraction):
    rho = dict(STRENGTHS[formula])[fraction]
    ref = thermo_electrochem.Laliberte_density(293.15, [fraction], [cas]) / 1000
    assert rho == pytest.approx(ref, abs=0.003)


def test_catalogue_strengths_are_the_catalogue_products():
    r = get_reagent("caustic-25")
    assert at_strength(r, 0.50) is get_reagent("caustic-50")
    assert strengths_of(r) == (0.20, 0.25, 0.32, 0.50)


def test_a_strength_without_a_density_is_refused():
    with pytest.raises(Exception, match="no density at hand; allowed: 20, 25, 32, 50"):
        at_strength(get_reagent("caustic-25"), 0.40)


def test_every_strength_carries_the_same_active_compound():
    # Mass balance (stoichiometry): the product needed scales with 1/strength;
    # the active compound is the same to within the water the weaker
    # solution adds (under 0.1 % here).
    s = load_scenario(BATCH)
    grid = strength_grid(s, default_sizes(s.basis), others=())
    row = grid.cells[2]
    active = [c.amounts.kg_active for c in row]
    assert max(active) / min(active) - 1 < 1e-3
    for r, c in zip(grid.reagents, row):
        assert c.amounts.kg_product == pytest.approx(c.amounts.kg_active / r.mass_fraction,
                                                     rel=1e-9)
        assert c.amounts.litres_product == pytest.approx(
            c.amounts.kg_product / r.density_kg_l, rel=1e-9)


def test_sweep_command_prints_the_grid_with_cautions():
    code, out, err = run("sweep", BATCH)
    assert code == 0, err
    for name in ("caustic soda 20 %", "caustic soda 32 %", "caustic soda 50 %"):
        assert name in out
    assert "tank volume, m³" in out and "licensed engineer" in out
    assert max(len(line) for line in out.splitlines()) <= 78
    code, out, err = run("sweep", FLOW, "--with", "caustic-50", "--with", "sulfuric-98")
    assert code == 0, err
    assert "flow, m³/h" in out and "kg/h" in out and "L/h" in out


def test_sweep_json_and_csv_agree(tmp_path):
    out_csv = tmp_path / "grid.csv"
    code, out, err = run("sweep", FLOW, "--sizes", "10,20", "--strengths", "10,32",
                         "--json", "--csv", str(out_csv))
    assert code == 0, err
    d = _strict_json(out)
    assert d["per"] == "hour" and d["sizes"] == [10.0, 20.0]
    assert [p["id"] for p in d["products"]][:2] == ["hydrochloric-10", "hydrochloric-32"]
    text = out_csv.read_text()
    assert text.startswith("# ") and "licensed engineer" in text
    rows = list(csv.DictReader(io.StringIO(
        "".join(ln + "\n" for ln in text.splitlines() if not ln.startswith("#")))))
    first = d["products"][0]["cells"][1]
    row = next(r for r in rows if r["product_id"] == "hydrochloric-10"
               and float(r["flow_m3_h"]) == 20.0)
    assert float(row["kg_product_per_h"]) == pytest.approx(first["kg_product"], rel=1e-5)
    # twice the flow, twice the product (one dose per litre of water)
    assert d["products"][0]["cells"][1]["kg_product"] == pytest.approx(
        2 * d["products"][0]["cells"][0]["kg_product"], rel=1e-12)


@pytest.mark.parametrize("args, word", [
    (["--strengths", "40"], "strengths"), (["--strengths", "abc"], "--strengths"),
    (["--sizes", "0,5"], "--sizes"), (["--with", "soap"], "reagent"),
    (["--csv", "grid.txt"], "grid.txt")])
def test_sweep_bad_options_are_one_line(args, word):
    code, out, err = run("sweep", BATCH, *args)
    assert code == 2 and out == ""
    _one_line(err, word)


def test_tankside_sweep_shows_strengths():
    from tui.app import make_app

    async def main():
        app = make_app(BATCH)
        async with app.run_test(size=(120, 40)) as pilot:
            await pilot.pause()
            await app.workers.wait_for_complete()      # planned in a worker thread
            await pilot.press("f4")
            await pilot.pause()
            table = app.query_one("#sweep-table")
            labels = [str(table.get_row_at(i)[0]) for i in range(table.row_count)]
            assert "caustic soda 20 %" in labels and "caustic soda 50 %" in labels
            units = [str(table.get_row_at(i)[1]) for i in range(table.row_count)]
            assert units[:2] == ["kg", "L"]
    asyncio.run(main())
