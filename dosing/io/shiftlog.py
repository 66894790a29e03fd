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

The file itself (opening, schema, locks, damage) is
:mod:`dosing.io.shiftlog_file`'s.
"""

from __future__ import annotations

import json
import sqlite3
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Any, Iterator

from ..errors import InputError, ShiftLogError
from .shiftlog_file import (ENV_VAR, MIGRATIONS, SCHEMA_VERSION, LogFile, _is_lock,
                            default_log_path)

__all__ = ["ShiftLogError", "Entry", "ShiftLog", "default_log_path", "SCHEMA_VERSION",
           "MIGRATIONS", "ENV_VAR", "parse_since", "Bias", "BIAS_MIN_ENTRIES", "kg_basis"]

#: Fewest usable decisions on a tank before its bias is estimated (common practice:
#: fewer say more about chance than about the model).
BIAS_MIN_ENTRIES = 5


#: A bias this large (either way) makes a bench titration due (common practice).
BIAS_DUE = 0.10


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
        return None if self.plan_json is None else json.loads(self.plan_json, strict=False)


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


_COLUMNS = ("id", "kind", "utc", "operator", "site", "tank", "title", "reagent",
            "scenario_toml", "plan_json", "planned_kg", "dosed_kg", "ph_start",
            "ph_planned", "ph_after", "note", "refers_to", "engine_version")


_TEXT = ("kind", "utc", "operator", "site", "tank", "title", "reagent", "engine_version")
_NUMBER = ("planned_kg", "dosed_kg", "ph_start", "ph_planned", "ph_after")


def _entry(row) -> Entry:
    """An entry from a row as read, checked: a row whose cells are not what
    the log writes (bytes, a damaged plan, a time that is not one) raises
    ValueError, so damage shows as an unreadable entry, never a crash."""
    if row is None or len(row) != len(_COLUMNS):
        raise ValueError("no such row")
    cells = dict(zip(_COLUMNS, row))
    if not isinstance(cells["id"], int):
        raise ValueError("id")
    for key in _TEXT + ("note",):
        if not isinstance(cells[key], str):
            raise ValueError(key)
    for key in _NUMBER:
        if cells[key] is not None and (isinstance(cells[key], bool)
                                       or not isinstance(cells[key], (int, float))):
            raise ValueError(key)
    if cells["refers_to"] is not None and not isinstance(cells["refers_to"], int):
        raise ValueError("refers_to")
    datetime.fromisoformat(cells["utc"])                  # ValueError if not a time
    for key in ("scenario_toml", "plan_json"):
        if cells[key] is not None and not isinstance(cells[key], str):
            raise ValueError(key)
    if cells["plan_json"] is not None:
        # A control character inside a string is kept (strict=False): the
        # plan is still readable; anything else that is not JSON is damage.
        plan = json.loads(cells["plan_json"], strict=False)
        if not isinstance(plan, dict):
            raise ValueError("plan_json")
    return Entry(*row)


def _valid_id(entry_id: int) -> bool:
    """An id SQLite can hold (a larger one cannot be in the log)."""
    return 0 < entry_id < 2 ** 63


class ShiftLog(LogFile):
    """An open shift log: its entries written and read. Use as a context manager, or call :meth:`close`.

    Opening is :class:`~dosing.io.shiftlog_file.LogFile`'s (read-only with
    ``writable=False``; a foreign or damaged file refused before any write).
    """

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
            raise self._write_error(err) from None
        try:
            if row.get("refers_to") is not None:
                self._require(int(row["refers_to"]))
            cur = db.execute(f"INSERT INTO entries ({keys}) VALUES ({marks})",
                             tuple(row.values()))
            db.execute("COMMIT")
        except BaseException as err:
            if db.in_transaction:           # SQLite may have rolled back already
                db.execute("ROLLBACK")
            if isinstance(err, sqlite3.Error):
                raise self._write_error(err) from None
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
        try:
            return _entry(rows[0])
        except ValueError:
            raise ShiftLogError(f"{self.path}: entry {entry_id} is damaged and cannot be "
                                "read; the other entries can (dosing log list)") from None

    def related(self, entry_id: int) -> list[Entry]:
        """Entries that refer to ``entry_id`` (corrections, follow-ups), oldest
        first; damaged ones left out (and listed in :attr:`unreadable`)."""
        rows = self._rows(f"SELECT {', '.join(_COLUMNS)} FROM entries "
                          "WHERE refers_to = ? ORDER BY id", (entry_id,))
        return self._checked(rows)

    def _checked(self, rows) -> list[Entry]:
        """Entries of rows read; a damaged row's id goes to :attr:`unreadable`."""
        out = []
        for row in rows:
            try:
                out.append(_entry(row))
            except ValueError:
                if not hasattr(self, "unreadable"):
                    self.unreadable = []
                self.unreadable.append(row[0] if row and isinstance(row[0], int) else "?")
        return out

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
            found = self._checked(self._rows(select + where + " ORDER BY id", args))
        except ShiftLogError:
            self.unreadable = []
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
                found.append(_entry(self._db.execute(sql, (entry_id,)).fetchone()))
            except (sqlite3.DatabaseError, ValueError, TypeError):
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
                     latest_ph_after=self.latest_ph(e), kg_are=kg_basis(e),
                     cautions=" | ".join((e.plan or {}).get("cautions", [])))
                for e in self.entries(since_utc=since_utc, tank=tank)]
        return pd.DataFrame(rows, columns=list(_COLUMNS) + [
            "local_time", "dosed_ratio", "latest_ph_after", "kg_are", "cautions"])


def kg_basis(e: Entry) -> str:
    """What planned_kg and dosed_kg of an entry are: kg per batch, or kg/h
    for a flow (the rate the pump ran at); empty for a follow-up."""
    plan = e.plan or {}
    if not plan:
        return ""
    dose = plan.get("dose") or {}
    steps = plan.get("steps") or []
    flow = "kg_product_per_h" in dose or any("kg_product_per_h" in (s.get("dose") or {})
                                             for s in steps)
    return "kg per hour" if flow else "kg per batch"
