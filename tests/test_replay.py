"""Replay of logged data: per-row doses, chunking, bad data."""

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from dosing.planning import replay_totals as totals_mod  # noqa: E402
from dosing.planning.measurements import Measurements
from tests.helpers import run_cli

from dosing import plan_dose
from dosing.planning.effluent import infer_water
from dosing.io.replay_io import run_replay
from dosing.io.scenario import load_scenario

ROOT = Path(__file__).resolve().parents[1]
SCEN = ROOT / "scenarios" / "flow-metering-pump.toml"


cli = run_cli


SMALL = """timestamp,flow (m3/h),pH,temperature_c
,m3/h,-,degC
2026-03-02T08:00,20.0,10.40,32
2026-03-02T08:01,22.0,10.10,31
2026-03-02T08:02,18.5,9.80,30
2026-03-02T08:03,0.0,10.60,32
2026-03-02T08:04,21.0,7.20,32
"""


def test_each_row_matches_the_single_water_planner(tmp_path):
    f = tmp_path / "small.csv"
    f.write_text(SMALL)
    s = load_scenario(SCEN)
    out = tmp_path / "rows.csv"
    r = cli("replay", str(f), "--scenario", str(SCEN), "--csv", str(out), "--json")
    assert r.returncode == 0, r.stderr
    rows = pd.read_csv(out, comment="#")
    assert len(rows) == 5                       # the units row was skipped
    mmol = {k: v * 1000 for k, v in s.water.totals_mol_l.items()}
    for _, row in rows.iterrows():
        w = infer_water(Measurements(row.ph, row.temperature_c, solutes_mmol_l=mmol))
        plan = plan_dose(w, s.reagent, s.target, s.basis)
        assert row.dose_mmol_l == pytest.approx(plan.dose_mol_l * 1000, rel=1e-5)
        # kg per hour = mmol/L x flow x kg of product per mol.
        assert row.dose_kg_h == pytest.approx(
            plan.dose_mol_l * row.flow_m3_h * 1000 * s.reagent.kg_product_per_mol,
            rel=1e-5, abs=1e-9)
        assert row.dt_s == 60
    report = json.loads(r.stdout)
    assert report["rows_planned"] == 5
    # pH 7.2 is inside the window and below the aim: an acid is not needed.
    assert rows.dose_mmol_l.iloc[-1] == 0.0
    # The per-row CSV carries 9 significant digits.
    assert report["total"]["kg_product"] == pytest.approx(rows.kg.sum(), rel=1e-7)
    # 4 of 5 minutes outside the window 6-9.
    assert report["hours_outside_window"] == pytest.approx(4 / 60)


def _year_like(n, seed=3):
    rng = np.random.default_rng(seed)
    ts = pd.date_range("2025-06-01", periods=n, freq="min")
    day = np.sin(np.arange(n) / 1440 * 2 * np.pi)
    return pd.DataFrame({"timestamp": ts.strftime("%Y-%m-%d %H:%M"),
                         "flow_m3_h": (20 + 5 * day + rng.normal(0, 1, n)).round(3),
                         "ph": (10.0 + 0.5 * day + rng.normal(0, 0.1, n)).round(3)})


def test_chunked_and_in_memory_give_the_same_totals(tmp_path):
    f = tmp_path / "log.csv"
    data = _year_like(12_000)
    # A flat-lined sensor straddling a chunk edge, and some bad rows.
    data.loc[2_950:3_100, "ph"] = 10.123
    data.loc[500, "flow_m3_h"] = -1
    data.loc[501, "ph"] = 19
    data.loc[502, "timestamp"] = "not a time"
    data.to_csv(f, index=False)
    s = load_scenario(SCEN)
    whole = run_replay(str(f), s, chunk_rows=100_000)[0].to_dict()
    parts = run_replay(str(f), s, chunk_rows=3_000)[0].to_dict()
    for key in ("rows", "rows_planned", "not_planned"):
        assert parts[key] == whole[key]
    assert parts["hours_outside_window"] == pytest.approx(whole["hours_outside_window"])
    assert parts["daily_kg_product"].keys() == whole["daily_kg_product"].keys()
    for day, kg in whole["daily_kg_product"].items():
        assert parts["daily_kg_product"][day] == pytest.approx(kg, rel=1e-12)
    assert parts["total"]["kg_product"] == pytest.approx(whole["total"]["kg_product"],
                                                         rel=1e-9)
    assert parts["dose_rate"]["p95"] == whole["dose_rate"]["p95"]
    # 151 equal readings: flagged from the 60th on, i.e. 92 rows.
    assert whole["not_planned"]["ph_flatline"]["rows"] == 151 - 59
    assert whole["not_planned"]["flow_negative"]["rows"] == 1
    assert whole["not_planned"]["ph_out_of_range"]["rows"] == 1
    assert whole["not_planned"]["bad_timestamp"]["rows"] == 1


def test_bad_rows_are_counted_not_dropped(tmp_path):
    f = tmp_path / "bad.csv"
    f.write_text("time,flow,ph\n"
                 "2026-01-01 00:00,10,10.2\n"
                 "2026-01-01 00:01,,10.2\n"          # flow missing
                 "2026-01-01 00:02,10,\n"            # pH missing
                 "2026-01-01 00:02,10,10.1\n"        # time not increasing
                 "2026-01-01 00:03,-2,10.1\n"        # negative flow
                 "garbage,10,10.1\n"                 # bad timestamp
                 "2026-01-01 00:05,10,14.5\n"        # pH out of range
                 "2026-01-01 00:06,10,10.0\n")
    report = run_replay(str(f), load_scenario(SCEN))[0].to_dict()
    assert report["rows"] == 8 and report["rows_planned"] == 2
    counts = {k: v["rows"] for k, v in report["not_planned"].items()}
    assert counts == {"flow_missing": 1, "ph_missing": 1, "time_not_increasing": 1,
                      "flow_negative": 1, "bad_timestamp": 1, "ph_out_of_range": 1}


def test_wrong_direction_rows_are_flagged(tmp_path):
    f = tmp_path / "low.csv"
    f.write_text("timestamp,flow_m3_h,ph\n2026-01-01 00:00,10,4.0\n2026-01-01 00:01,10,10.0\n")
    report = run_replay(str(f), load_scenario(SCEN))[0].to_dict()
    assert report["not_planned"]["wrong_direction"]["rows"] == 1


@pytest.mark.parametrize("text, says", [
    ("timestamp,ph\n2026-01-01,7\n", "flow_m3_h"),
    ("when,flow,ph\n2026-01-01,1,7\n", "timestamp"),
    ("timestamp,flow,ph\n2026-01-01,1,nan\n2026-01-01 00:01,1,\n", "no usable rows"),
    ("", "empty"),
])
def test_unusable_files_exit_2(tmp_path, text, says):
    f = tmp_path / "d.csv"
    f.write_text(text)
    out = tmp_path / "rows.csv"
    r = cli("replay", str(f), "--scenario", str(SCEN), "--csv", str(out))
    assert r.returncode == 2 and says in r.stderr and "Traceback" not in r.stderr
    assert not out.exists()


def test_plot_is_written(tmp_path):
    f = tmp_path / "log.csv"
    _year_like(3000).to_csv(f, index=False)
    png = tmp_path / "replay.png"
    r = cli("replay", str(f), "--scenario", str(SCEN), "--plot", str(png))
    assert r.returncode == 0, r.stderr
    assert png.read_bytes()[:4] == b"\x89PNG"
    assert "DOSE RATE" in r.stdout and "final word" in r.stdout


def test_parquet_gives_the_same_totals_as_csv(tmp_path):
    pytest.importorskip("pyarrow")
    data = _year_like(5_000)
    csv_file = tmp_path / "log.csv"
    pq_file = tmp_path / "log.parquet"
    data.to_csv(csv_file, index=False)
    data.to_parquet(pq_file, index=False)
    s = load_scenario(SCEN)
    a = run_replay(str(csv_file), s, chunk_rows=2_000)[0].to_dict()
    b = run_replay(str(pq_file), s, chunk_rows=2_000)[0].to_dict()
    assert b["rows_planned"] == a["rows_planned"] == 5_000
    assert b["total"]["kg_product"] == pytest.approx(a["total"]["kg_product"], rel=1e-12)


METAL_FLOW = """[effluent]
ph = 3.0
temperature_c = 20
acidity_mg_l_as_caco3 = 400
solutes_mg_l = { sulfate = 900 }
ions_mg_l = { sodium = 300, chloride = 200, calcium = 80 }
metals_mg_l = { iron_ii = 40, zinc = 6 }
oxidise_ferrous = true

[flow]
m3_per_h = 10

[target]
ph_min = 7.0
ph_max = 9.5
ph_aim = 8.5

[reagent]
id = "caustic-25"

[model]
activity = "davies"
"""


def test_replay_of_a_metal_water_matches_the_single_water_planner(tmp_path):
    # Every row of a replay is the single-water planner with the row's pH:
    # metals, measured ions and aeration included.
    scen = tmp_path / "metal-flow.toml"
    scen.write_text(METAL_FLOW)
    data = tmp_path / "log.csv"
    data.write_text("timestamp,flow_m3_h,ph\n2026-03-02T08:00,10,3.0\n"
                    "2026-03-02T08:01,12,3.4\n2026-03-02T08:02,9,2.8\n")
    out = tmp_path / "rows.csv"
    r = cli("replay", str(data), "--scenario", str(scen), "--csv", str(out))
    assert r.returncode == 0, r.stderr
    s = load_scenario(scen)
    w0 = s.water
    for _, row in pd.read_csv(out, comment="#").iterrows():
        w = infer_water(Measurements(row.ph, 20.0, solutes_mmol_l={k: v * 1000 for k, v in
                                                       w0.totals_mol_l.items()},
                        ions_mg_l={"sodium": 300, "chloride": 200},
                        metals_mg_l={"iron_ii": 40, "zinc": 6, "calcium": 80},
                        oxidise_ferrous=True))
        plan = plan_dose(w, s.reagent, s.target, s.basis)
        assert row.dose_mmol_l == pytest.approx(plan.dose_mol_l * 1000, rel=1e-5)


# ------------------------------------------- distinct waters, fast paths --
# The replay solves each distinct (pH, temperature, alkalinity) once and keeps
# it for later chunks; these check the shortcuts against the plain way.

from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402
from hypothesis.extra.numpy import arrays  # noqa: E402

from dosing.planning import replay as replay_mod  # noqa: E402
from dosing.io.replay_io import iter_site_chunks  # noqa: E402


def test_rows_sharing_a_water_get_the_dose_it_gets_alone(tmp_path):
    # 3,000 rows over 80 distinct waters, read in chunks of about 500 rows so
    # that later chunks take their doses from the waters kept from before.
    rng = np.random.default_rng(3)
    n = 3000
    ph = rng.choice(np.round(np.linspace(9.0, 11.0, 20), 2), n)
    temp = rng.choice([25.0, 31.5], n)
    alk = rng.choice([150.0, 151.0], n)
    ts = pd.Timestamp("2026-01-01") + pd.to_timedelta(np.arange(n), unit="min")
    f = tmp_path / "rep.csv"
    pd.DataFrame({"timestamp": ts.strftime("%Y-%m-%d %H:%M"), "flow_m3_h": 10.0, "ph": ph,
                  "temperature_c": temp, "alkalinity": alk}).to_csv(f, index=False)
    s = load_scenario(SCEN)
    state = replay_mod.ReplayState()
    chunks = list(iter_site_chunks([str(f)], 500))
    assert len(chunks) >= 5
    rows = pd.concat([replay_mod.plan_rows(c.reset_index(drop=True), s, state)
                      for c in chunks], ignore_index=True)
    assert len(state.solved) == 20 * 2 * 2
    alone, why = replay_mod._dose_distinct(s, ph, temp, alk)    # every row solved by itself
    assert (why == 0).all() and (rows["flag"] == "").all()
    np.testing.assert_allclose(rows["dose_mmol_l"], alone * 1000.0, rtol=1e-12)


def test_rows_that_are_all_new_waters_skip_the_memory_and_keep_their_doses(tmp_path):
    # pH to 4 decimals and an alkalinity each: no two rows the same water, so
    # no memory of waters is kept, and each row's dose is its own, alone.
    rng = np.random.default_rng(8)
    n = 1200
    ph = np.round(rng.uniform(9.0, 11.0, n), 4)
    alk = np.round(rng.uniform(120.0, 180.0, n), 2)
    ts = pd.Timestamp("2026-01-01") + pd.to_timedelta(np.arange(n), unit="min")
    f = tmp_path / "fresh.csv"
    pd.DataFrame({"timestamp": ts.strftime("%Y-%m-%d %H:%M"), "flow_m3_h": 10.0, "ph": ph,
                  "alkalinity": alk}).to_csv(f, index=False)
    s = load_scenario(SCEN)
    state = replay_mod.ReplayState()
    rows = pd.concat([replay_mod.plan_rows(c.reset_index(drop=True), s, state)
                      for c in iter_site_chunks([str(f)], 400)], ignore_index=True)
    assert len(state.solved) == 0
    temp = np.full(n, s.water.temperature_c)
    alone, why = replay_mod._dose_distinct(s, ph, temp, alk)
    ok = why == 0
    assert ok.mean() > 0.9
    np.testing.assert_allclose(rows["dose_mmol_l"].to_numpy()[ok], alone[ok] * 1000.0,
                               rtol=1e-12)


@settings(max_examples=60, deadline=None, derandomize=True)
@given(arrays(np.float64, st.integers(0, 60), elements=st.sampled_from([1.0, 2.0, np.nan, -0.0])),
       st.integers(0, 3))
def test_distinct_rows_finds_each_distinct_row_once(col, seed):
    other = np.random.default_rng(seed).choice([5.0, 6.0], col.size)
    first, which = replay_mod.distinct_rows([col, other])
    key = [(None if np.isnan(a) else a, b) for a, b in zip(col.tolist(), other.tolist())]
    # first appearances, in order, and every row pointing at its own kind
    expect_first = [k for k in range(len(key)) if key[k] not in key[:k]]
    assert first.tolist() == expect_first
    assert all(key[first[w]] == key[k] for k, w in enumerate(which.tolist()))


@settings(max_examples=100, deadline=None, derandomize=True)
@given(arrays(np.float64, st.integers(1, 50),
              elements=st.floats(-1.0, 1e9, allow_nan=False, allow_infinity=False)))
def test_histogram_bins_match_a_search_of_the_edges(rate):
    edges = totals_mod._EDGES
    rate = np.concatenate([rate, edges, np.nextafter(edges, -1.0)])
    expect = np.clip(np.searchsorted(edges, rate, side="right") - 1, 0, edges.size - 1)
    expect[rate <= 0] = 0
    assert (totals_mod._bin_of(rate) == expect).all()


@settings(max_examples=60, deadline=None, derandomize=True)
@given(st.lists(st.integers(0, 10 ** 11), min_size=1, max_size=40), st.sampled_from(["D", "h"]))
def test_calendar_groups_match_a_sort(seconds, unit):
    ts = np.datetime64("2020-01-01T00:00:00", "ns") + np.array(seconds).astype("timedelta64[s]")
    keys, which = totals_mod._calendar_groups(ts, unit)
    expect_keys, expect_which = np.unique(ts.astype(f"datetime64[{unit}]"), return_inverse=True)
    assert (keys == expect_keys).all() and (which == expect_which).all()


def test_a_bad_line_deep_in_the_file_is_named_by_its_file_line(tmp_path):
    lines = ["timestamp,flow,ph"] + [f"2026-01-01T{k // 60:02d}:{k % 60:02d},5,9" for k in range(1200)]
    lines[1000] += ",99"                     # file line 1001
    f = tmp_path / "deep.csv"
    f.write_text("\n".join(lines) + "\n")
    r = cli("replay", str(f), "--scenario", str(SCEN), "--chunk-rows", "1000")
    assert r.returncode == 2
    assert "line 1001," in r.stderr and len(r.stderr.strip().splitlines()) == 1


@pytest.mark.parametrize("col, expect", [
    (pd.Series([7, None], dtype="Int64"), [7.0, np.nan]),          # Parquet ints with a gap
    (pd.Series(["7.5", " 8", "x", None], dtype=object), [7.5, 8.0, np.nan, np.nan]),
    (pd.Series([True, False]), [np.nan, np.nan]),                 # not readings at all
    (pd.Series([9.25, np.inf]), [9.25, np.inf]),                  # inf is flagged later
])
def test_a_column_of_any_type_reads_as_numbers(col, expect):
    np.testing.assert_array_equal(replay_mod.as_numbers(col), np.array(expect))
