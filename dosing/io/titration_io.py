"""Reading a bench titration CSV (the only file access for titrations)."""

from __future__ import annotations

import csv
import math
from pathlib import Path

from ..errors import ScenarioError
from ..planning.findings import Finding, Q, note

__all__ = ["read_titration_csv", "VOLUME_NAMES"]

VOLUME_NAMES = ("titrant_ml", "added_ml", "volume_ml", "titrant_added", "volume_added",
                "ml", "v_ml", "volume", "titrant",
                "added", "v")
_BAD_UNITS = ("(l)", "[l]", "(ul)", "[ul]", "(µl)", "litre", "liter", "(dl)")


def _num(text: str) -> float:
    try:
        return float(text.strip().replace(",", "."))
    except (ValueError, AttributeError):
        return math.nan


#: The largest titration file read [bytes]: thousands of readings, far
#: more than any bench titration (common practice: tens to a few hundred).
MAX_BYTES = 1_000_000


def _csv_rows(path: str) -> list[list[str]]:
    """The file's rows (comma, semicolon or tab), or one line saying why not."""
    p = Path(path)
    if not p.is_file():
        raise ScenarioError(path, "", "no such file")
    if p.stat().st_size > MAX_BYTES:
        raise ScenarioError(path, "", f"{p.stat().st_size:,} bytes; a bench titration is a "
                            f"few hundred readings (allowed: up to {MAX_BYTES:,} bytes)")
    try:
        text = p.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError:
        raise ScenarioError(path, "", "not a UTF-8 text file") from None
    try:
        dialect = csv.Sniffer().sniff(text[:2048], delimiters=",;\t")
    except csv.Error:
        dialect = csv.excel
    try:
        rows = list(csv.reader(text.splitlines(), dialect))
    except csv.Error as err:
        raise ScenarioError(path, "", f"not a readable CSV file ({err}); a bench titration "
                            "has a volume and a pH on each line") from None
    if not rows:
        raise ScenarioError(path, "", "the file is empty")
    return rows


def read_titration_csv(path: str, drop_rows=()
                       ) -> tuple[list[float], list[float], list[int], list[Finding]]:
    """(volumes mL, pH, file line numbers, notes) from a titration CSV."""
    rows = _csv_rows(path)
    header = [h.strip() for h in rows[0]]
    keys = [h.split("(")[0].split("[")[0].strip().lower().replace(" ", "_") for h in header]
    vol = next((i for i, k in enumerate(keys) if k in VOLUME_NAMES), None)
    ph = next((i for i, k in enumerate(keys) if k in ("ph", "ph_value")), None)
    if vol is None or ph is None:
        raise ScenarioError(path, "titrant_ml" if vol is None else "ph",
                            "column missing; a titration needs a titrant volume column "
                            f"(mL; e.g. {', '.join(VOLUME_NAMES[:4])}) and a pH column; "
                            "found: " + ", ".join(header))
    if any(b in header[vol].lower() for b in _BAD_UNITS):
        raise ScenarioError(path, header[vol], "give the titrant volume in mL")
    notes = []
    vols, phs, lines = [], [], []
    body = rows[1:]
    start = 2
    if body and math.isnan(_num(body[0][vol] if len(body[0]) > vol else "")) and \
            math.isnan(_num(body[0][ph] if len(body[0]) > ph else "")):
        unit = body[0][vol].strip().lower() if len(body[0]) > vol else ""
        if unit in ("l", "ul", "µl", "litre", "liter"):
            raise ScenarioError(path, header[vol], "the units row says "
                                f"{body[0][vol]!r}; give the titrant volume in mL")
        body = body[1:]
        start = 3
        notes.append(note("units-row", "a units row under the header was skipped", "info"))
    dropped, done = set(drop_rows), set()
    for n, row in enumerate(body, start=start):
        if not any(c.strip() for c in row):
            continue
        if n in dropped:
            notes.append(note("dropped-row", "row {row:d} dropped as asked", "info", row=Q(n)))
            done.add(n)
            continue
        vols.append(_num(row[vol]) if len(row) > vol else math.nan)
        phs.append(_num(row[ph]) if len(row) > ph else math.nan)
        lines.append(n)
    missing = dropped - set(lines) - done
    if missing:
        raise ScenarioError(path, "--drop", f"no row {sorted(missing)[0]} in the file")
    return vols, phs, lines, notes
