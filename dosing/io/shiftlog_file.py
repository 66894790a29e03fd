"""The shift log's file: SQLite opened safely, its schema, its locks and its damage.

:class:`LogFile` opens the log the way every command needs it: a file of
another program, or one that fails SQLite's ``quick_check``, is refused
before anything is written; a read-only opening never changes a byte; a
writer waits for another program's write lock, then names its holder.
Schema versions live in ``PRAGMA user_version``; :data:`MIGRATIONS` takes a
log from any older version to :data:`SCHEMA_VERSION` in order, each step in
one transaction. The entries themselves are :mod:`dosing.io.shiftlog`'s.
"""

from __future__ import annotations

import os
import sqlite3
from pathlib import Path

from ..errors import ShiftLogError

__all__ = ["LogFile", "default_log_path", "SCHEMA_VERSION", "MIGRATIONS", "ENV_VAR",
           "APPLICATION_ID"]

#: Environment variable that overrides the default log location.
ENV_VAR = "DOSING_LOG_DB"


#: "NDOS" as an integer, written to PRAGMA application_id.
APPLICATION_ID = 0x4E444F53


SCHEMA_VERSION = 2


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


# Version 2: the site's accounts, their sessions, an append-only audit of
# sign-ins and records, and reviews of entries (dosing serve).
_V2 = """
CREATE TABLE accounts (
    name      TEXT PRIMARY KEY,
    role      TEXT NOT NULL CHECK (role IN ('operator', 'engineer', 'viewer')),
    hash      TEXT NOT NULL,
    created   TEXT NOT NULL,
    disabled  INTEGER NOT NULL DEFAULT 0
);
CREATE TABLE sessions (
    token_hash TEXT PRIMARY KEY,
    account    TEXT NOT NULL REFERENCES accounts (name),
    csrf       TEXT NOT NULL,
    created    TEXT NOT NULL,
    seen       TEXT NOT NULL,
    ended      INTEGER NOT NULL DEFAULT 0
);
CREATE TABLE audit (
    id       INTEGER PRIMARY KEY AUTOINCREMENT,
    utc      TEXT NOT NULL,
    account  TEXT NOT NULL,
    address  TEXT NOT NULL,
    action   TEXT NOT NULL,
    detail   TEXT NOT NULL DEFAULT ''
);
CREATE INDEX audit_account ON audit (account, action, utc);
CREATE INDEX audit_address ON audit (address, action, utc);
CREATE TRIGGER audit_no_update BEFORE UPDATE ON audit
BEGIN SELECT RAISE(ABORT, 'the audit is append-only: rows are never changed'); END;
CREATE TRIGGER audit_no_delete BEFORE DELETE ON audit
BEGIN SELECT RAISE(ABORT, 'the audit is append-only: rows are never deleted'); END;
CREATE TABLE reviews (
    id        INTEGER PRIMARY KEY AUTOINCREMENT,
    entry     INTEGER NOT NULL REFERENCES entries (id),
    utc       TEXT NOT NULL,
    reviewer  TEXT NOT NULL,
    note      TEXT NOT NULL DEFAULT ''
);
CREATE INDEX reviews_entry ON reviews (entry);
CREATE TRIGGER reviews_no_update BEFORE UPDATE ON reviews
BEGIN SELECT RAISE(ABORT, 'reviews are append-only: rows are never changed'); END;
CREATE TRIGGER reviews_no_delete BEFORE DELETE ON reviews
BEGIN SELECT RAISE(ABORT, 'reviews are append-only: rows are never deleted'); END;
"""


#: (version reached, SQL script) in order. The next schema adds a row here.
MIGRATIONS: tuple[tuple[int, str], ...] = ((1, _V1), (2, _V2))


def _schema_of(db: sqlite3.Connection) -> frozenset:
    """The database's tables, indexes and triggers with their SQL (spaces
    normalised); SQLite's own objects left out."""
    rows = db.execute("SELECT type, name, tbl_name, sql FROM sqlite_master "
                      "WHERE name NOT LIKE 'sqlite_%'").fetchall()
    if any(not isinstance(x, str) for row in rows for x in row if x is not None):
        # Bytes that are not text where SQLite keeps its schema: damage.
        raise sqlite3.DatabaseError("the schema itself is damaged")
    return frozenset((t, n, tb, " ".join((sql or "").split())) for t, n, tb, sql in rows)


_SCHEMAS: dict[int, frozenset] = {}


def _expected_schema(version: int) -> frozenset:
    """The log's schema at ``version`` (empty at 0), built in memory by the migrations."""
    if version not in _SCHEMAS:
        mem = sqlite3.connect(":memory:")
        for reached, script in MIGRATIONS:
            if reached <= version:
                mem.executescript(script)
        _SCHEMAS[version] = _schema_of(mem)
        mem.close()
    return _SCHEMAS[version]


class LogFile:
    """An open log file. Use as a context manager, or call :meth:`close`.

    ``writable=False`` opens the file read-only (``list``, ``show`` and
    ``export`` work on a log in a read-only folder and never change a byte).
    A log opened for writing is first checked on a read-only connection: a
    file of another program, or one that fails SQLite's ``quick_check``, is
    refused before anything is written. ``lock_wait_s`` is how long a writer
    waits for another program's write lock before giving up. ``shared=True``
    lets one connection serve several threads in turn (``dosing serve``,
    which holds a lock around every use).
    """

    def __init__(self, path: str | Path | None = None, *, writable: bool = True,
                 lock_wait_s: float = 30.0, shared: bool = False):
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
            # shared: one connection used by a server's threads in turn (the
            # server holds a lock around every use).
            self._db = sqlite3.connect(str(self.path), timeout=lock_wait_s,
                                       isolation_level=None, check_same_thread=not shared)
            self._db.text_factory = _text
            self._db.execute(f"PRAGMA busy_timeout = {int(lock_wait_s * 1000)}")
            self._prepare_with_retry(lock_wait_s)
        except sqlite3.DatabaseError as err:
            if _is_lock(err) or _is_full(err):
                raise self._write_error(err) from None
            raise ShiftLogError(f"{self.path}: cannot be used as a shift log ({err}); "
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
            db.text_factory = _text
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
            schema = _schema_of(db)
        finally:
            db.execute("COMMIT")
        foreign = ShiftLogError(f"{self.path}: is an SQLite database of another program, "
                                "not a shift log; it was not changed")
        if app_id not in (0, APPLICATION_ID) or (app_id == 0 and (schema or version)):
            raise foreign
        if version > SCHEMA_VERSION:
            raise ShiftLogError(f"{self.path}: was written by a newer version of the "
                                f"planner (schema {version}, this one reads up to "
                                f"{SCHEMA_VERSION}); upgrade before using it")
        # Only an empty file, or one whose whole schema is the log's at its
        # version, is taken: anything else is refused before any write.
        if schema != _expected_schema(version):
            raise foreign
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

    def __enter__(self) -> "LogFile":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

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

    def _write_error(self, err: Exception) -> ShiftLogError:
        """Why an entry could not be written: a full disk said as such, a lock,
        or anything else; in every case nothing was written."""
        if _is_full(err):
            return ShiftLogError(f"{self.path}: the disk holding the log is full; nothing "
                                 "was written (entries already in the log are unchanged). "
                                 "Free some space and record the entry again")
        if _is_lock(err):
            return self._locked_error()
        return ShiftLogError(f"{self.path}: the entry could not be written ({err}); "
                             "nothing was written")

    def _damaged(self, err: Exception) -> ShiftLogError:
        why = " ".join(str(err).split())[:120]
        return ShiftLogError(f"{self.path}: is damaged ({why}); the file was not changed. "
                             f"{_RECOVER}")


def default_log_path() -> Path:
    """Where the log lives: ``$DOSING_LOG_DB``, else the per-user data folder."""
    if os.environ.get(ENV_VAR):
        return Path(os.environ[ENV_VAR])
    from platformdirs import user_data_dir
    return Path(user_data_dir("neutral-dosing", appauthor=False)) / "shiftlog.sqlite"


_RECOVER = ("Copy what can still be read with `dosing log export --csv FILE` (or the "
            "sqlite3 tool's .recover command), then move the damaged file aside and start "
            "a new log (or restore a backup)")


class Undecodable(bytes):
    """A text cell of a damaged log that is not UTF-8: kept as its bytes (not
    a str), so the entry holding it is reported unreadable, never shown altered."""


def _text(raw: bytes):
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        return Undecodable(raw)


def _is_full(err: Exception) -> bool:
    """SQLite's SQLITE_FULL (or the operating system's "no space left")."""
    text = str(err).lower()
    return "disk is full" in text or "no space left" in text or \
        getattr(err, "sqlite_errorcode", None) == 13


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
