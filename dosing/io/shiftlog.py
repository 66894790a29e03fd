"""The shift log: an append-only record of dosing decisions, in SQLite.

Each entry is one row of ``entries`` and is never changed. Three kinds:

* ``decision`` - what was measured (the full scenario), what was planned
  (the JSON of ``dosing plan``), what was actually dosed, the pH that
  followed if known, who, when, engine version;
* ``correction`` - a new decision that replaces an earlier one, pointing to
  it with ``refers_to``; both stay and both are shown;
* ``follow_up`` - a pH reading (and note) attached later to an entry.

Reliability: WAL journal, ``synchronous=FULL``, one transaction per entry
(``BEGIN IMMEDIATE``), a busy timeout so two writers queue instead of
failing, triggers that refuse UPDATE and DELETE. A file at the log path
that is not our SQLite log is refused and never written to.

Schema versions live in ``PRAGMA user_version``; :data:`MIGRATIONS` takes a
log from any older version to :data:`SCHEMA_VERSION` in order, each step in
one transaction.
"""

from __future__ import annotations

import json
import os
import sqlite3
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Iterator

from ..errors import InputError, ShiftLogError

__all__ = ["ShiftLogError", "Entry", "ShiftLog", "default_log_path", "SCHEMA_VERSION",
           "MIGRATIONS", "ENV_VAR", "parse_since", "Bias", "BIAS_MIN_ENTRIES"]

#: Fewest usable decisions on a tank before its bias is estimated (common practice:
#: fewer say more about chance than about the model).
BIAS_MIN_ENTRIES = 5
#: A bias this large (either way) makes a bench titration due (common practice).
BIAS_DUE = 0.10

#: Environment variable that overrides the default log location.
ENV_VAR = "DOSING_LOG_DB"
#: "NDOS" as an integer, written to PRAGMA application_id.
APPLICATION_ID = 0x4E444F53
SCHEMA_VERSION = 1
_SQLITE_MAGIC = b"SQLite format 3\x00"

_V1 = """
CREATE TABLE entries (
    id             INTEGER PRIMARY KEY AUTOINCREMENT,
    kind           TEXT NOT NULL CHECK (kind IN ('decision', 'correction', 'follow_up')),
    utc            TEXT NOT NULL,
    operator       TEXT NOT NULL,
    site           TEXT NOT NULL DEFAULT '',
    tank           TEXT NOT NULL DEFAULT '',
    title          TEXT NOT NULL DEFAULT '',
    reagent        TEXT NOT NULL DEFAULT '',
    scenario_toml  TEXT,
    plan_json      TEXT,
    planned_kg     REAL,
    dosed_kg       REAL,
    ph_start       REAL,
    ph_planned     REAL,
    ph_after       REAL,
    note           TEXT NOT NULL DEFAULT '',
    refers_to      INTEGER REFERENCES entries (id),
    engine_version TEXT NOT NULL
);
CREATE INDEX entries_tank ON entries (tank);
CREATE INDEX entries_utc ON entries (utc);
CREATE INDEX entries_refers ON entries (refers_to);
CREATE TRIGGER entries_no_update BEFORE UPDATE ON entries
BEGIN SELECT RAISE(ABORT, 'the shift log is append-only: entries are never changed'); END;
CREATE TRIGGER entries_no_delete BEFORE DELETE ON entries
BEGIN SELECT RAISE(ABORT, 'the shift log is append-only: entries are never deleted'); END;
"""

#: (version reached, SQL script) in order. The next schema adds a row here.
MIGRATIONS: tuple[tuple[int, str], ...] = ((1, _V1),)


def default_log_path() -> Path:
    """Where the log lives: ``$DOSING_LOG_DB``, else the per-user data folder."""
    if os.environ.get(ENV_VAR):
        return Path(os.environ[ENV_VAR])
    from platformdirs import user_data_dir
    return Path(user_data_dir("neutral-dosing", appauthor=False)) / "shiftlog.sqlite"


def parse_since(text: str) -> str:
    """A date or date-time (ISO 8601, local time if no zone) to a UTC string."""
    try:
        when = datetime.fromisoformat(text.strip())
    except ValueError:
        raise InputError("since", f"{text!r} is not a date; write 2026-11-30 or "
                         "2026-11-30T06:00") from None
    if when.tzinfo is None:
        when = when.astimezone()
    return when.astimezone(timezone.utc).isoformat(timespec="seconds")


@dataclass(frozen=True)
class Entry:
    """One row of the log."""

    id: int
    kind: str
    utc: str
    operator: str
    site: str
    tank: str
    title: str
    reagent: str
    scenario_toml: str | None
    plan_json: str | None
    planned_kg: float | None
    dosed_kg: float | None
    ph_start: float | None
    ph_planned: float | None
    ph_after: float | None
    note: str
    refers_to: int | None
    engine_version: str

    @property
    def local_time(self) -> str:
        """The entry's time in the machine's local zone."""
        return datetime.fromisoformat(self.utc).astimezone().isoformat(timespec="seconds")

    @property
    def dosed_ratio(self) -> float | None:
        """Actually dosed over planned [-], when both are known."""
        if self.dosed_kg is None or not self.planned_kg:
            return None
        return self.dosed_kg / self.planned_kg

    @property
    def plan(self) -> dict[str, Any] | None:
        """The stored plan JSON as data."""
        return None if self.plan_json is None else json.loads(self.plan_json)


@dataclass(frozen=True)
class Bias:
    """How far the dose actually needed on a tank runs from the dose planned."""

    tank: str
    entries: int                 #: decisions used
    mean_ratio: float            #: dose given over dose planned, mean [-]
    sd_ratio: float              #: its standard deviation [-]

    @property
    def due(self) -> bool:
        """Whether a bench titration is due (the model misses by 10 % or more)."""
        return abs(self.mean_ratio - 1.0) >= BIAS_DUE

    def words(self) -> str:
        """The bias in one sentence an operator reads."""
        more = self.mean_ratio - 1.0
        way = "more" if more >= 0 else "less"
        return (f"on {self.tank} the last {self.entries} decisions that landed in the window "
                f"needed {abs(more):.0%} ± {self.sd_ratio:.0%} {way} product than planned"
                + ("; a bench titration is due" if self.due else ""))


_COLUMNS = ("id", "kind", "utc", "operator", "site", "tank", "title", "reagent",
            "scenario_toml", "plan_json", "planned_kg", "dosed_kg", "ph_start",
            "ph_planned", "ph_after", "note", "refers_to", "engine_version")


class ShiftLog:
    """An open shift log. Use as a context manager, or call :meth:`close`.

    ``writable=False`` opens the file read-only (``list``, ``show`` and
    ``export`` work on a log in a read-only folder and never change a byte).
    A log opened for writing is first checked on a read-only connection: a
    file of another program, or one that fails SQLite's ``quick_check``, is
    refused before anything is written. ``lock_wait_s`` is how long a writer
    waits for another program's write lock before giving up.
    """

    def __init__(self, path: str | Path | None = None, *, writable: bool = True,
                 lock_wait_s: float = 30.0):
        self.path = Path(path) if path is not None else default_log_path()
        self.writable = writable
        self.lock_wait_s = lock_wait_s
        #: Ids that could not be read from a damaged log by the last reading call.
        self.unreadable: list[int] = []
        self._check_file()
        if not writable:
            self._db = self._open_read_only()
            return
        if self.path.exists() and self.path.stat().st_size > 0:
            probe = self._open_read_only()
            probe.close()
        self.path.parent.mkdir(parents=True, exist_ok=True)
        try:
            self._db = sqlite3.connect(str(self.path), timeout=lock_wait_s,
                                       isolation_level=None)
            self._db.execute(f"PRAGMA busy_timeout = {int(lock_wait_s * 1000)}")
            self._prepare_with_retry(lock_wait_s)
        except sqlite3.DatabaseError as err:
            raise self._locked_error() if _is_lock(err) else ShiftLogError(
                f"{self.path}: cannot be used as a shift log ({err}); "
                "the file was not changed") from None

    # ------------------------------------------------------------ opening --
    def _check_file(self) -> None:
        p = self.path
        if p.is_dir():
            raise ShiftLogError(f"{p}: is a folder; give a file path for the log")
        if not self.writable and not p.exists():
            raise ShiftLogError(f"{p}: no shift log there yet (nothing has been recorded "
                                "at this path); `dosing log add` starts one")
        if p.exists() and not p.is_file():
            raise ShiftLogError(f"{p}: is not a regular file; give a file path for the log")
        if p.exists() and p.stat().st_size > 0:
            with open(p, "rb") as fh:
                head = fh.read(16)
            if head != _SQLITE_MAGIC:
                raise ShiftLogError(f"{p}: is not a shift log (not an SQLite database); "
                                    "it was not changed. Give another path with --db "
                                    f"or {ENV_VAR}")

    def _open_read_only(self) -> sqlite3.Connection:
        """A read-only connection, checked to be our log and (for a writer) undamaged.

        In a read-only folder SQLite cannot make the WAL index beside the
        file; the log is then read as immutable (nobody can write it there).
        """
        from urllib.parse import quote
        uri = "file:" + quote(str(self.path.resolve()))
        last: sqlite3.Error | None = None
        for mode in ("?mode=ro", "?mode=ro&immutable=1"):
            db = sqlite3.connect(uri + mode, uri=True, timeout=self.lock_wait_s,
                                 isolation_level=None)
            try:
                self._identify(db)
                if self.writable:
                    self._refuse_damaged(db)
                return db
            except ShiftLogError:
                db.close()
                raise
            except sqlite3.DatabaseError as err:
                db.close()
                last = err
                if "unable to open" not in str(err) and "readonly" not in str(err):
                    break
        raise ShiftLogError(f"{self.path}: cannot be read as a shift log ({last}); the file "
                            "was not changed. If it is a damaged log, try the sqlite3 tool's "
                            ".recover command on a copy, or restore a backup")

    def _identify(self, db: sqlite3.Connection) -> int:
        """Refuse another program's file or a newer schema; return the schema version."""
        # One read transaction, so the three reads see one state of the file:
        # read apart, a new log being set up by another writer could show its
        # tables but not yet its id, and be taken for another program's file.
        db.execute("BEGIN")
        try:
            app_id = db.execute("PRAGMA application_id").fetchone()[0]
            version = db.execute("PRAGMA user_version").fetchone()[0]
            tables = db.execute("SELECT count(*) FROM sqlite_master").fetchone()[0]
        finally:
            db.execute("COMMIT")
        if app_id not in (0, APPLICATION_ID) or (app_id == 0 and (tables or version)):
            raise ShiftLogError(f"{self.path}: is an SQLite database of another program, "
                                "not a shift log; it was not changed")
        if version > SCHEMA_VERSION:
            raise ShiftLogError(f"{self.path}: was written by a newer version of the "
                                f"planner (schema {version}, this one reads up to "
                                f"{SCHEMA_VERSION}); upgrade before using it")
        return version

    def _refuse_damaged(self, db: sqlite3.Connection) -> None:
        """Refuse to write into a log that fails SQLite's page-level check."""
        rows = [r[0] for r in db.execute("PRAGMA quick_check(1)").fetchall()]
        if rows != ["ok"]:
            first = [ln for ln in "\n".join(rows).splitlines() if not ln.startswith("***")]
            raise ShiftLogError(f"{self.path}: is damaged ({(first or rows)[0]}); nothing "
                                f"was written and the file was not changed. {_RECOVER}")

    def _locked_error(self) -> ShiftLogError:
        who = _holders(self.path)
        return ShiftLogError(
            f"{self.path}: another program has held the log's write lock for over "
            f"{self.lock_wait_s:g} s ({who}); nothing was written. Try again once it "
            "has finished, or close it")

    def _prepare_with_retry(self, seconds: float = 30.0) -> None:
        """Prepare, waiting while another process holds the file.

        Switching a new file to WAL needs the file to itself and SQLite does
        not wait for that on its own; two writers starting at once would
        otherwise see "database is locked".
        """
        import random
        import time
        deadline = time.monotonic() + seconds
        while True:
            try:
                self._prepare()
                return
            except sqlite3.OperationalError as err:
                if not _is_lock(err) or time.monotonic() > deadline:
                    raise
                time.sleep(0.02 + random.random() * 0.05)

    def _prepare(self) -> None:
        db = self._db
        version = self._identify(db)
        db.execute("PRAGMA journal_mode = WAL")
        db.execute("PRAGMA synchronous = FULL")
        db.execute("PRAGMA foreign_keys = ON")
        for target, script in MIGRATIONS:
            if version >= target:
                continue
            db.execute("BEGIN IMMEDIATE")
            try:
                # Another process may have migrated while we waited.
                now = db.execute("PRAGMA user_version").fetchone()[0]
                if now < target:
                    for stmt in _statements(script):
                        db.execute(stmt)
                    db.execute(f"PRAGMA application_id = {APPLICATION_ID}")
                    db.execute(f"PRAGMA user_version = {target}")
                db.execute("COMMIT")
            except BaseException:
                db.execute("ROLLBACK")
                raise
            version = target

    def close(self) -> None:
        self._db.close()

    def __enter__(self) -> "ShiftLog":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    # ------------------------------------------------------------ writing --
    def _insert(self, row: dict[str, Any]) -> int:
        from ..version import __version__
        if not self.writable:
            raise ShiftLogError(f"{self.path}: was opened read-only; nothing was written")
        row = dict(row, utc=datetime.now(timezone.utc).isoformat(timespec="microseconds"),
                   engine_version=__version__)
        keys = ", ".join(row)
        marks = ", ".join("?" for _ in row)
        db = self._db
        try:
            db.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as err:
            if _is_lock(err):
                raise self._locked_error() from None
            raise
        try:
            if row.get("refers_to") is not None:
                self._require(int(row["refers_to"]))
            cur = db.execute(f"INSERT INTO entries ({keys}) VALUES ({marks})",
                             tuple(row.values()))
            db.execute("COMMIT")
        except BaseException:
            db.execute("ROLLBACK")
            raise
        return int(cur.lastrowid)

    def record_decision(self, *, operator: str, scenario_toml: str, plan: dict[str, Any],
                        dosed_kg: float | None = None, ph_after: float | None = None,
                        note: str = "", corrects: int | None = None) -> int:
        """Append a decision (or a correction of entry ``corrects``); returns its id."""
        if not operator.strip():
            raise InputError("operator", "give the operator's name")
        for name, v, lo, hi in (("dosed", dosed_kg, 0.0, 1e9), ("ph_after", ph_after, 0, 14)):
            if v is not None and not (lo <= v <= hi):
                raise InputError(name, f"{v:g} is out of range; allowed: {lo:g} to {hi:g}")
        dose = plan.get("dose", {})
        planned = dose.get("kg_product", dose.get("kg_product_per_h"))
        return self._insert({
            "kind": "correction" if corrects is not None else "decision",
            "operator": operator.strip(), "site": plan.get("site", ""),
            "tank": plan.get("tank", ""), "title": plan.get("title", ""),
            "reagent": plan.get("reagent", ""), "scenario_toml": scenario_toml,
            "plan_json": json.dumps(plan, ensure_ascii=False), "planned_kg": planned,
            "dosed_kg": dosed_kg, "ph_start": plan.get("ph_start"),
            "ph_planned": plan.get("ph_end"), "ph_after": ph_after, "note": note,
            "refers_to": corrects})

    def record_follow_up(self, entry_id: int, *, ph_after: float, operator: str = "",
                         note: str = "") -> int:
        """Attach a later pH reading to entry ``entry_id``; returns the new id."""
        if not (0 <= ph_after <= 14):
            raise InputError("ph_after", f"{ph_after:g} is not a pH; allowed: 0 to 14")
        target = self.get(entry_id)
        return self._insert({"kind": "follow_up", "operator": operator.strip() or "-",
                             "site": target.site, "tank": target.tank, "title": target.title,
                             "reagent": target.reagent, "ph_after": ph_after, "note": note,
                             "refers_to": entry_id})

    # ------------------------------------------------------------ reading --
    def _rows(self, sql: str, args: tuple | list = ()) -> list[tuple]:
        """Rows of a query; a damaged page becomes a one-line error, not a traceback."""
        try:
            return self._db.execute(sql, args).fetchall()
        except sqlite3.OperationalError as err:
            if "no such table" in str(err):
                return []                       # a new, empty log opened read-only
            raise self._damaged(err) from None
        except sqlite3.DatabaseError as err:
            raise self._damaged(err) from None

    def _damaged(self, err: Exception) -> ShiftLogError:
        return ShiftLogError(f"{self.path}: is damaged ({err}); the file was not changed. "
                             f"{_RECOVER}")

    def _require(self, entry_id: int) -> None:
        if not _valid_id(entry_id) or not self._rows("SELECT 1 FROM entries WHERE id = ?",
                                                     (entry_id,)):
            raise ShiftLogError(f"no entry {entry_id} in {self.path}")

    def get(self, entry_id: int) -> Entry:
        """One entry by id."""
        rows = (self._rows(f"SELECT {', '.join(_COLUMNS)} FROM entries WHERE id = ?",
                           (entry_id,)) if _valid_id(entry_id) else [])
        if not rows:
            raise ShiftLogError(f"no entry {entry_id} in {self.path}")
        return Entry(*rows[0])

    def related(self, entry_id: int) -> list[Entry]:
        """Entries that refer to ``entry_id`` (corrections, follow-ups), oldest first."""
        rows = self._rows(f"SELECT {', '.join(_COLUMNS)} FROM entries "
                          "WHERE refers_to = ? ORDER BY id", (entry_id,))
        return [Entry(*r) for r in rows]

    def entries(self, *, since_utc: str | None = None, tank: str | None = None) -> Iterator[Entry]:
        """All entries, oldest first, filtered by time and tank.

        On a damaged log the entries that can still be read are returned one
        by one and the ids that cannot are listed in :attr:`unreadable`.
        """
        select = f"SELECT {', '.join(_COLUMNS)} FROM entries"
        where, args = " WHERE 1", []
        if since_utc:
            where += " AND utc >= ?"
            args.append(since_utc)
        if tank:
            where += " AND tank = ?"
            args.append(tank)
        self.unreadable = []
        try:
            found = [Entry(*r) for r in self._rows(select + where + " ORDER BY id", args)]
        except ShiftLogError:
            found = [e for e in self._salvage(select + " WHERE id = ?")
                     if (not since_utc or e.utc >= since_utc) and (not tank or e.tank == tank)]
        return iter(found)

    def _salvage(self, sql: str) -> list[Entry]:
        """Read a damaged log id by id, listing in :attr:`unreadable` what cannot be read.

        Ids run from 1 without gaps (entries are never deleted), so an id
        that gives an error or no row is an entry lost to the damage.
        """
        top = 0
        for probe in ("SELECT seq FROM sqlite_sequence WHERE name = 'entries'",
                      "SELECT max(id) FROM entries"):
            try:
                top = max(top, int(self._db.execute(probe).fetchone()[0] or 0))
            except (sqlite3.DatabaseError, TypeError):
                continue
        if top == 0:
            raise self._damaged("no entry can be read")
        found = []
        for entry_id in range(1, top + 1):
            try:
                row = self._db.execute(sql, (entry_id,)).fetchone()
                found.append(Entry(*row))
            except (sqlite3.DatabaseError, TypeError):
                self.unreadable.append(entry_id)
        return found

    def count(self) -> int:
        rows = self._rows("SELECT count(*) FROM entries")
        return rows[0][0] if rows else 0

    def latest_ph(self, entry: Entry) -> float | None:
        """The most recent pH after an entry: its own or its last follow-up's."""
        try:
            rows = self._rows("SELECT ph_after FROM entries WHERE refers_to = ? AND "
                              "kind = 'follow_up' ORDER BY id DESC LIMIT 1", (entry.id,))
        except ShiftLogError:
            if not self.unreadable:
                raise
            rows = []                           # damaged log: its own reading only
        return rows[0][0] if rows else entry.ph_after

    def bias(self, tank: str, last: int = 24) -> Bias | None:
        """The model's bias on ``tank`` from its last ``last`` usable decisions.

        Usable: a decision or correction that nothing later corrects, with
        the product actually given and a pH after (its own or a follow-up)
        inside the plan's window, so what was given is what the tank needed.
        None with fewer than :data:`BIAS_MIN_ENTRIES`.
        """
        everything = list(self.entries(tank=tank))
        corrected = {e.refers_to for e in everything if e.kind == "correction"}
        ratios = []
        for e in reversed(everything):
            if e.kind == "follow_up" or e.id in corrected or not e.planned_kg \
                    or e.dosed_kg is None:
                continue
            ph = self.latest_ph(e)
            window = (e.plan or {}).get("target") or {}
            if ph is None or not window.get("ph_min", -1) <= ph <= window.get("ph_max", 15):
                continue
            ratios.append(e.dosed_kg / e.planned_kg)
            if len(ratios) == last:
                break
        if len(ratios) < BIAS_MIN_ENTRIES:
            return None
        import statistics
        return Bias(tank, len(ratios), statistics.fmean(ratios), statistics.stdev(ratios))

    def tanks(self) -> list[str]:
        """The tanks named in the log."""
        return [r[0] for r in self._rows("SELECT DISTINCT tank FROM entries WHERE tank != '' "
                                         "ORDER BY tank")]

    def frame(self, *, since_utc: str | None = None, tank: str | None = None):
        """The log as a pandas DataFrame (one row per entry, plan JSON kept)."""
        import pandas as pd
        rows = [dict(zip(_COLUMNS, (getattr(e, c) for c in _COLUMNS)),
                     local_time=e.local_time, dosed_ratio=e.dosed_ratio,
                     latest_ph_after=self.latest_ph(e),
                     cautions=" | ".join((e.plan or {}).get("cautions", [])))
                for e in self.entries(since_utc=since_utc, tank=tank)]
        return pd.DataFrame(rows, columns=list(_COLUMNS) + ["local_time", "dosed_ratio",
                                                          "latest_ph_after", "cautions"])


_RECOVER = ("Copy what can still be read with `dosing log export --csv FILE` (or the "
            "sqlite3 tool's .recover command), then move the damaged file aside and start "
            "a new log (or restore a backup)")


def _valid_id(entry_id: int) -> bool:
    """An id SQLite can hold (a larger one cannot be in the log)."""
    return 0 < entry_id < 2 ** 63


def _is_lock(err: Exception) -> bool:
    text = str(err).lower()
    return "locked" in text or "busy" in text


def _holders(path: Path) -> str:
    """Which processes have the log open (Linux /proc; best effort)."""
    target = {str(path.resolve()), str(path.resolve()) + "-wal", str(path.resolve()) + "-shm"}
    found = []
    proc = Path("/proc")
    if not proc.is_dir():
        return "the holder could not be found on this system"
    for pid_dir in proc.iterdir():
        if not pid_dir.name.isdigit() or int(pid_dir.name) == os.getpid():
            continue
        try:
            if any(os.readlink(fd) in target for fd in (pid_dir / "fd").iterdir()):
                name = (pid_dir / "comm").read_text().strip()
                found.append(f"process {pid_dir.name} ({name})")
        except OSError:
            continue
    return "held by " + ", ".join(found) if found else "the holder could not be found"


def _statements(script: str) -> list[str]:
    """Split a schema script into statements (triggers kept whole)."""
    out, buf = [], []
    for line in script.strip().splitlines():
        buf.append(line)
        text = "\n".join(buf).strip()
        if text.endswith(";") and (not text.upper().startswith("CREATE TRIGGER")
                                   or text.upper().endswith("END;")):
            out.append(text)
            buf = []
    return out
