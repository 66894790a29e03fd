"""Issue 17: replay of several files and of a fleet of sites on Dask.

The promise checked: a record cut into parts (byte ranges of a file, files of
a site) and planned part by part, in any order and on any worker, gives the
figures of one pass over the whole record, the stuck-sensor run and the time
step carried across part and file boundaries. The reference is this
project's own one-pass replay (its dose per row is checked against outside
sources in test_replay.py); the data are invented for the test.
"""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st

from dosing.io.fleet import dask_client, fleet_report, load_fleet, replay_sites
from dosing.planning.replay import ReplayState, plan_part, plan_rows, stitch, nominal_step
from dosing.planning.replay_totals import ReplayTotals
from dosing.io.replay_io import file_parts, iter_chunks, read_part, run_replay
from dosing.io.scenario import load_scenario
from tests.test_robustness import _one_line, _strict_json, run

ROOT = Path(__file__).resolve().parents[1]
ACID = ROOT / "scenarios" / "flow-metering-pump.toml"        # acid, lowers pH
CAUSTIC = ROOT / "scenarios" / "food-acetate-stream.toml"    # caustic, raises pH


def _log(path: Path, start: str, n: int, seed: int, *, stuck_head: int = 0,
         stuck_tail: int = 0, bad_rows=(), units_row: bool = False) -> Path:
    """An invented one-minute log; stuck pH at the head or tail, unreadable
    timestamps at ``bad_rows``, optionally a units row under the header."""
    rng = np.random.default_rng(seed)
    i = np.arange(n)
    ts = (pd.Timestamp(start) + pd.to_timedelta(i, unit="min")).strftime(
        "%Y-%m-%d %H:%M").to_numpy().astype(object)
    ph = (10.0 + 0.3 * np.sin(i / 50) + rng.normal(0, 0.05, n)).round(3)
    if stuck_head:
        ph[:stuck_head] = 10.5
    if stuck_tail:
        ph[-stuck_tail:] = 10.5
    for b in bad_rows:
        ts[b] = "not a time"
    frame = pd.DataFrame({"timestamp": ts, "flow_m3_h": (20 + rng.normal(0, 1, n)).round(3),
                          "ph": ph})
    text = frame.to_csv(index=False)
    if units_row:
        head, rest = text.split("\n", 1)
        text = f"{head}\n-,m3/h,-\n{rest}"
    path.write_text(text)
    return path


_SAME = ("rows", "rows_planned", "rows_not_planned", "not_planned", "first", "last",
         "daily")


def _assert_same_report(one: dict, other: dict) -> None:
    """Counts, flags and dates equal; sums equal to rounding (added in another order)."""
    for key in _SAME:
        if key == "daily":
            assert one[key]["days"] == other[key]["days"]
            continue
        assert one[key] == other[key], key
    pairs = [(one["total"][k], other["total"][k]) for k in ("kg_product", "litres_product",
                                                              "cost")]
    pairs += [(one["dose_rate"][k], other["dose_rate"][k])
              for k in ("mean", "p95", "max", "p5_nonzero", "turndown")]
    pairs += [(one[k], other[k]) for k in ("hours_covered", "hours_outside_window",
                                           "days_of_supply")]
    for a, b in pairs:
        assert (a is None and b is None) or b == pytest.approx(a, rel=1e-12)


# ------------------------------------------------------- parts, no Dask --
def _frame(n: int, seed: int) -> pd.DataFrame:
    """Rows with every state-carrying feature: stuck runs, bad and repeated
    timestamps, gaps, missing pH."""
    rng = np.random.default_rng(seed)
    t = pd.Timestamp("2026-03-01") + pd.to_timedelta(np.cumsum(rng.choice(
        [60, 60, 60, 0, 1200], n, p=[0.7, 0.1, 0.1, 0.05, 0.05])), unit="s")
    ts = pd.Series(t).where(rng.random(n) > 0.03)
    ph = (9.5 + rng.normal(0, 0.2, n)).round(2)
    for s in rng.integers(0, n, 4):
        ph[s:s + int(rng.integers(20, 90))] = 9.9
    ph[rng.random(n) < 0.02] = np.nan
    return pd.DataFrame({"timestamp": ts, "flow_m3_h": rng.uniform(5, 30, n).astype(str),
                         "ph": ph.astype(str)})


@settings(max_examples=25, deadline=None, derandomize=True)
@given(st.integers(0, 10_000), st.lists(st.integers(1, 599), max_size=8))
def test_parts_stitched_equal_one_pass(seed, cuts):
    scenario = load_scenario(ACID)
    frame = _frame(600, seed)
    one = ReplayTotals()
    one.add(plan_rows(frame, scenario, ReplayState()))
    edges = [0, *sorted(set(cuts)), len(frame)]
    step = nominal_step(frame)
    parts = [plan_part(frame.iloc[a:b], scenario, step, "kg/h")
             for a, b in zip(edges[:-1], edges[1:])]
    whole = ReplayTotals()
    stitch(parts, scenario, step, whole)
    assert (whole.rows, whole.planned, dict(whole.flags)) == (one.rows, one.planned,
                                                             dict(one.flags))
    assert whole.kg == pytest.approx(one.kg, rel=1e-12)
    assert whole.seconds == pytest.approx(one.seconds, rel=1e-12)
    assert whole.seconds_outside == pytest.approx(one.seconds_outside, rel=1e-12)
    assert (whole.hist == one.hist).all()
    assert whole.daily_kg == pytest.approx(one.daily_kg, rel=1e-12)


def test_a_stuck_run_across_two_parts_is_flagged_as_in_one_pass():
    # 40 stuck rows at the end of one part and 30 at the start of the next:
    # 70 in a row, so the 11 from the 60th on are flagged.
    scenario = load_scenario(ACID)
    frame = _frame(300, 3)
    frame["ph"] = [str(9.0 + 0.01 * (k % 7)) for k in range(300)]
    frame.loc[110:179, "ph"] = "10.5"
    frame["timestamp"] = pd.Timestamp("2026-01-01") + pd.to_timedelta(np.arange(300), unit="min")
    parts = [plan_part(frame.iloc[:150], scenario, 60.0, "kg/h"),
             plan_part(frame.iloc[150:], scenario, 60.0, "kg/h")]
    totals = ReplayTotals()
    stitch(parts, scenario, 60.0, totals)
    assert totals.flags["ph_flatline"] == 70 - 59


@pytest.mark.parametrize("newline", ["\n", "\r\n"])
def test_file_parts_hold_every_row_once(tmp_path, newline):
    path = _log(tmp_path / "a.csv", "2026-01-01", 2000, 1, units_row=True)
    path.write_bytes(path.read_text().replace("\n", newline).encode())
    whole = pd.concat(list(iter_chunks(str(path))), ignore_index=True)
    for size in (997, 4096, 10 ** 6):
        parts = file_parts(str(path), size)
        got = pd.concat([read_part(p) for p in parts], ignore_index=True)
        pd.testing.assert_frame_equal(got, whole)
        assert len(parts) == math.ceil((path.stat().st_size - len(parts[0].header)) / size)


# ----------------------------------------------------------- on Dask --
@pytest.fixture(scope="module")
def client():
    with dask_client(workers=2) as c:
        yield c


@pytest.fixture(scope="module")
def fleet(tmp_path_factory):
    """Four sites, two files each; stuck runs and bad timestamps at the file
    boundaries; one site on caustic, one with a units row."""
    d = tmp_path_factory.mktemp("fleet")
    (d / "logs").mkdir()
    for s in range(4):
        _log(d / "logs" / f"site{s}-1-jan.csv", "2026-01-01", 3000, s, stuck_tail=40,
             bad_rows=(2998, 2999) if s == 1 else (), units_row=s == 3)
        _log(d / "logs" / f"site{s}-2-feb.csv", "2026-01-03 02:00", 2500, 10 + s, stuck_head=30,
             bad_rows=(0, 1) if s == 2 else ())
    sites = "".join(textwrap.dedent(f"""
        [sites.plant-{s}]
        scenario = "{CAUSTIC if s == 2 else ACID}"
        data = ["logs/site{s}-*.csv"]
        """) for s in range(4))
    (d / "fleet.toml").write_text('title = "four invented plants"\n' + sites)
    return d / "fleet.toml"


def test_fleet_equals_each_site_alone(client, fleet):
    sites = load_fleet(str(fleet))
    assert [len(s.files) for s in sites] == [2, 2, 2, 2]
    results = replay_sites(sites, client, part_bytes=20_000, chunk_rows=1000)
    as_data = {name: (r.to_dict(), totals) for name, (r, totals) in results.items()}
    for site in sites:
        alone = run_replay(list(site.files), site.scenario, chunk_rows=1000)[0].to_dict()
        _assert_same_report(alone, as_data[site.name][0])
    # the run of 40 + 30 stuck rows across the file boundary: 11 flagged
    assert as_data["plant-0"][0]["not_planned"]["ph_flatline"]["rows"] == 11
    report = fleet_report(str(fleet), results, 2).to_dict()
    acid = report["products"]["hydrochloric-32"]
    assert acid["sites"] == ["plant-0", "plant-1", "plant-3"]
    assert acid["kg_product"] == pytest.approx(
        sum(as_data[s][0]["total"]["kg_product"] for s in acid["sites"]), rel=1e-12)
    assert set(report["products"]) == {"hydrochloric-32", "caustic-25"}


def test_two_files_read_as_one_record(tmp_path):
    a = _log(tmp_path / "a.csv", "2026-01-01", 1500, 1, stuck_tail=40)
    b = _log(tmp_path / "b.csv", "2026-01-02 01:00", 1500, 2, stuck_head=30)
    both = tmp_path / "both.csv"
    both.write_text(a.read_text() + b.read_text().split("\n", 1)[1])
    code, out_two, err = run("replay", str(a), str(b), "--scenario", str(ACID), "--json")
    assert code == 0, err
    code, out_one, err = run("replay", str(both), "--scenario", str(ACID), "--json")
    assert code == 0, err
    two, one = _strict_json(out_two), _strict_json(out_one)
    assert two["files"] == [str(a), str(b)]
    _assert_same_report(one, two)
    assert two["not_planned"]["ph_flatline"]["rows"] == 11


def test_fleet_command_prints_sites_and_products(fleet):
    code, out, err = run("replay", "--fleet", str(fleet), "--workers", "2", "--part-mb",
                         "0.02", "--json")
    assert code == 0, err
    d = _strict_json(out)
    assert list(d["sites"]) == [f"plant-{s}" for s in range(4)]
    assert d["rows"] == 4 * 5500 and d["workers"] == 2
    assert "licensed engineer" in d["cautions"][-1]
    code, text, err = run("replay", "--fleet", str(fleet), "--workers", "2")
    assert code == 0, err
    assert "FLEET REPLAY" in text and "plant-3" in text and "licensed engineer" in text
    assert "hydrochloric acid 32 % [hydrochloric-32], 3 sites" in text


# ------------------------------------------------------------- refusals --
@pytest.mark.parametrize("body, key", [
    ("", "sites"),
    ("[sites.a]\nscenario = 'x.toml'\n", "sites.a.data"),
    ("[sites.a]\ndata = ['*.csv']\n", "sites.a.scenario"),
    ("[sites.a]\nscenario = 's.toml'\ndata = ['*.csv']\npump = 3\n", "sites.a.pump"),
    ("[sites.a]\nscenario = 's.toml'\ndata = 'none-*.csv'\n", "sites.a.data"),
    ("[sites.a]\nscenario = 'batch.toml'\ndata = ['d.csv']\n", "sites.a.scenario"),
    ("color = 'red'\n", "color"),
])
def test_bad_fleet_file_is_one_line(tmp_path, body, key):
    (tmp_path / "s.toml").write_text(ACID.read_text())
    (tmp_path / "batch.toml").write_text(
        (ROOT / "scenarios" / "acid-rinse-caustic.toml").read_text())
    (tmp_path / "d.csv").write_text("timestamp,flow,ph\n2026-01-01T00:00,5,9\n")
    (tmp_path / "f.toml").write_text(body)
    code, out, err = run("replay", "--fleet", str(tmp_path / "f.toml"))
    assert code == 2 and out == ""
    _one_line(err, key)


@pytest.mark.parametrize("extra, word", [
    (["--csv", "x.csv"], "--csv"), (["--plot", "x.png"], "--plot"),
    (["--scenario", str(ACID)], "--scenario"), (["d.csv"], "data files"),
    (["--workers", "0"], "--workers"), (["--part-mb", "0"], "--part-mb"),
])
def test_fleet_refuses_single_site_options(fleet, tmp_path, extra, word):
    code, out, err = run("replay", "--fleet", str(fleet), *extra)
    assert code == 2 and out == ""
    _one_line(err, word)
    assert not (tmp_path / "x.csv").exists()


def test_replay_needs_data_or_fleet():
    code, _, err = run("replay", "--scenario", str(ACID))
    assert code == 2
    _one_line(err, "--fleet")


def test_glob_with_no_match_is_named(tmp_path):
    code, _, err = run("replay", str(tmp_path / "none-*.csv"), "--scenario", str(ACID))
    assert code == 2
    _one_line(err, "no file matches")


def test_workers_that_cannot_import_the_kernel_are_a_clear_error():
    # A remote cluster whose workers lack this package: refused before any
    # work is sent, naming the option and what to do.
    from dosing.errors import UsageError
    from dosing.io.fleet import _ready

    class NoKernel:
        def run(self, fn):
            raise ModuleNotFoundError("No module named 'dosing'")

    with pytest.raises(UsageError) as err:
        _ready(NoKernel(), "--scheduler")
    assert "--scheduler" in str(err.value) and "install this package" in str(err.value)


def test_fleet_runs_on_an_existing_cluster_named_by_its_scheduler(client, fleet):
    # The module's 2-worker cluster stands for a plant's own Dask cluster.
    address = client.scheduler.address
    code, out, err = run("replay", "--fleet", str(fleet), "--scheduler", address,
                         "--part-mb", "0.02", "--json")
    assert code == 0, err
    d = _strict_json(out)
    for site in load_fleet(str(fleet)):
        alone = run_replay(list(site.files), site.scenario)[0].to_dict()
        _assert_same_report(alone, d["sites"][site.name])


def test_a_scheduler_that_does_not_answer_is_one_line(fleet):
    code, out, err = run("replay", "--fleet", str(fleet), "--scheduler", "tcp://127.0.0.1:9")
    assert code == 2 and out == ""
    _one_line(err, "--scheduler", "tcp://127.0.0.1:9")
