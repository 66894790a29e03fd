"""Shift-log faults (issue 12): a damaged log, another program's file, a
read-only log, ids SQLite cannot hold, a write lock held by someone else.

Every case ends in one line on stderr, exit code 2, and a log file that is
byte-identical afterwards; reading commands keep working where they can.
"""

import os
import sqlite3
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from tests.helpers import run_cli as cli

from dosing.io.shiftlog import ShiftLog, ShiftLogError

ROOT = Path(__file__).resolve().parents[1]
SCEN = str(ROOT / "scenarios" / "cip-sulfuric.toml")
PLAN = {"title": "t", "site": "s", "tank": "T-1", "reagent": "caustic-50",
        "ph_start": 3.0, "ph_end": 7.0, "dose": {"kg_product": 10.0, "mmol_per_l": 5.0},
        "warnings": [], "cautions": ["final word"]}
PAGE = 4096
READERS = (("log", "list"), ("log", "show", "3"), ("log", "export", "--csv", "{out}"))
WRITERS = (("log", "add", SCEN, "--operator", "X"),
           ("log", "follow-up", "3", "--ph-after", "7"))


def _log(path: Path, n: int = 40) -> Path:
    """A checkpointed log of ``n`` entries (one file, no WAL beside it)."""
    with ShiftLog(path) as log:
        for i in range(n):
            log.record_decision(operator="x", scenario_toml="", plan=PLAN, note=f"n{i}")
    con = sqlite3.connect(path)
    con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    con.close()
    for extra in ("-wal", "-shm"):
        Path(str(path) + extra).unlink(missing_ok=True)
    return path


def _smash(path: Path, start: int, stop: int) -> None:
    data = bytearray(path.read_bytes())
    data[start:stop] = b"\x5a" * (stop - start)
    path.write_bytes(bytes(data))


def _one_line_exit_2(r) -> None:
    assert r.returncode == 2, r.stderr
    assert "Traceback" not in r.stderr and len(r.stderr.strip().splitlines()) == 1


def test_damaged_data_page_refuses_writes_and_is_left_byte_identical(tmp_path):
    db = _log(tmp_path / "log.sqlite")
    _smash(db, PAGE + 8, 2 * PAGE - 100)          # page 2: the entries table's root
    before = db.read_bytes()
    for args in WRITERS:
        r = cli(*args, "--db", str(db))
        _one_line_exit_2(r)
        assert "is damaged" in r.stderr and "nothing was written" in r.stderr
        assert "export" in r.stderr                # says how to recover what can be read
        assert db.read_bytes() == before
    for args in READERS:
        r = cli(*(a.format(out=tmp_path / "out.csv") for a in args), "--db", str(db))
        assert r.returncode in (0, 2) and "Traceback" not in r.stderr
        assert db.read_bytes() == before


def test_damaged_leaf_page_lists_what_can_be_read(tmp_path):
    db = _log(tmp_path / "log.sqlite", n=200)
    con = sqlite3.connect(db)
    # A leaf of the entries table away from its root (SQLite's dbstat is not
    # always compiled in, so find one by its page type byte, 0x0D).
    pages = [i for i in range(3, len(db.read_bytes()) // PAGE)
             if db.read_bytes()[i * PAGE] == 0x0D]
    con.close()
    assert pages, "the test log should have leaf pages"
    target = pages[len(pages) // 2]
    _smash(db, target * PAGE + 8, target * PAGE + 40)
    before = db.read_bytes()
    with ShiftLog(db, writable=False) as log:
        rows = list(log.entries())
        assert log.unreadable and 0 < len(rows) < 200
        assert len(rows) + len(log.unreadable) == 200
    out = tmp_path / "out.csv"
    r = cli("log", "export", "--csv", str(out), "--db", str(db))
    assert r.returncode == 0 and "DAMAGED" in r.stdout and out.exists()
    r = cli("log", "list", "--db", str(db))
    assert r.returncode == 0 and "could not be read" in r.stdout
    assert db.read_bytes() == before


def test_damaged_root_page_is_one_line_for_every_command(tmp_path):
    db = _log(tmp_path / "log.sqlite")
    _smash(db, 100, PAGE - 8)                     # page 1: the schema itself
    before = db.read_bytes()
    for args in READERS + WRITERS:
        r = cli(*(a.format(out=tmp_path / "out.csv") for a in args), "--db", str(db))
        _one_line_exit_2(r)
        assert ".recover" in r.stderr
        assert db.read_bytes() == before


def test_foreign_sqlite_with_only_an_application_id_is_refused(tmp_path):
    gpkg = tmp_path / "map.gpkg"
    con = sqlite3.connect(gpkg)
    con.execute("PRAGMA application_id = 1196444487")     # 'GPKG'
    con.close()
    before = gpkg.read_bytes()
    for args in WRITERS[:1] + READERS[:1]:
        r = cli(*args, "--db", str(gpkg))
        _one_line_exit_2(r)
        assert "another program" in r.stderr
    assert gpkg.read_bytes() == before


def test_reading_opens_read_only(tmp_path):
    db = _log(tmp_path / "log.sqlite", n=3)
    before = db.read_bytes()
    with ShiftLog(db, writable=False) as log:
        assert log.count() == 3 and log.get(2).note == "n1"
        with pytest.raises(sqlite3.OperationalError, match="readonly"):
            log._db.execute("CREATE TABLE scratch (a)")
        with pytest.raises(ShiftLogError, match="read-only"):
            log.record_decision(operator="x", scenario_toml="", plan=PLAN)
    assert db.read_bytes() == before
    r = cli("log", "list", "--db", str(tmp_path / "missing.sqlite"))
    _one_line_exit_2(r)
    assert "no shift log there yet" in r.stderr
    assert not (tmp_path / "missing.sqlite").exists()


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0,
                    reason="root ignores file modes, so a read-only folder cannot be made")
def test_read_only_log_in_read_only_folder(tmp_path):
    folder = tmp_path / "ro"
    folder.mkdir()
    db = _log(folder / "log.sqlite", n=5)
    before = db.read_bytes()
    db.chmod(0o444)
    folder.chmod(0o555)
    try:
        for args in READERS:
            r = cli(*(a.format(out=tmp_path / "out.csv") for a in args), "--db", str(db))
            assert r.returncode == 0, r.stderr
        r = cli(*WRITERS[0], "--db", str(db))
        _one_line_exit_2(r)
        assert db.read_bytes() == before
    finally:
        folder.chmod(0o755)


@pytest.mark.parametrize("args", [("log", "show", "100000000000000000000"),
                                  ("log", "follow-up", "100000000000000000000",
                                   "--ph-after", "7"),
                                  ("log", "add", SCEN, "--operator", "X", "--corrects",
                                   "100000000000000000000"),
                                  ("log", "show", "-3")])
def test_ids_beyond_sqlite_integers_are_no_entry(tmp_path, args):
    db = _log(tmp_path / "log.sqlite", n=1)
    before = db.read_bytes()
    r = cli(*args, "--db", str(db))
    _one_line_exit_2(r)
    assert "no entry" in r.stderr
    assert db.read_bytes() == before


HOLDER = textwrap.dedent("""
    import sqlite3, sys, time
    con = sqlite3.connect(sys.argv[1], isolation_level=None)
    con.execute("BEGIN IMMEDIATE")
    print("held", flush=True)
    time.sleep(60)
""")


def test_a_write_lock_held_elsewhere_names_the_holder_and_writes_nothing(tmp_path):
    db = _log(tmp_path / "log.sqlite", n=2)
    holder = subprocess.Popen([sys.executable, "-c", HOLDER, str(db)],
                              stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "held"
        with ShiftLog(db, lock_wait_s=0.5) as log:
            with pytest.raises(ShiftLogError) as caught:
                log.record_decision(operator="x", scenario_toml="", plan=PLAN)
        text = str(caught.value)
        assert "nothing was written" in text and "0.5 s" in text
        if Path("/proc").is_dir():
            assert f"process {holder.pid}" in text
    finally:
        holder.kill()
        holder.wait()
    with ShiftLog(db, writable=False) as log:
        assert log.count() == 2


def test_a_log_being_set_up_by_another_writer_is_not_taken_for_a_foreign_file(tmp_path):
    # Two writers starting on a new file: the second read the file's id (0,
    # not yet set), then the first committed its tables, then the second
    # counted tables and refused "an SQLite database of another program"
    # (seen about once in 90 starts of six writers at once). The reads are
    # now one snapshot; here the first writer is made to commit between them.
    path = tmp_path / "log.sqlite"
    first = sqlite3.connect(path)
    first.execute("PRAGMA journal_mode = WAL")     # a new log: WAL, no tables yet
    first.close()
    reader = sqlite3.connect(path, isolation_level=None)

    class Interleaved:
        set_up = False

        def execute(self, sql):
            cursor = reader.execute(sql)
            if "application_id" in sql and not self.set_up:
                self.set_up = True
                ShiftLog(path).close()          # the other writer sets the log up now
            return cursor

    second = ShiftLog.__new__(ShiftLog)
    second.path = path
    assert second._identify(Interleaved()) == 0     # the empty file it first saw
    reader.close()
    with ShiftLog(path) as log:                     # and the log is ours, set up once
        assert list(log.entries()) == []
