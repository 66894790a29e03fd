"""Issue 28 regressions: bad and hostile input from outside, each test named
after the reproducer it guards (replay, titration, fleet, scenario, shift
log, output files, Tankside).

The promise: exit 0 with finite output, or exit 2 with one line naming the
file (or option) and what is allowed; no traceback; nothing written or
replaced on failure; no cell a spreadsheet runs, no byte a terminal obeys.
"""

from __future__ import annotations

import time
from pathlib import Path

import pytest

from tests.test_robustness import _csv, _one_line, _strict_json, run

ROOT = Path(__file__).resolve().parents[1]
FLOW = str(ROOT / "scenarios" / "food-acetate-stream.toml")      # caustic, raises pH


# ----------------------------------------------------------------- replay --
@pytest.mark.parametrize("stamp", ["1600-01-01T00:00", "2300-01-01T00:00+01:00",
                                   "1600-01-01 00:00:00.123456789"])
def test_r01_dates_outside_the_clock_are_flagged_rows(tmp_path, stamp):
    # A year-1600 stamp wrapped round to 2184 on a nanosecond clock (or
    # raised OutOfBoundsDatetime): now the row is not planned, and says why.
    data = _csv(tmp_path, f"timestamp,flow,ph\n{stamp},5,4\n2026-01-01T00:01,5,4\n"
                "2026-01-01T00:02:00.123456789,5,4.1\n")
    code, out, err = run("replay", data, "--scenario", FLOW, "--json")
    assert code == 0, err
    d = _strict_json(out)
    assert d["not_planned"]["bad_timestamp"]["rows"] == 1 and d["rows_planned"] == 2
    assert d["first"].startswith("2026-01-01 00:01") and d["last"].startswith("2026-01-01 00:02")


@pytest.mark.parametrize("column", ["flow", "ph"])
def test_r02_numbers_of_hundreds_of_digits_are_flagged_rows(tmp_path, column):
    big = "9" * 320
    row = f"2026-01-01T00:00,{big},4\n" if column == "flow" else f"2026-01-01T00:00,5,-{big}\n"
    data = _csv(tmp_path, "timestamp,flow,ph\n" + row + "2026-01-01T00:01,5,4\n")
    code, out, err = run("replay", data, "--scenario", FLOW, "--json")
    assert code == 0, err
    flags = _strict_json(out)["not_planned"]
    assert flags == ({"flow_implausible": flags.get("flow_implausible")} if column == "flow"
                     else {"ph_out_of_range": flags.get("ph_out_of_range")})
    assert list(flags.values())[0]["rows"] == 1


def test_r03_parquet_text_that_is_not_utf8_names_the_column(tmp_path):
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    import numpy as np
    raw = b"2026-01-01T00:00\xff\xfe"
    offsets = pa.py_buffer(np.array([0, len(raw)], dtype=np.int32).tobytes())
    stamps = pa.Array.from_buffers(pa.string(), 1, [None, offsets, pa.py_buffer(raw)])
    f = tmp_path / "log.parquet"
    pq.write_table(pa.table({"timestamp": stamps, "flow": [5.0], "ph": [4.0]}), f)
    code, _, err = run("replay", str(f), "--scenario", FLOW)
    assert code == 2
    _one_line(err, str(f), "timestamp", "UTF-8")


def test_r04_a_megabyte_timestamp_cell_is_read_in_linear_time(tmp_path):
    # 1.1 MB in one cell took 80 s (superlinear parsing). The bound below is
    # generous (a slow machine reads the file in well under a second now);
    # it fails only on the old superlinear behaviour.
    data = _csv(tmp_path, "timestamp,flow,ph\n2026-01-01T00:00" + "1" * 1_100_000
                + ",5,4\n2026-01-01T00:01,5,4\n")
    start = time.perf_counter()
    code, out, err = run("replay", data, "--scenario", FLOW, "--json")
    assert time.perf_counter() - start < 30
    assert code == 0, err
    assert _strict_json(out)["not_planned"]["bad_timestamp"]["rows"] == 1


def test_r05_the_95th_percentile_never_passes_the_maximum(tmp_path):
    data = _csv(tmp_path, "timestamp,flow,ph\n2026-01-01T00:00,10,4\n2026-01-01T00:01,20.9,4\n")
    code, out, err = run("replay", data, "--scenario", FLOW, "--json")
    assert code == 0, err
    rate = _strict_json(out)["dose_rate"]
    assert rate["p5_nonzero"] <= rate["p95"] <= rate["max"]
    assert rate["max"] == pytest.approx(2.09 * rate["p5_nonzero"], rel=0.03)


def test_r06_the_row_file_never_echoes_infinity(tmp_path):
    data = _csv(tmp_path, "timestamp,flow,ph,temperature\n2026-01-01T00:00,inf,4,20\n"
                "2026-01-01T00:01,5,-inf,20\n2026-01-01T00:02,5,4,inf\n2026-01-01T00:03,5,4,20\n")
    out_csv = tmp_path / "rows.csv"
    code, _, err = run("replay", data, "--scenario", FLOW, "--csv", str(out_csv))
    assert code == 0, err
    text = out_csv.read_text()
    assert "inf" not in text.lower().replace("infinite", "")
    rows = [r for r in text.splitlines() if not r.startswith("#")][1:]
    assert [r.split(",")[-1] for r in rows] == ["flow_implausible", "ph_out_of_range",
                                                 "temperature_out_of_range", ""]


# -------------------------------------------------------------- titration --
def _jar(tmp_path, phs, step=1.0, name="jar.csv") -> str:
    return _csv(tmp_path, "ml,pH\n" + "".join(f"{i * step:g},{p}\n" for i, p in enumerate(phs)),
                name)


@pytest.mark.parametrize("scenario", ["lime-acid-batch.toml", "magnesia-acid-rinse.toml"])
def test_r07_lime_and_magnesia_scale_by_two_equivalents(tmp_path, scenario):
    # Ca(OH)2 and Mg(OH)2 each neutralise two equivalents of acid per mole
    # (stoichiometry): 11 meq/L of titrant to the aim is 5.5 mmol/L of product.
    jar = _jar(tmp_path, [3, 3.5, 4, 5, 6, 7, 8, 9, 10, 10.5])
    code, out, err = run("titration", jar, "--sample-ml", "50", "--titrant", "0.1 M NaOH",
                         "--scenario", str(ROOT / "scenarios" / scenario), "--json")
    assert code == 0, err
    d = _strict_json(out)["direct"]
    assert d["dose_mmol_per_l"] == pytest.approx(d["titrant_eq_per_l_effluent"] * 1000 / 2)


def test_r07_an_oxidant_is_not_a_ph_reagent(tmp_path):
    text = (ROOT / "scenarios" / "acid-rinse-caustic.toml").read_text().replace(
        'id = "caustic-50"', 'id = "peroxide-35"')
    path = tmp_path / "px.toml"
    path.write_text(text)
    code, _, err = run("plan", str(path))
    assert code == 2
    _one_line(err, str(path), "reagent.id", "oxidant")


def test_r08_a_flat_curve_is_one_line(tmp_path):
    jar = _jar(tmp_path, [5, 5, 5, 5, 5])
    code, _, err = run("titration", jar, "--sample-ml", "50", "--titrant", "0.1 M NaOH")
    assert code == 2
    _one_line(err, jar, "the pH does not move")


def test_r09_a_field_over_the_csv_limit_is_one_line(tmp_path):
    jar = _csv(tmp_path, "ml,pH\n0,3\n1," + "4" * 140_000 + "\n2,5\n", "jar.csv")
    code, _, err = run("titration", jar, "--sample-ml", "50", "--titrant", "0.1 M NaOH")
    assert code == 2
    _one_line(err, jar, "not a readable CSV")


def test_r10_a_fit_that_cannot_explain_the_curve_gives_no_model_dose(tmp_path):
    # 0.05 mL of 0.1 M caustic cannot take 50 mL from pH 3 to 13 (it is 5
    # µmol against 5 mmol needed): no water fits, so no model dose is given.
    jar = _jar(tmp_path, [3, 13, 13.1, 13.2, 13.3, 13.4], step=0.01)
    code, out, err = run("titration", jar, "--sample-ml", "50", "--titrant", "0.1 M NaOH",
                         "--fit", "spectrum", "--json")
    assert code == 0 and err == "", err
    d = _strict_json(out)
    assert d["model"]["plan"] is None and d["spectrum"]["rms_ph"] > 0.3
    assert any("no model dose" in w for w in d["warnings"])
    assert any("final word" in c for c in d["cautions"])
    code, out, err = run("titration", jar, "--sample-ml", "50", "--titrant", "0.1 M NaOH",
                         "--fit", "spectrum")
    assert code == 0 and "model fit       no dose" in out and "final word" in out


# ------------------------------------------------------------------ fleet --
def test_r11_a_bad_fleet_file_is_refused_before_the_cluster_starts(tmp_path):
    (tmp_path / "empty.csv").write_text("")
    fleet = tmp_path / "fleet.toml"
    fleet.write_text(f'[sites.north]\nscenario = "{FLOW}"\ndata = ["*.csv"]\n')
    from tests.helpers import run_cli
    r = run_cli("replay", "--fleet", str(fleet), "--workers", "2")
    assert r.returncode == 2 and r.stdout == ""
    assert r.stderr.strip().splitlines() == [f"dosing: error: {tmp_path}/empty.csv: "
                                             "the file is empty"]


# --------------------------------------------------------------- scenario --
@pytest.mark.parametrize("molarity, refused", [(0.001, True), (0.05, False)])
def test_r12_a_product_that_outweighs_the_water(tmp_path, molarity, refused):
    # 0.001 mol/L NaOH would need 5 L per L of this water: refused; at
    # 0.05 mol/L the product is 10 % of the tank: planned with that dilution
    # and warned (the pH after is the forward solve of the diluted water).
    text = (ROOT / "scenarios" / "acid-rinse-caustic.toml").read_text().replace(
        'id = "caustic-50"', f'compound = "NaOH"\nmolarity_mol_l = {molarity}')
    path = tmp_path / "weak.toml"
    path.write_text(text)
    code, out, err = run("plan", str(path), "--json")
    if refused:
        assert code == 2
        _one_line(err, str(path), "reagent", "more than the water itself")
        return
    assert code == 0, err
    d = _strict_json(out)
    litres = d["dose"]["litres_product"]
    assert 0.05 < litres / 40_000 < 0.2 and d["ph_end"] == pytest.approx(7.0, abs=1e-6)
    assert any("adds 10% to the volume" in w for w in d["warnings"])


# -------------------------------------------------------------- shift log --
SCEN = str(ROOT / "scenarios" / "acid-rinse-caustic.toml")


def _log(tmp_path, *operators: str) -> str:
    db = str(tmp_path / "log.sqlite")
    for op in operators:
        code, _, err = run("log", "add", SCEN, "--operator", op, "--db", db)
        assert code == 0, err
    return db


def _poke(db: str, find: bytes, offset: int, value: int) -> None:
    data = bytearray(Path(db).read_bytes())
    at = data.find(find)
    assert at > 0
    data[at + offset] = value
    Path(db).write_bytes(data)


def test_r13_a_control_byte_in_a_stored_plan_is_read_round(tmp_path):
    db = _log(tmp_path, "a", "b", "c")
    _poke(db, b'"ph_start"', 2, 0x01)          # inside a key of entry 1's plan
    import sqlite3
    assert sqlite3.connect(db).execute("PRAGMA quick_check").fetchone()[0] == "ok"
    for argv in (["log", "list"], ["log", "show", "1"],
                 ["log", "export", "--csv", str(tmp_path / "x.csv")]):
        code, out, err = run(*argv, "--db", db)
        assert code == 0 and "Traceback" not in err, err
    assert (tmp_path / "x.csv").read_text().count("\n") > 3


def test_r13_random_bytes_over_the_log_never_crash_a_reader(tmp_path):
    import random
    import shutil
    base = _log(tmp_path, "a", "b", "c", "d")
    size = Path(base).stat().st_size
    rng = random.Random(7)
    for k in range(30):
        db = str(tmp_path / f"c{k}.sqlite")
        shutil.copy(base, db)
        data = bytearray(Path(db).read_bytes())
        at = rng.randrange(100, size - 16)
        for j in range(rng.choice([1, 4, 16])):
            data[at + j] = rng.randrange(256)
        Path(db).write_bytes(data)
        for argv in (["log", "list"], ["log", "show", "2"],
                     ["log", "export", "--csv", str(tmp_path / f"c{k}.csv")]):
            code, out, err = run(*argv, "--db", db)
            assert code in (0, 2) and "Traceback" not in err, (k, argv, err)
            if code == 2:
                _one_line(err, db)


def test_r14_cells_a_spreadsheet_would_run_are_neutralised(tmp_path):
    # OWASP, "CSV Injection" (2023): a cell starting with = + - @ tab or CR
    # is a formula to a spreadsheet; a leading quote makes it text.
    db = str(tmp_path / "log.sqlite")
    code, _, err = run("log", "add", SCEN, "--operator", '=HYPERLINK("http://x","y")',
                       "--note=@SUM(1+1)", "--dosed", "16.5", "--ph-after", "6.9",
                       "--db", db)
    assert code == 0, err
    code, _, err = run("log", "follow-up", "1", "--ph-after", "7.1", "--note=-0.5",
                       "--operator", "\tx", "--db", db)
    assert code == 0, err
    out = tmp_path / "x.csv"
    code, _, err = run("log", "export", "--csv", str(out), "--db", db)
    assert code == 0, err
    import csv
    rows = list(csv.DictReader(out.open()))
    assert rows[0]["operator"] == "'=HYPERLINK(\"http://x\",\"y\")"
    assert rows[0]["note"] == "'@SUM(1+1)" and rows[1]["note"] == "'-0.5"
    from dosing.report.numbers import csv_text
    assert csv_text("\t=1") == "'\t=1" and csv_text("\r=1") == "'\r=1"
    assert csv_text(-0.5) == -0.5 and csv_text("pH 7") == "pH 7"
    assert float(rows[0]["dosed_kg"]) == 16.5 and float(rows[1]["ph_after"]) == 7.1
    for r in rows:
        for cell in r.values():
            assert not cell.startswith(("=", "+", "@", "\t", "\r")) and (
                not cell.startswith("-") or float(cell) < 0)


def test_r15_control_characters_are_shown_escaped_and_stored_as_given(tmp_path):
    db = str(tmp_path / "log.sqlite")
    evil = "ev\x1b[2Jil\x07\x00"
    code, out, _ = run("log", "add", SCEN, "--operator", evil, "--note", "\x1b]0;x\x07",
                       "--db", db)
    assert code == 0 and "\x1b" not in out and "ev\\x1b[2Jil\\x07" in out
    for argv in (["log", "list", "--wide"], ["log", "show", "1"]):
        code, out, _ = run(*argv, "--db", db)
        assert code == 0 and "\x1b" not in out and "\x07" not in out and "\\x1b" in out
    from dosing.io.shiftlog import ShiftLog
    with ShiftLog(db, writable=False) as log:
        assert log.get(1).operator == evil.replace("\x00", "\x00")


@pytest.mark.parametrize("schema", ["ours-id-foreign-entries", "ours-id-version-0-table"])
def test_r16_a_file_whose_schema_is_not_the_logs_is_never_written(tmp_path, schema):
    import sqlite3
    from dosing.io.shiftlog_file import APPLICATION_ID
    db = tmp_path / "other.sqlite"
    con = sqlite3.connect(db)
    con.execute(f"PRAGMA application_id = {APPLICATION_ID}")
    if schema == "ours-id-foreign-entries":
        con.execute("PRAGMA user_version = 1")
        con.execute("CREATE TABLE entries (x TEXT)")
    else:
        con.execute("CREATE TABLE customers (name TEXT)")
    con.commit()
    con.close()
    before = db.read_bytes()
    code, _, err = run("log", "add", SCEN, "--operator", "a", "--db", str(db))
    assert code == 2
    _one_line(err, str(db), "another program", "not changed")
    assert db.read_bytes() == before


def test_r17_a_full_disk_is_said_as_such(tmp_path, monkeypatch):
    # SQLite reports SQLITE_FULL as "database or disk is full"; the write
    # is simulated failing so (no small file system in CI).
    db = _log(tmp_path, "a")
    import sqlite3
    from dosing.io import shiftlog

    real = shiftlog.ShiftLog._insert

    class Full:
        """The log's connection, failing as SQLite does when the disk fills."""

        def __init__(self, db):
            self._real = db

        def __getattr__(self, name):
            return getattr(self._real, name)

        def execute(self, sql, *a):
            if sql.startswith("INSERT"):
                raise sqlite3.OperationalError("database or disk is full")
            return self._real.execute(sql, *a)

    def full(self, row):
        self._db = Full(self._db)
        return real(self, row)
    monkeypatch.setattr(shiftlog.ShiftLog, "_insert", full)
    code, _, err = run("log", "add", SCEN, "--operator", "b", "--db", db)
    assert code == 2
    _one_line(err, db, "disk holding the log is full", "nothing was written")
    assert "damaged" not in err and ".recover" not in err


# ---------------------------------------------------------------- outputs --
def _plot_png(tmp_path) -> Path:
    out = tmp_path / "ours.png"
    code, _, err = run("plan", SCEN, "--plot", str(out))
    assert code == 0, err
    return out


@pytest.mark.parametrize("case", ["csv-onto-its-log", "csv-onto-its-data", "plot-onto-scenario",
                                  "plot-onto-jar", "foreign-file", "symlink"])
def test_r18_an_output_never_clobbers(tmp_path, case):
    import hashlib
    data = _csv(tmp_path, "timestamp,flow,ph\n2026-01-01T00:00,5,4\n2026-01-01T00:01,5,4.1\n")
    db = _log(tmp_path, "a")
    jar = _jar(tmp_path, [3, 4, 5, 6, 7, 8, 9, 10])
    scen = tmp_path / "s.png"                  # a scenario someone named .png
    scen.write_text(Path(SCEN).read_text())
    foreign = tmp_path / "notes.csv"
    foreign.write_text("my own notes\n")
    link = tmp_path / "link.png"
    link.symlink_to(scen)
    argv, victim, words = {
        "csv-onto-its-log": (["log", "export", "--db", db, "--csv", db + ".csv"], None, ()),
        "csv-onto-its-data": (["replay", data, "--scenario", FLOW, "--csv", data], data,
                              ("--csv", "inputs")),
        "plot-onto-scenario": (["plan", str(scen), "--plot", str(scen)], scen,
                               ("--plot", "inputs")),
        "plot-onto-jar": (["titration", jar, "--sample-ml", "50", "--titrant", "0.1 M NaOH",
                           "--plot", jar.replace(".csv", ".png")], None, ()),
        "foreign-file": (["replay", data, "--scenario", FLOW, "--csv", str(foreign)], foreign,
                         ("--csv", "not written by this program", "--force")),
        "symlink": (["plan", SCEN, "--plot", str(link)], scen, ("--plot", "symbolic link")),
    }[case]
    if case == "csv-onto-its-log":         # the log itself named as the export
        Path(db + ".csv").symlink_to(db)
        victim, words = db, ("--csv", "inputs")
    if case == "plot-onto-jar":           # the titration data file named as the plot
        jar_png = jar.replace(".csv", ".png")
        Path(jar_png).write_bytes(Path(jar).read_bytes())
        argv[1] = jar_png
        victim, words = jar_png, ("--plot", "inputs")
    digest = hashlib.sha256(Path(victim).read_bytes()).hexdigest()
    code, out, err = run(*argv)
    assert code == 2
    _one_line(err, *words)
    assert hashlib.sha256(Path(victim).read_bytes()).hexdigest() == digest


def test_r18_our_own_outputs_are_replaced_and_force_replaces_the_rest(tmp_path):
    png = _plot_png(tmp_path)
    code, _, err = run("plan", SCEN, "--plot", str(png))           # ours: replaced
    assert code == 0, err
    data = _csv(tmp_path, "timestamp,flow,ph\n2026-01-01T00:00,5,4\n2026-01-01T00:01,5,4.1\n")
    out = tmp_path / "rows.csv"
    for _ in range(2):
        code, _, err = run("replay", data, "--scenario", FLOW, "--csv", str(out))
        assert code == 0, err
    mine = tmp_path / "mine.csv"
    mine.write_text("keep me\n")
    code, _, err = run("replay", data, "--scenario", FLOW, "--csv", str(mine), "--force")
    assert code == 0 and "final word" in mine.read_text()
    link, target = tmp_path / "l.png", tmp_path / "t.txt"
    target.write_text("target")
    link.symlink_to(target)
    code, _, err = run("plan", SCEN, "--plot", str(link), "--force")
    assert code == 0, err
    assert target.read_text() == "target" and not link.is_symlink()   # the link replaced


# ---------------------------------------------------------------- Tankside --
def test_r19_tankside_plans_nothing_for_a_file_it_could_not_open(tmp_path):
    import asyncio
    from tui.app import make_app
    bad = tmp_path / "bad.toml"
    bad.write_text('title = "x"\n[effluent]\nph = 19\n')

    async def main():
        app = make_app(str(bad), show_timing=False)
        async with app.run_test(size=(100, 30)) as pilot:
            for _ in range(3):
                await pilot.pause()
                await app.workers.wait_for_complete()
            assert app.plan is None and "did not open" in app.status
            assert "bad.toml" in app.sub_title and app.path is None
            from tui.widgets.dose import DosePanel
            assert "NOTHING PLANNED" in app.query_one(DosePanel).plain_text
            await pilot.press("end", "backspace", "4")      # the operator starts anew
            for _ in range(3):
                await pilot.pause()
                await app.workers.wait_for_complete()
            assert app.plan is not None and app.sub_title == "unsaved"
    asyncio.run(main())


# ------------------------------------------------------------------- fuzz --
# Bounded in CI (derandomized); DOSING_FUZZ_EXAMPLES=2000 searches fresh
# random inputs each run (see DEVELOPERS.md).
from hypothesis import given, strategies as st  # noqa: E402

from tests.test_robustness import _CELL, _FUZZ, replay_holds  # noqa: E402

_TEXT = st.text(alphabet=st.characters(min_codepoint=0, max_codepoint=0x2FF), max_size=24)


@pytest.mark.fuzz
@_FUZZ
@given(st.lists(st.tuples(st.one_of(st.none(), _TEXT, st.datetimes().map(str)),
                          st.one_of(st.none(), st.floats(), _TEXT),
                          st.one_of(st.none(), st.floats(), st.integers(-10**18, 10**18))),
                min_size=1, max_size=10))
def test_fuzz_replay_parquet(tmp_path, rows):
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    cols = list(zip(*rows))
    table = pa.table({"timestamp": pa.array([None if v is None else str(v) for v in cols[0]]),
                      "flow": pa.array([None if v is None else str(v) for v in cols[1]]),
                      "ph": pa.array(list(cols[2]), type=pa.float64())
                      if all(v is None or isinstance(v, float) for v in cols[2])
                      else pa.array([None if v is None else str(v) for v in cols[2]])})
    path = tmp_path / "fuzz.parquet"
    pq.write_table(table, path)
    replay_holds(path)


@pytest.mark.fuzz
@_FUZZ
@given(_TEXT, _TEXT)
def test_fuzz_shift_log_text_fields(tmp_path, operator, note):
    import csv
    import uuid
    db = str(tmp_path / f"{uuid.uuid4().hex}.sqlite")
    code, out, err = run("log", "add", SCEN, "--operator", operator, f"--note={note}",
                         "--db", db)
    if code != 0:
        assert code == 2
        _one_line(err)
        return
    for argv in (["log", "list"], ["log", "show", "1"]):
        code, out, err = run(*argv, "--db", db)
        assert code == 0, err
        assert not any(c in out for c in "\x1b\x07\x00\r\x9b")
    export = tmp_path / f"{uuid.uuid4().hex}.csv"
    code, _, err = run("log", "export", "--db", db, "--csv", str(export))
    assert code == 0, err
    row = next(csv.DictReader(export.open(newline="")))
    for key in ("operator", "note"):
        assert not row[key].startswith(("=", "+", "-", "@", "\t", "\r"))


_OUTPUT = st.sampled_from(["new", "ours", "foreign", "input", "link", "folder", "log"])


@pytest.mark.fuzz
@_FUZZ
@given(st.sampled_from(["plan", "replay", "sweep", "titration", "export"]), _OUTPUT,
       st.booleans())
def test_fuzz_output_paths(tmp_path, command, kind, force):
    import hashlib
    import uuid
    work = tmp_path / uuid.uuid4().hex
    work.mkdir()
    data = _csv(work, "timestamp,flow,ph\n2026-01-01T00:00,5,4\n2026-01-01T00:01,5,4.1\n")
    jar = _jar(work, [3, 4, 5, 6, 7, 8, 9, 10])
    db = str(work / "log.sqlite")
    assert run("log", "add", SCEN, "--operator", "a", "--db", db)[0] == 0
    ext = ".png" if command in ("plan", "titration") else ".csv"
    out = work / f"out{ext}"
    source = {"plan": SCEN, "replay": data, "sweep": SCEN, "titration": jar, "export": db}
    if kind == "ours":
        assert run(*_argv(command, data, jar, db, out))[0] == 0
    elif kind == "foreign":
        out.write_text("someone's file")
    elif kind in ("input", "log"):
        out.symlink_to(db if kind == "log" else source[command])
    elif kind == "link":
        (work / "elsewhere").write_text("keep")
        out.symlink_to(work / "elsewhere")
    elif kind == "folder":
        out.mkdir()
    watched = [Path(p) for p in (SCEN, data, jar, db)] + [work / "elsewhere"] * (kind == "link")
    before = {p: hashlib.sha256(p.read_bytes()).hexdigest() for p in watched}
    code, _, err = run(*_argv(command, data, jar, db, out), *(["--force"] * force))
    assert code in (0, 2) and "Traceback" not in err, err
    if code == 2:
        _one_line(err)
    assert {p: hashlib.sha256(p.read_bytes()).hexdigest() for p in watched} == before
    if kind == "foreign" and not force:
        assert code == 2 and out.read_text() == "someone's file"


def _argv(command, data, jar, db, out) -> list[str]:
    return {"plan": ["plan", SCEN, "--plot", str(out)],
            "replay": ["replay", data, "--scenario", FLOW, "--csv", str(out)],
            "sweep": ["sweep", SCEN, "--csv", str(out)],
            "titration": ["titration", jar, "--sample-ml", "50", "--titrant", "0.1 M NaOH",
                          "--plot", str(out)],
            "export": ["log", "export", "--db", db, "--csv", str(out)]}[command]


_WORDS = st.one_of(_CELL, _TEXT, st.sampled_from(
    ["--json", "--plot", "--csv", "--db", "--units", "us", "--force", "--sizes", "1,2",
     "--strengths", "20", "--with", "lime", "--sample-ml", "50", "--titrant", "0.1 M NaOH",
     "--scenario", "--since", "2026-01-01", "--tank", "T-3", "--dosed", "3,4", "--id",
     "--ph-after", "7", "--operator", "x", "--chunk-rows", "1000", "--fit", "spectrum",
     "--wide", "--dosed-l", "11",
     "@SCEN", "@DATA", "@JAR", "@DB", "@NEW", "1", "-1", "1e999"]))


@pytest.mark.fuzz
@_FUZZ
@given(st.sampled_from([["plan"], ["sweep"], ["replay"], ["titration"], ["log", "add"],
                        ["log", "list"], ["log", "show"], ["log", "export"],
                        ["log", "follow-up"], ["reagents"], ["solutes"]]),
       st.lists(_WORDS, max_size=7))
def test_fuzz_no_command_ever_ends_in_a_traceback(tmp_path, command, words):
    # The property over the whole command line: any generated arguments end
    # in exit 0, or exit 2 with one line on stderr; never a traceback.
    import uuid
    work = tmp_path / uuid.uuid4().hex
    work.mkdir()
    files = {"@SCEN": SCEN, "@NEW": str(work / "new.out"),
             "@DATA": _csv(work, "timestamp,flow,ph\n2026-01-01T00:00,5,4\n"),
             "@JAR": _jar(work, [3, 4, 5, 6, 7, 8, 9, 10]), "@DB": str(work / "log.sqlite")}
    argv = command + [files.get(w, w) for w in words]
    code, out, err = run(*argv)
    assert code in (0, 2), (argv, code, err)
    assert "Traceback" not in err, (argv, err)
    if code == 2:
        assert len(err.strip().splitlines()) == 1, (argv, err)
