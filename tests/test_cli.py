"""End-to-end: the ``dosing`` command on the demo scenarios and on bad input."""

import json
from pathlib import Path

import pytest

from tests.helpers import run_cli

from dosing.io.scenario import load_scenario, parse_scenario, scenario_to_toml
from dosing.planning.job import make_plan
from dosing.report.sheet import render_sheet
from dosing.report.plan_json import sheet_dict

ROOT = Path(__file__).resolve().parents[1]
SCENARIOS = sorted((ROOT / "scenarios").glob("*.toml"))
FINAL_WORD = "local codes, the discharge permit and a licensed engineer have the final word"


run = run_cli


def test_there_are_at_least_six_demo_scenarios():
    assert len(SCENARIOS) >= 6


#: One-dose demos (a train's demos are checked alike in tests/test_train.py).
ONE_DOSE = [p for p in SCENARIOS if "[[step]]" not in p.read_text(encoding="utf-8")]


@pytest.mark.parametrize("path", ONE_DOSE, ids=[p.stem for p in ONE_DOSE])
def test_every_demo_scenario_plans_and_carries_the_cautions(path):
    # Demo scenarios double as fixtures (in process: fast).
    scenario = load_scenario(path)
    plan = make_plan(scenario)
    text = render_sheet(scenario, plan)
    assert "DOSE SHEET" in text
    assert FINAL_WORD in " ".join(text.split())
    data = sheet_dict(scenario, plan)
    assert data["reagent"] == scenario.reagent.id
    assert data["cautions"][-1].endswith("have the final word on any dose.")
    # Round trip of the scenario data through our TOML writer.
    again = parse_scenario(scenario_to_toml(scenario.data), str(path))
    assert make_plan(again).dose_mol_l == pytest.approx(plan.dose_mol_l, rel=1e-12)


def test_plan_command_prints_the_sheet():
    r = run("plan", "scenarios/acid-rinse-caustic.toml")
    assert r.returncode == 0, r.stderr
    assert "DOSE SHEET" in r.stdout
    assert "product per batch" in r.stdout
    assert FINAL_WORD in " ".join(r.stdout.split())


def test_plan_json_has_the_stable_keys():
    r = run("plan", "scenarios/cip-sulfuric.toml", "--json")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    for key in ("ph_start", "ph_end", "reagent", "dose", "window", "warnings", "cautions"):
        assert key in d
    for key in ("mmol_per_l", "mg_per_l_product", "kg_product", "litres_product"):
        assert key in d["dose"]
    assert len(d["window"]["dose_kg_product"]) == 2
    assert d["reagent"] == "sulfuric-98"
    r = run("plan", "scenarios/flow-metering-pump.toml", "--json")
    d = json.loads(r.stdout)
    assert "kg_product_per_h" in d["dose"] and "litres_product_per_h" in d["dose"]


def test_plan_us_units():
    r = run("plan", "scenarios/flow-metering-pump.toml", "--units", "us")
    assert r.returncode == 0, r.stderr
    assert "gpm" in r.stdout and " gal" in r.stdout and " lb" in r.stdout


def test_plot_is_written_as_png(tmp_path):
    out = tmp_path / "curve.png"
    r = run("plan", "scenarios/lime-acid-batch.toml", "--plot", str(out))
    assert r.returncode == 0, r.stderr
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


GOOD = """title = "bench"
[effluent]
ph = 3.0
alkalinity_mg_l_as_caco3 = 0
[batch]
volume_m3 = 10
[target]
ph_min = 6.0
ph_max = 9.0
[reagent]
id = "caustic-50"
"""


@pytest.mark.parametrize("text, key, says", [
    (GOOD.replace("ph = 3.0", "ph = 19"), "effluent.ph", "too high"),
    (GOOD.replace("ph = 3.0", 'ph = "low"'), "effluent.ph", "expected a number"),
    (GOOD.replace("volume_m3 = 10", "volume_m3 = -10"), "batch.volume_m3", "above 0"),
    (GOOD.replace('id = "caustic-50"', 'id = "caustic-75"'), "reagent.id", "unknown reagent"),
    (GOOD.replace("ph = 3.0", "ph = 3.0\nph_meter = 2"), "effluent.ph_meter", "unknown key"),
    (GOOD + "[flow]\nm3_per_h = 3\n", "[batch]/[flow]", "exactly one"),
    (GOOD.replace("[target]\nph_min = 6.0\nph_max = 9.0\n", ""), "[target]", "missing"),
    (GOOD.replace("ph_max = 9.0", "ph_max = 5.0"), "target.ph_max", "above ph_min"),
    (GOOD.replace("alkalinity_mg_l_as_caco3 = 0",
                  "solutes_mmol_l = { chromate = 2 }"), "effluent.solutes_mmol_l.chromate",
     "unknown solute"),
    (GOOD.replace("ph = 3.0", "ph = 3.0\ntemperature_c = 80"), "effluent.temperature_c",
     "outside the range"),
    (GOOD.replace("[batch]", "[batch]\nvolume = 3"), "batch.volume", "unknown key"),
    (GOOD.replace('title = "bench"', "title = [1, 2]"), "title", "text"),
    (GOOD + "[model]\nactivity = \"debye\"\n", "model.activity", "not a model"),
    (GOOD.replace("ph = 3.0", "ph = 3.0 3"), "", "not valid TOML"),
    (GOOD.replace("ph = 3.0\nalkalinity_mg_l_as_caco3 = 0",
                  "ph = 4.0\nalkalinity_mg_l_as_caco3 = 200"),
     "effluent.alkalinity_mg_l_as_caco3", "cannot be measured"),
])
def test_bad_scenarios_give_one_clear_message_and_exit_2(tmp_path, text, key, says):
    f = tmp_path / "bad.toml"
    f.write_text(text)
    plot = tmp_path / "never.png"
    r = run("plan", str(f), "--plot", str(plot))
    assert r.returncode == 2
    assert "Traceback" not in r.stderr
    line = r.stderr.strip()
    assert len(line.splitlines()) == 1
    assert str(f) in line and key in line and says in line
    assert r.stdout == ""
    assert not plot.exists()


def test_unreachable_aim_is_an_error_not_a_number(tmp_path):
    f = tmp_path / "wrong-way.toml"
    f.write_text(GOOD.replace("ph = 3.0", "ph = 11.0"))
    r = run("plan", str(f))
    assert r.returncode == 2
    assert "cannot reach the aim" in r.stderr and "already above" in r.stderr
    assert r.stdout == ""


def test_missing_file_and_bad_plot_path(tmp_path):
    r = run("plan", str(tmp_path / "nope.toml"))
    assert r.returncode == 2 and "no such file" in r.stderr
    r = run("plan", "scenarios/acid-rinse-caustic.toml", "--plot",
            str(tmp_path / "no-such-folder" / "x.png"))
    assert r.returncode == 2 and "does not exist" in r.stderr
    r = run("plan", "scenarios/acid-rinse-caustic.toml", "--plot", str(tmp_path / "x.jpg"))
    assert r.returncode == 2 and ".png" in r.stderr
    assert list(tmp_path.iterdir()) == []


def test_listing_commands():
    r = run("reagents")
    assert r.returncode == 0 and "caustic-50" in r.stdout and "co2" in r.stdout
    r = run("solutes")
    assert r.returncode == 0 and "ammonia" in r.stdout and "as N" in r.stdout
