"""Reading logged data for a replay: CSV (or Parquet) in chunks.

The one place replay touches files; the chemistry is in :mod:`dosing.planning.replay`.
Memory stays constant however long the file: each chunk is planned, added
into the totals, optionally written out, and dropped.
"""

from __future__ import annotations

import contextlib
import glob
import io
import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Iterator, Sequence

import numpy as np
import pandas as pd

from ..errors import ModelError, ScenarioError
from ..planning.replay import ReplayState, as_numbers, normalise_columns, plan_rows
from ..planning.replay_totals import ReplayReport, ReplayTotals, replay_report
from ..planning.job import Scenario

__all__ = ["iter_chunks", "iter_site_chunks", "run_replay", "site_files", "Part",
           "file_parts", "read_part", "replay_refusal", "CHUNK_ROWS", "PART_BYTES"]

CHUNK_ROWS = 100_000


def replay_refusal(scenario: Scenario) -> str | None:
    """Why this scenario cannot be replayed over logged data, or None.

    Replay plans one dose for each logged row on a stream; a batch has no
    rows to replay and a treatment train is not replayed yet (each row would
    need every step re-planned, and the totals per product of each step)."""
    from ..planning.basis import Flow
    if not isinstance(scenario.basis, Flow):
        return ("replay needs a flow scenario: logged data are flows and rates, and "
                "this scenario plans a batch; give [flow] m3_per_h instead of [batch]")
    if scenario.train:
        return ("replay plans one dose per logged row and this scenario is a treatment "
                "train ([[step]]); replay the dose step on its own (a scenario with "
                "[reagent] and no [[step]]), or plan the train with `dosing plan`")
    return None


def _parse_times(col: pd.Series) -> pd.Series:
    """Timestamps as naive datetimes; unreadable ones become NaT.

    The rule for zones: a timestamp with a UTC offset (``+01:00``, ``Z``) is
    converted to UTC; one without is taken as written. So a file that mixes
    offsets (a logger that changed zone, summer time) reads on one clock.
    Plain ISO 8601 text is cast by Arrow when it can be (all of a chunk);
    otherwise pandas' ISO 8601 parser reads what it can and the slower
    any-format parser only what that leaves.
    """
    if col.dtype.kind == "M":                   # Parquet: times already
        return _in_span(col)
    col = _as_text(col)
    long = col.str.len() > TIME_CHARS_MAX
    if long.any():                              # no timestamp is this long; the
        col = col.where(~long)                  # parsers are slow on such text
    out = _arrow_times(col)
    if out is not None:
        return _in_span(out)
    out = _naive_times(col, "ISO8601")
    missed = (out.isna() & col.notna()).to_numpy()
    if missed.any():
        out[missed] = _naive_times(col[missed], "mixed")
    return out


def _in_span(out: pd.Series) -> pd.Series:
    """Naive times in microseconds, NaT outside :data:`TIME_SPAN`."""
    if getattr(out.dt, "tz", None) is not None:
        out = out.dt.tz_convert("UTC").dt.tz_localize(None)
    return out.where((out >= TIME_SPAN[0]) & (out < TIME_SPAN[1])).astype("datetime64[us]")


#: The longest text read as a timestamp (ISO 8601 with nanoseconds and an
#: offset is 35 characters); a longer cell is not one.
TIME_CHARS_MAX = 64
#: Timestamps outside these years are logger faults, not plant data, and
#: the row is flagged (1900 to 2200, common practice; it also keeps every
#: time inside what a nanosecond clock holds, 1677 to 2262).
TIME_SPAN = (pd.Timestamp("1900-01-01"), pd.Timestamp("2200-01-01"))


def _arrow_times(col: pd.Series) -> pd.Series | None:
    """The common case, fast: text held by Arrow (pandas' own string type
    when pyarrow is installed) that is all plain ISO 8601 without a UTC
    offset, cast by Arrow in one pass. None when any cell is anything else
    (an offset, another format, junk), for the general parser to handle."""
    if getattr(col.dtype, "storage", None) != "pyarrow":
        return None
    import pyarrow as pa
    try:
        out = pa.array(col.array).cast(pa.timestamp("us"))
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        return None
    return pd.Series(out.to_numpy(zero_copy_only=False), index=col.index,
                     dtype="datetime64[us]")


def _as_text(col: pd.Series) -> pd.Series:
    """A time column the CSV reader took as numbers (``20250101``, or all
    empty) back as the text it was written as."""
    if col.dtype.kind not in "iuf":
        return col
    return pd.Series([None if v != v else str(int(v)) if float(v).is_integer() else repr(v)
                      for v in col.tolist()], index=col.index, dtype=object)


def _naive_times(col: pd.Series, fmt: str) -> pd.Series:
    try:
        out = pd.to_datetime(col, errors="coerce", utc=False, format=fmt)
    except ValueError:                      # offsets differ between rows
        out = pd.to_datetime(col, errors="coerce", utc=True, format=fmt)
    return _in_span(out)


def iter_chunks(path: str, chunk_rows: int = CHUNK_ROWS) -> Iterator[pd.DataFrame]:
    """Chunks of about ``chunk_rows`` rows of the file, with our column
    names; a units row is skipped.

    A CSV file is cut into byte ranges of about that many lines (the same
    parts a fleet replay hands its workers) and each is parsed whole: the C
    reader is about twice as fast that way as in its own chunked mode.
    """
    p = Path(path)
    if not p.is_file():
        raise ScenarioError(path, "", "no such file")
    if p.suffix.lower() in PARQUET_SUFFIXES:
        yield from _parquet_chunks(path, chunk_rows)
        return
    line = 2                                    # the file line a part starts on
    for part in file_parts(path, _bytes_for_rows(path, chunk_rows)):
        data = _part_data(part)
        yield _parse_part(part, data, line)
        line += data.count(b"\n")


def _bytes_for_rows(path: str, rows: int) -> int:
    """Bytes that hold about ``rows`` lines of the file (from the lines in
    its first 64 KiB)."""
    with open(path, "rb") as fh:
        sample = fh.read(65536)
    per_line = len(sample) / max(sample.count(b"\n"), 1)
    return max(int(rows * per_line), 1024)


PARQUET_SUFFIXES = (".parquet", ".pq")


@contextlib.contextmanager
def _csv_errors(path: str, where: Callable[[int], int] | None = None, start: int = 0):
    """pandas' reading errors as one line naming the file.

    The reader numbers lines from the start of what it was given; ``where``
    turns that into the file's line number, or, when it is None and the
    text began ``start`` bytes into the file, the message says so.
    """
    try:
        yield
    except pd.errors.EmptyDataError:
        raise ScenarioError(path, "", "the file is empty") from None
    except (pd.errors.ParserError, UnicodeDecodeError) as err:
        why = " ".join(str(err).split())[:160]
        if where is not None:
            why = re.sub(r"line (\d+)", lambda m: f"line {where(int(m.group(1)))}", why)
        elif start:
            why = re.sub(r"line (\d+)", lambda m: f"line {m.group(1)} of the part from byte "
                         f"{start}", why)
        raise ScenarioError(path, "", f"not a readable CSV file ({why}); every line needs the "
                            "header's fields, no more") from None


def _our_frame(raw: pd.DataFrame, mapping: dict[str, str], first: bool) -> pd.DataFrame:
    """Our columns from a raw CSV chunk; a units row right under the header
    (m3/h, -, ...) is dropped from the file's first chunk."""
    frame = raw[[mapping[k] for k in mapping]].copy()
    frame.columns = list(mapping)
    if first and len(frame):
        row = frame.iloc[0]
        if (pd.isna(_parse_times(pd.Series([row["timestamp"]])).iloc[0])
                and math.isnan(as_numbers([row["ph"]])[0])):
            frame = frame.iloc[1:]
    return _typed(frame)


def _typed(frame: pd.DataFrame) -> pd.DataFrame:
    """Timestamps parsed and every other column as floats (NaN where a cell
    is not a number), so each chunk and part has the same column types."""
    for col in frame.columns:
        frame[col] = (_parse_times(frame[col]) if col == "timestamp"
                      else as_numbers(frame[col]))
    return frame


def site_files(patterns: Sequence[str], base: Path | None = None,
               where: str = "") -> list[str]:
    """The data files of one site, in the order given; a glob (``*``, ``?``,
    ``[...]``) expands to its matches in name order.

    Paths are taken relative to ``base`` when given (a fleet file's folder).
    ``where`` names the option or key for an error.
    """
    out: list[str] = []
    for pat in patterns:
        full = str(base / pat) if base is not None and not Path(pat).is_absolute() else pat
        if glob.has_magic(full):
            hits = sorted(glob.glob(full))
            if not hits:
                raise ScenarioError(full, where, "no file matches this pattern")
            out.extend(hits)
        else:
            out.append(full)
    seen = set()
    for f in out:
        if f in seen:
            raise ScenarioError(f, where, "named twice for one site; a row would count twice")
        seen.add(f)
    return out


def iter_site_chunks(paths: Sequence[str], chunk_rows: int = CHUNK_ROWS):
    """Chunks of several files read as one record, in the order given."""
    for path in paths:
        yield from iter_chunks(path, chunk_rows)


# ------------------------------------------------------------ parts --
#: Default size of one part of a CSV file for a parallel replay [bytes].
PART_BYTES = 16 * 2**20


@dataclass(frozen=True)
class Part:
    """A byte range of a CSV file (or a row group of a Parquet file): every
    line that starts in ``[start, end)`` belongs to it."""

    path: str
    start: int
    end: int
    header: bytes = b""
    row_group: int = -1


def file_parts(path: str, part_bytes: int = PART_BYTES) -> list[Part]:
    """Cut one file into parts for a parallel replay."""
    p = Path(path)
    if not p.is_file():
        raise ScenarioError(path, "", "no such file")
    if p.suffix.lower() in PARQUET_SUFFIXES:
        return _parquet_parts(path)
    with open(path, "rb") as fh:
        header = fh.readline()
        size = p.stat().st_size
    if not header.strip():
        raise ScenarioError(path, "", "the file is empty")
    with _csv_errors(path):
        normalise_columns(list(pd.read_csv(io.BytesIO(header), dtype=str,
                                           skipinitialspace=True).columns), path)
    starts = range(len(header), max(size, len(header) + 1), part_bytes)
    return [Part(path, a, min(a + part_bytes, size), header) for a in starts]


def _parquet_parts(path: str) -> list[Part]:
    pq, pa = _pyarrow(path)
    with _parquet_errors(path, pa):
        f = pq.ParquetFile(path)
        normalise_columns(f.schema.names, path)
        return [Part(path, 0, 0, row_group=i) for i in range(f.num_row_groups)]


def read_part(part: Part) -> pd.DataFrame:
    """The rows of one part with our column names (the units row, if any,
    only ever in the first part of a file)."""
    if part.row_group >= 0:
        return _read_row_group(part)
    return _parse_part(part, _part_data(part), None)


def _part_data(part: Part) -> bytes:
    """The bytes of the lines that begin in the part."""
    with open(part.path, "rb") as fh:
        fh.seek(part.start - 1)
        if fh.read(1) != b"\n":
            fh.readline()                       # the line belongs to the part before
        pos = fh.tell()
        data = b""
        if pos < part.end:
            data = fh.read(part.end - pos)
            if data and not data.endswith(b"\n"):
                data += fh.readline()           # finish the last line begun here
    return data


def _parse_part(part: Part, data: bytes, line: int | None) -> pd.DataFrame:
    """A part's lines as our frame. ``line`` is the file line the part
    starts on, so that an error names the line of the file (None when not
    known: the error then names the line counted from the part's start)."""
    where = (lambda k: k + line - 2) if line is not None else None
    with _csv_errors(part.path, where, part.start):
        mapping = normalise_columns(list(pd.read_csv(io.BytesIO(part.header), nrows=0,
                                                     skipinitialspace=True).columns), part.path)
        raw = pd.read_csv(io.BytesIO(part.header + data), skipinitialspace=True)
        return _our_frame(raw, mapping, part.start == len(part.header))


def _read_row_group(part: Part) -> pd.DataFrame:
    pq, pa = _pyarrow(part.path)
    with _parquet_errors(part.path, pa):
        f = pq.ParquetFile(part.path)
        mapping = normalise_columns(f.schema.names, part.path)
        table = f.read_row_group(part.row_group, columns=list(mapping.values()))
        return _our_parquet_frame(table, mapping, part.path)


def _our_parquet_frame(table, mapping: dict[str, str], path: str) -> pd.DataFrame:
    for name in table.column_names:
        col = table.column(name)
        try:
            col.validate(full=True)
        except Exception:               # pyarrow raises several kinds here
            raise ScenarioError(path, name, "this column holds text that is not valid "
                                "UTF-8 (a damaged file, or another encoding)") from None
    return _typed(table.to_pandas().rename(columns={v: k for k, v in mapping.items()}))


@contextlib.contextmanager
def _parquet_errors(path: str, pa):
    """pyarrow's reading errors as one line naming the file."""
    try:
        yield
    except (pa.ArrowException, OSError, UnicodeDecodeError) as err:
        why = " ".join(str(err).encode("ascii", "replace").decode().split())[:160]
        raise ScenarioError(path, "", f"not a readable Parquet file ({why})") from None


def _pyarrow(path: str):
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError:
        raise ScenarioError(path, "", "reading Parquet needs pyarrow (pip install "
                            "'neutral-dosing[parquet]'); or give a CSV") from None
    return pq, pa


def _parquet_chunks(path: str, chunk_rows: int) -> Iterator[pd.DataFrame]:
    pq, pa = _pyarrow(path)
    with _parquet_errors(path, pa):
        f = pq.ParquetFile(path)
        mapping = normalise_columns(f.schema.names, path)
        for batch in f.iter_batches(batch_size=chunk_rows, columns=list(mapping.values())):
            yield _our_parquet_frame(batch, mapping, path)


def run_replay(paths: str | Sequence[str], scenario: Scenario, *,
               chunk_rows: int = CHUNK_ROWS,
               rows_out: io.TextIOBase | None = None,
               progress: Callable[[int], None] | None = None, keep_hourly: bool = True):
    """Replay the whole record (one file, or several read as one in the
    order given); returns (report, totals).

    ``rows_out``, if given, receives the per-row results as CSV. Hourly
    means (for the plot) are the only state that grows with the length of
    the record; ``keep_hourly=False`` drops them.
    """
    state = ReplayState()
    unit = "kg/h" if scenario.reagent.kg_product_per_mol is not None else "L/h"
    totals = ReplayTotals(rate_unit=unit, keep_hourly=keep_hourly)
    header = True
    if rows_out is not None:
        # The cautions travel with every file that carries doses (read the rows
        # with a comment character, e.g. pandas.read_csv(..., comment="#")).
        from ..planning.reagents import GENERAL_CAUTION
        for line in tuple(scenario.reagent.cautions) + (GENERAL_CAUTION,):
            rows_out.write(f"# {line}\n")
    paths = [paths] if isinstance(paths, str) else list(paths)
    for chunk in iter_site_chunks(paths, chunk_rows):
        rows = plan_rows(chunk.reset_index(drop=True), scenario, state)
        totals.add(rows)
        if rows_out is not None:
            _finite_rows(rows, paths)
            rows.to_csv(rows_out, header=header, index=False, float_format="%.9g")
            header = False
        if progress:
            progress(totals.rows)
    return finish_replay(totals, scenario, paths), totals


def _finite_rows(rows: pd.DataFrame, paths: Sequence[str]) -> None:
    """No infinite number goes into the per-row file (empty means not a number)."""
    numbers = rows.select_dtypes("number").to_numpy(dtype=float)
    if np.isinf(numbers).any():
        raise ModelError(f"{', '.join(paths)}: a per-row result is not a finite number; "
                         "the per-row file was not written")


def finish_replay(totals: ReplayTotals, scenario: Scenario,
                  paths: Sequence[str]) -> ReplayReport:
    """The report of a whole record; a record with no usable row is refused."""
    source = ", ".join(paths)
    if totals.planned == 0:
        why = ", ".join(f"{k} ({v})" for k, v in totals.flags.most_common(3)) or "no rows"
        raise ScenarioError(source, "", f"no usable rows: {why}")
    return replay_report(totals, scenario, source, tuple(paths))
