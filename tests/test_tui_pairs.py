"""Tankside edits metals, solutes and background ions as rows (issue 29
item 7): each change is planned as the same scenario written to a file
would be, and bad names or values are refused beside the table."""

import copy
from pathlib import Path

import pytest

from dosing.io.scenario import load_scenario, parse_scenario, scenario_to_toml
from dosing.planning.job import make_plan
from tests.tui_helpers import drive as run_in_tankside, settle
from tui.form import ScenarioForm
from tui.widgets.pairs import PairsBox, pairs_id

ROOT = Path(__file__).resolve().parents[1]
PLATING = str(ROOT / "scenarios" / "plating-rinse-metals.toml")


def drive(coro_fn, path=PLATING):
    run_in_tankside(coro_fn, path, (150, 60), show_timing=False)


def table(app, key="effluent.metals_mg_l") -> PairsBox:
    return app.query_one("#" + pairs_id(key), PairsBox)


def engine_plan_with(effluent_changes):
    """The engine's plan for the demo file with [effluent] tables changed."""
    data = copy.deepcopy(dict(load_scenario(PLATING).data))
    for name, value in effluent_changes.items():
        if value is None:
            data["effluent"].pop(name, None)
        else:
            data["effluent"][name] = value
    return make_plan(parse_scenario(scenario_to_toml(data)))


def test_the_files_tables_are_rows():
    async def check(app, pilot):
        file_metals = load_scenario(PLATING).data["effluent"]["metals_mg_l"]
        assert table(app).read() == ({k: float(v) for k, v in file_metals.items()}, "")
        assert table(app, "effluent.ions_mg_l").read()[0] == {"sodium": 40.0, "chloride": 60.0}
        assert table(app, "effluent.solutes_mmol_l").read() == (None, "")
        # Nothing of these tables is listed as "kept from the file" any more.
        assert "metals_mg_l" not in str(app.query_one("#kept-effluent").render())
    drive(check)


def test_change_remove_and_add_a_metal_replans_as_the_engine_would():
    async def check(app, pilot):
        box = table(app)
        box._rows["zinc"].value = "70"          # change
        box._rows["copper"].value = ""          # remove: the permit caps copper
        await settle(app, pilot)
        assert app.stale and "a cap on copper but the effluent gives no copper" in app.status
        box._rows["copper"].value = "8,0"       # back, with a decimal comma
        await settle(app, pilot)
        box.add_box.focus()
        await pilot.press(*"cadmium=0,2")       # add
        await pilot.press("enter")
        await settle(app, pilot)
        assert "cadmium" in box._rows and box.add_box.value == ""
        metals = {"zinc": 70.0, "nickel": 12.0, "copper": 8.0, "cadmium": 0.2}
        data, errors = app.query_one(ScenarioForm).to_data()
        assert not errors and data["effluent"]["metals_mg_l"] == metals
        expected = engine_plan_with({"metals_mg_l": metals})
        assert app.plan.dose_mol_l == pytest.approx(expected.dose_mol_l, rel=1e-9)
        assert not app.stale
    drive(check)


def test_emptying_a_table_drops_it_from_the_scenario():
    async def check(app, pilot):
        for box in table(app, "effluent.ions_mg_l")._rows.values():
            box.value = ""
        await settle(app, pilot)
        data, _ = app.query_one(ScenarioForm).to_data()
        assert "ions_mg_l" not in data["effluent"]
        expected = engine_plan_with({"ions_mg_l": None})
        assert app.plan.dose_mol_l == pytest.approx(expected.dose_mol_l, rel=1e-9)
    drive(check)


def test_an_unknown_name_or_a_bad_value_is_refused_beside_the_table():
    async def check(app, pilot):
        before = app.plan
        box = table(app)
        box.add_box.value = "unobtainium=3"
        await settle(app, pilot)
        error = app.query_one("#" + pairs_id("effluent.metals_mg_l") + "-error")
        assert error.display and "unobtainium" in str(error.render())
        assert app.plan is before and app.stale
        box.add_box.value = ""
        box._rows["nickel"].value = "lots"
        await settle(app, pilot)
        assert "nickel: 'lots' is not a number" in str(error.render())
        box._rows["nickel"].value = "-4"
        await settle(app, pilot)
        assert error.display and app.stale          # the validator's own range check
        box._rows["nickel"].value = "12"
        await settle(app, pilot)
        assert not error.display and not app.stale
    drive(check)


def test_edited_rows_are_saved_to_the_file(tmp_path):
    async def check(app, pilot):
        table(app)._rows["nickel"].value = "3.5"
        table(app, "effluent.solutes_mmol_l").add_box.value = "acetate=2"
        await settle(app, pilot)
        out = tmp_path / "edited.toml"
        app.save_path(str(out))
        saved = load_scenario(out).data["effluent"]
        assert saved["metals_mg_l"]["nickel"] == 3.5
        assert saved["solutes_mmol_l"] == {"acetate": 2.0}
    drive(check)
