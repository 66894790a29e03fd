"""The shift log: append-only, two writers, a killed writer, foreign files."""

import asyncio
import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pandas as pd
import pytest

from tests.helpers import run_cli

from dosing.errors import InputError
from dosing.io.shiftlog import SCHEMA_VERSION, ShiftLog, ShiftLogError, parse_since

ROOT = Path(__file__).resolve().parents[1]
SCEN = str(ROOT / "scenarios" / "cip-sulfuric.toml")
PLAN = {"title": "t", "site": "s", "tank": "T-1", "reagent": "caustic-50",
        "ph_start": 3.0, "ph_end": 7.0, "dose": {"kg_product": 10.0, "mmol_per_l": 5.0},
        "warnings": [], "cautions": ["final word"]}


cli = run_cli


def test_add_list_show_follow_up_and_correction(tmp_path):
    db = str(tmp_path / "log.sqlite")
    r = cli("log", "add", SCEN, "--operator", "A. Byrne", "--dosed", "33", "--db", db)
    assert r.returncode == 0, r.stderr
    assert "entry 1 (decision)" in r.stdout and "final word" in r.stdout
    assert cli("log", "follow-up", "1", "--ph-after", "7.8", "--db", db).returncode == 0
    r = cli("log", "add", SCEN, "--operator", "B. Lund", "--dosed", "30", "--corrects", "1",
            "--note", "misread scale", "--db", db)
    assert r.returncode == 0 and "corrects entry 1" in r.stdout
    r = cli("log", "show", "1", "--db", db)
    assert "CORRECTED by entry 3" in r.stdout and "follow-up 2" in r.stdout
    r = cli("log", "list", "--tank", "CIP-R2", "--db", db)
    lines = r.stdout.strip().splitlines()
    # header, rule, 3 entries, the two legends, blank, final word (two lines)
    assert len(lines) == 2 + 3 + 2 + 1 + 2
    assert lines[2].lstrip().startswith("1* ")            # entry 1 is corrected
    assert all(len(ln) <= 80 for ln in lines)
    assert "final word on any dose" in lines[-1]
    # Planned vs dosed ratio: the planned product is 30.0 kg (see the demo).
    with ShiftLog(db) as log:
        e = log.get(1)
        assert e.dosed_ratio == pytest.approx(33 / e.planned_kg)
        assert log.latest_ph(e) == 7.8
        assert e.plan["reagent"] == "sulfuric-98"
        assert "[effluent]" in e.scenario_toml
    out = tmp_path / "log.csv"
    r = cli("log", "export", "--csv", str(out), "--db", db)
    assert r.returncode == 0
    frame = pd.read_csv(out)
    assert list(frame["id"]) == [1, 2, 3]
    assert {"planned_kg", "dosed_kg", "dosed_ratio", "latest_ph_after"} <= set(frame.columns)


def test_entries_are_never_changed(tmp_path):
    db = tmp_path / "log.sqlite"
    with ShiftLog(db) as log:
        log.record_decision(operator="x", scenario_toml="", plan=PLAN)
    con = sqlite3.connect(db)
    with pytest.raises(sqlite3.DatabaseError, match="append-only"):
        con.execute("UPDATE entries SET dosed_kg = 1")
    with pytest.raises(sqlite3.DatabaseError, match="append-only"):
        con.execute("DELETE FROM entries")
    con.close()


def test_environment_variable_sets_the_location(tmp_path):
    db = tmp_path / "env.sqlite"
    env = dict(os.environ, DOSING_LOG_DB=str(db))
    r = cli("log", "add", SCEN, "--operator", "C", env=env)
    assert r.returncode == 0 and db.exists()


@pytest.mark.parametrize("args, says", [
    (("log", "show", "42"), "no entry 42"),
    (("log", "follow-up", "42", "--ph-after", "7"), "no entry 42"),
    (("log", "list", "--since", "last tuesday"), "not a date"),
    (("log", "follow-up", "1", "--ph-after", "19"), "not a pH"),
    (("log", "add", SCEN, "--operator", "X", "--corrects", "77"), "no entry 77"),
    (("log", "add", SCEN, "--operator", " "), "operator"),
    (("log", "add", SCEN, "--operator", "X", "--dosed", "-4"), "--dosed"),
])
def test_bad_requests_exit_2(tmp_path, args, says):
    db = str(tmp_path / "log.sqlite")
    with ShiftLog(db) as log:
        log.record_decision(operator="x", scenario_toml="", plan=PLAN)
    r = cli(*args, "--db", db)
    assert r.returncode == 2 and says in r.stderr and "Traceback" not in r.stderr
    with ShiftLog(db) as log:
        assert log.count() == 1


def test_corrupt_or_foreign_file_is_refused_and_untouched(tmp_path):
    junk = tmp_path / "notes.sqlite"
    junk.write_bytes(b"shift notes, not a database\n" * 10)
    before = junk.read_bytes()
    r = cli("log", "list", "--db", str(junk))
    assert r.returncode == 2 and "not a shift log" in r.stderr
    assert junk.read_bytes() == before
    foreign = tmp_path / "other.sqlite"
    con = sqlite3.connect(foreign)
    con.execute("CREATE TABLE stock (item TEXT)")
    con.commit()
    con.close()
    before = foreign.read_bytes()
    r = cli("log", "add", SCEN, "--operator", "X", "--db", str(foreign))
    assert r.returncode == 2 and "another program" in r.stderr
    assert foreign.read_bytes() == before
    # A header that says SQLite but a broken body.
    broken = tmp_path / "broken.sqlite"
    broken.write_bytes(b"SQLite format 3\x00" + b"\xff" * 5000)
    before = broken.read_bytes()
    r = cli("log", "list", "--db", str(broken))
    assert r.returncode == 2 and "Traceback" not in r.stderr
    assert broken.read_bytes() == before


def test_newer_schema_is_refused(tmp_path):
    db = tmp_path / "log.sqlite"
    with ShiftLog(db):
        pass
    con = sqlite3.connect(db)
    con.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    con.close()
    with pytest.raises(ShiftLogError, match="newer version"):
        ShiftLog(db)


def test_schema_is_versioned(tmp_path):
    with ShiftLog(tmp_path / "log.sqlite") as log:
        assert log._db.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
        assert log._db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"


WRITER = textwrap.dedent("""
    import sys
    from dosing.io.shiftlog import ShiftLog
    db, name, n = sys.argv[1], sys.argv[2], int(sys.argv[3])
    plan = {"tank": "T-1", "reagent": "caustic-50", "dose": {"kg_product": 1.0}}
    with ShiftLog(db) as log:
        for i in range(n):
            log.record_decision(operator=name, scenario_toml="", plan=plan, note=str(i))
            print(i, flush=True)
""")


def test_two_writers_at_once_lose_nothing(tmp_path):
    db = str(tmp_path / "log.sqlite")
    script = tmp_path / "writer.py"
    script.write_text(WRITER)
    procs = [subprocess.Popen([sys.executable, str(script), db, name, "300"], cwd=ROOT,
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE)
             for name in ("first", "second")]
    for p in procs:
        _, err = p.communicate(timeout=300)
        assert p.returncode == 0, err
    with ShiftLog(db) as log:
        rows = list(log.entries())
    assert len(rows) == 600
    for name in ("first", "second"):
        notes = sorted(int(e.note) for e in rows if e.operator == name)
        assert notes == list(range(300))


def test_a_killed_writer_leaves_every_committed_entry(tmp_path):
    db = str(tmp_path / "log.sqlite")
    script = tmp_path / "writer.py"
    script.write_text(WRITER)
    p = subprocess.Popen([sys.executable, str(script), db, "doomed", "100000"], cwd=ROOT,
                         stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    confirmed = 0
    deadline = time.time() + 60
    while confirmed < 200 and time.time() < deadline:
        line = p.stdout.readline()
        if line:
            confirmed += 1
    p.send_signal(signal.SIGKILL)
    p.wait(timeout=30)
    assert confirmed >= 200
    con = sqlite3.connect(db)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    con.close()
    with ShiftLog(db) as log:
        n = log.count()
        # Every entry the writer saw committed is there (it may have committed
        # one more before the kill landed).
        assert n >= confirmed
        notes = [int(e.note) for e in log.entries()]
        assert notes == list(range(n))
        log.record_decision(operator="next shift", scenario_toml="", plan=PLAN)
        assert log.count() == n + 1


def test_parse_since():
    assert parse_since("2026-11-30T06:00+00:00") == "2026-11-30T06:00:00+00:00"
    with pytest.raises(InputError):
        parse_since("soon")


def test_tankside_records_through_the_same_code(tmp_path):
    from tui.app import make_app
    from tui.screens.ask import RecordAnswer
    db = str(tmp_path / "log.sqlite")

    async def main():
        app = make_app(SCEN, db=db)
        async with app.run_test(size=(150, 45)) as pilot:
            await pilot.pause()
            await app.workers.wait_for_complete()      # planned in a worker thread
            app.record(RecordAnswer("D. Osei", 29.5, None, "split over two batches"))
            await pilot.pause()
            assert "recorded as entry 1" in app.status
    asyncio.run(main())
    with ShiftLog(db) as log:
        e = log.get(1)
        assert e.operator == "D. Osei" and e.dosed_kg == 29.5
        assert e.note == "split over two batches"
        assert e.plan["reagent"] == "sulfuric-98"


def test_the_export_says_what_its_kilograms_are(tmp_path):
    # Issue 29: planned_kg of a flow is a rate (kg/h); the export says which.
    db = str(tmp_path / "log.sqlite")
    flow = str(ROOT / "scenarios" / "food-acetate-stream.toml")
    assert cli("log", "add", SCEN, "--operator", "A", "--db", db).returncode == 0
    assert cli("log", "add", flow, "--operator", "A", "--dosed", "12", "--db", db).returncode == 0
    out = tmp_path / "x.csv"
    assert cli("log", "export", "--csv", str(out), "--db", db).returncode == 0
    frame = pd.read_csv(out)
    assert list(frame["kg_are"]) == ["kg per batch", "kg per hour"]
    assert frame["dosed_kg"].iloc[1] == 12.0


def test_what_was_dosed_may_be_given_in_litres(tmp_path):
    # Issue 29: --dosed-l records litres as kg by the product's density
    # (50 % caustic soda 1.5253 kg/L at 20 °C, Perry's Chemical Engineers'
    # Handbook as the catalogue cites it, from memory): 11.0 L is 16.78 kg.
    db = str(tmp_path / "log.sqlite")
    rinse = str(ROOT / "scenarios" / "acid-rinse-caustic.toml")
    r = cli("log", "add", rinse, "--operator", "A", "--dosed-l", "11", "--db", db)
    assert r.returncode == 0, r.stderr
    with ShiftLog(db, writable=False) as log:
        e = log.get(1)
    assert e.dosed_kg == pytest.approx(11.0 * 1.5253, rel=1e-9)
    lime = str(ROOT / "scenarios" / "lime-acid-batch.toml")
    r = cli("log", "add", lime, "--operator", "A", "--dosed-l", "11", "--db", db)
    assert r.returncode == 2 and "--dosed-l" in r.stderr and "kg" in r.stderr
