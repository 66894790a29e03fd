"""What an operator sees first (issue 18): the dose before the chemistry,
every amount of a flow with its time base, a permit breach at the top and in
every record, a store too small for one batch. Subprocess tests of the CLI."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from tests.helpers import run_cli

ROOT = Path(__file__).resolve().parents[1]
CIP = ROOT / "scenarios" / "cip-sulfuric.toml"
FLOW = ROOT / "scenarios" / "food-acetate-stream.toml"


def _variant(tmp_path, base: Path, old: str, new: str) -> str:
    text = base.read_text()
    assert old in text
    f = tmp_path / base.name
    f.write_text(text.replace(old, new))
    return str(f)


def test_the_dose_is_the_first_thing_on_the_sheet():
    lines = run_cli("plan", str(CIP)).stdout.splitlines()
    assert lines[3].startswith("DOSE ") and "kg" in lines[3]
    first_dose = next(i for i, ln in enumerate(lines) if ln.startswith("  product per"))
    water = next(i for i, ln in enumerate(lines) if ln.startswith("water "))
    assert first_dose < water


def test_every_flow_amount_carries_its_time_base():
    text = run_cli("plan", str(FLOW)).stdout
    dose_block = text.split("WATER AND MODEL")[0]
    # Every kg or L figure in the dose block is per hour or per day.
    for m in re.finditer(r"\d[\d,.]* (kg|L)\b(?!/)", dose_block):
        tail = dose_block[m.end():m.end() + 6]
        assert tail.startswith("/"), f"{m.group(0)!r} has no time base"
    band = next(ln for ln in text.splitlines() if "window band" in ln)
    assert re.search(r"kg/h = [\d.]+ L/h to", band)


def test_a_permit_breach_is_at_the_top_in_warnings_and_in_the_log(tmp_path):
    scen = _variant(tmp_path, CIP, "sulfate_mg_l = 1500", "sulfate_mg_l = 100")
    lines = run_cli("plan", scen).stdout.splitlines()
    assert any(ln.startswith("!! PERMIT BREACH") for ln in lines[:8])
    d = json.loads(run_cli("plan", scen, "--json").stdout)
    assert d["warnings"][0].startswith("PERMIT BREACH")
    db = str(tmp_path / "log.sqlite")
    shown = run_cli("log", "add", scen, "--operator", "A", "--db", db).stdout
    assert "PERMIT BREACH" in shown
    assert "PERMIT BREACH" in run_cli("log", "show", "1", "--db", db).stdout


def test_storage_for_less_than_one_batch_is_flagged(tmp_path):
    scen = _variant(tmp_path, CIP, "storage_m3 = 0.5", "storage_m3 = 0.005")
    text = run_cli("plan", scen).stdout
    assert "LESS THAN ONE BATCH" in text
    # Issue 29: every flag the sheet raises is in the JSON warnings too.
    d = json.loads(run_cli("plan", scen, "--json").stdout)
    assert any("LESS THAN ONE BATCH" in w for w in d["warnings"])


def test_replay_of_a_batch_scenario_says_it_needs_a_flow(tmp_path):
    data = tmp_path / "log.csv"
    data.write_text("timestamp,flow,ph\n2026-01-01T00:00,5,4\n2026-01-01T00:01,5,4.1\n")
    r = run_cli("replay", str(data), "--scenario", str(CIP))
    assert r.returncode == 2 and "replay needs a flow scenario" in r.stderr


def test_replay_sheet_names_flags_in_plain_words(tmp_path):
    data = tmp_path / "log.csv"
    data.write_text("timestamp,flow,ph\n2026-01-01T00:00,5,4\n2026-01-01T00:01,,4.1\n"
                    "2026-01-01T00:02,5,4.2\n")
    text = run_cli("replay", str(data), "--scenario", str(FLOW)).stdout
    assert "flow missing" in text and "flow_missing" not in text


def test_log_shows_flow_amounts_as_rates_and_ratios_as_percent(tmp_path):
    db = str(tmp_path / "log.sqlite")
    r = run_cli("log", "add", str(FLOW), "--operator", "A", "--dosed", "30", "--db", db)
    assert "actually dosed: 30.0 kg/h" in r.stdout and "% of plan" in r.stdout
    listing = run_cli("log", "list", "--db", db).stdout
    assert "kg/h" in listing and re.search(r"\d+%", listing)


def test_files_that_carry_doses_carry_the_cautions(tmp_path):
    data = tmp_path / "log.csv"
    data.write_text("timestamp,flow,ph\n2026-01-01T00:00,5,4\n2026-01-01T00:01,5,4.1\n")
    out = tmp_path / "rows.csv"
    assert run_cli("replay", str(data), "--scenario", str(FLOW), "--csv", str(out)).returncode == 0
    head = out.read_text().splitlines()
    assert head[0].startswith("# ") and any("final word" in ln for ln in head[:6])
    db = str(tmp_path / "log.sqlite")
    run_cli("log", "add", str(FLOW), "--operator", "A", "--db", db)
    exp = tmp_path / "log-export.csv"
    assert run_cli("log", "export", "--csv", str(exp), "--db", db).returncode == 0
    import pandas as pd
    frame = pd.read_csv(exp)
    assert "final word" in frame["cautions"][0]


def test_a_near_vertical_curve_prints_no_absurd_slope():
    # An unbuffered acid rinse taken to pH 7: the linear slope at the aim was
    # printed as "pH moves 113 per 1 % of the dose", a figure no pH can do.
    r = run_cli("plan", str(ROOT / "scenarios" / "acid-rinse-caustic.toml"))
    assert r.returncode == 0, r.stderr
    line = " ".join(r.stdout.split("sensitivity", 1)[1].split("lab precision")[0].split())
    assert "near-vertical at the aim" in line and "per 1 % of the dose the pH moves" in line
    assert not re.search(r"pH moves \d", line)
    # a buffered stream keeps its figure
    r = run_cli("plan", str(ROOT / "scenarios" / "flow-metering-pump.toml"))
    assert re.search(r"pH moves 0\.\d+ per 1 % of the dose", " ".join(r.stdout.split()))


def test_us_units_switch_temperatures_densities_and_gas_volumes():
    # Issue 18 item 5: "Temperatures, densities and CO2 gas volumes switch
    # too". Exact factors (NIST SP 811): °F = 1.8 °C + 32; 1 gal = 3.785411784
    # L, 1 lb = 0.45359237 kg, so 1.8361 kg/L = 15.32 lb/gal.
    us = " ".join(run_cli("plan", str(CIP), "--units", "us").stdout.split())
    assert "45 °C (113 °F)" in us and "15.32 lb/gal at 68 °F" in us
    metric = run_cli("plan", str(CIP)).stdout
    assert "°F" not in metric and "1.836 kg/L at 20 °C" in metric


def test_curve_figure_gives_litres_and_keeps_beta_for_the_engineer():
    # Issue 18: the curve's x axis was kilograms only, and the buffer
    # intensity cluttered the operator's figure.
    import matplotlib.pyplot as plt
    from dosing.report.plot import plan_figure
    from dosing.io.scenario import load_scenario
    from dosing.planning.job import make_plan
    s = load_scenario(ROOT / "scenarios" / "flow-metering-pump.toml")
    plan = make_plan(s, sampled=False)
    operator = plan_figure(plan, s.title)
    ax = operator.axes[0]
    assert len(operator.axes) == 1 and "kg per hour" in ax.get_xlabel()
    top = [c for c in ax.get_children() if hasattr(c, "get_xlabel")
           and c.get_xlabel() == "L per hour"]
    assert top, "no litres axis along the top"
    # 15 kg/h of 32 % HCl at 1.1594 kg/L (CRC) reads as 12.9 L/h on the top axis
    assert top[0]._functions[0](15.0) == pytest.approx(15.0 / 1.1594, rel=1e-3)
    engineer = plan_figure(plan, s.title, engineer=True)
    assert any("buffer intensity" in a.get_ylabel() for a in engineer.axes)
    assert not any("buffer intensity" in a.get_ylabel() for a in operator.axes)
    plt.close("all")


def test_figures_name_the_site_the_tank_and_the_date():
    # Issue 18: "no plot names the site, tank and date".
    from dosing.io.scenario import load_scenario
    from dosing.report.sheet import figure_title
    s = load_scenario(CIP)
    title = figure_title(s, "2026-12-02 10:00")
    assert title.splitlines() == [s.title, f"{s.site} / {s.tank}, planned 2026-12-02 10:00"]


def test_replay_report_carries_site_and_tank(tmp_path):
    data = tmp_path / "log.csv"
    data.write_text("timestamp,flow,ph\n2026-01-01T00:00,5,3.6\n2026-01-01T00:01,5,3.7\n")
    r = run_cli("replay", str(data), "--scenario", str(FLOW), "--json")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    from dosing.io.scenario import load_scenario
    s = load_scenario(FLOW)
    assert (d["site"], d["tank"]) == (s.site, s.tank) and s.site and s.tank


def test_the_dose_lines_say_one_quantity_per_phrase():
    # Issue 29: active compound and product apart; the precision in words.
    r = run_cli("plan", "scenarios/acid-rinse-caustic.toml")
    assert "active compound    8.39 kg NaOH (5.25 mmol/L)\n" in r.stdout
    assert "in the water       420 mg/L of product\n" in r.stdout
    assert "pH read 0.05 off changes the dose by" in r.stdout


def test_a_cost_carries_its_currency_or_says_it_has_none(tmp_path):
    # Issue 29: "cost 7.05" had no currency.
    r = run_cli("plan", "scenarios/acid-rinse-caustic.toml", "--json")
    d = json.loads(r.stdout)
    assert d["currency"] == "GBP" and d["cost"] > 0
    assert "7.05 GBP per batch" in run_cli("plan", "scenarios/acid-rinse-caustic.toml").stdout
    text = run_cli("plan", "scenarios/food-acetate-stream.toml").stdout
    assert "no currency named" in " ".join(text.split())
    bad = _variant(tmp_path, Path("scenarios/acid-rinse-caustic.toml"), 'currency = "GBP"',
                   'currency = "pounds sterling"')
    r = run_cli("plan", bad)
    assert r.returncode == 2 and "currency" in r.stderr


def test_a_fleet_never_adds_costs_in_different_currencies(tmp_path):
    from dataclasses import replace
    from dosing.io.fleet import _product_total
    from dosing.io.replay_io import run_replay
    from dosing.io.scenario import load_scenario
    data = tmp_path / "log.csv"
    data.write_text("timestamp,flow,ph\n2026-01-01T00:00,5,4\n2026-01-01T00:01,5,4.1\n")
    report, _ = run_replay(str(data), load_scenario("scenarios/food-acetate-stream.toml"))
    a, b = replace(report, cost=10.0, currency="EUR"), replace(report, cost=5.0, currency="GBP")
    assert _product_total([("a", a), ("b", b)]).cost is None
    same = _product_total([("a", a), ("b", replace(b, currency="EUR"))])
    assert same.cost == 15.0 and same.currency == "EUR"
