"""Reading logged data for a replay: CSV (or Parquet) in chunks.

The one place replay touches files; the chemistry is in :mod:`dosing.replay`.
Memory stays constant however long the file: each chunk is planned, added
into the totals, optionally written out, and dropped.
"""

from __future__ import annotations

import io
from pathlib import Path
from typing import Callable, Iterator

import pandas as pd

from .errors import ScenarioError
from .replay import ReplayState, ReplayTotals, normalise_columns, plan_rows, replay_report
from .scenario import Scenario

__all__ = ["iter_chunks", "run_replay", "CHUNK_ROWS"]

CHUNK_ROWS = 100_000


def _parse_times(col: pd.Series) -> pd.Series:
    """Timestamps as naive datetimes; unreadable ones become NaT.

    The rule for zones: a timestamp with a UTC offset (``+01:00``, ``Z``) is
    converted to UTC; one without is taken as written. So a file that mixes
    offsets (a logger that changed zone, summer time) reads on one clock.
    """
    try:
        out = pd.to_datetime(col, errors="coerce", utc=False, format="mixed")
    except ValueError:                      # offsets differ between rows
        out = pd.to_datetime(col, errors="coerce", utc=True, format="mixed")
    if getattr(out.dt, "tz", None) is not None:
        out = out.dt.tz_convert("UTC").dt.tz_localize(None)
    return out


def iter_chunks(path: str, chunk_rows: int = CHUNK_ROWS) -> Iterator[pd.DataFrame]:
    """Chunks of the file with our column names; a units row is skipped."""
    p = Path(path)
    if not p.is_file():
        raise ScenarioError(path, "", "no such file")
    if p.suffix.lower() in (".parquet", ".pq"):
        yield from _parquet_chunks(path, chunk_rows)
        return
    try:
        reader = pd.read_csv(path, chunksize=chunk_rows, dtype=str, skipinitialspace=True)
        first = True
        mapping = None
        for raw in reader:
            if mapping is None:
                mapping = normalise_columns(list(raw.columns), path)
            frame = raw[[mapping[k] for k in mapping]].copy()
            frame.columns = list(mapping)
            if first and len(frame):
                # A units row (m3/h, -, ...) right under the header.
                row = frame.iloc[0]
                if (pd.isna(_parse_times(pd.Series([row["timestamp"]])).iloc[0])
                        and pd.isna(pd.to_numeric(pd.Series([row["ph"]]), errors="coerce").iloc[0])):
                    frame = frame.iloc[1:]
            first = False
            frame["timestamp"] = _parse_times(frame["timestamp"])
            yield frame
    except pd.errors.EmptyDataError:
        raise ScenarioError(path, "", "the file is empty") from None
    except (pd.errors.ParserError, UnicodeDecodeError) as err:
        why = " ".join(str(err).split())[:160]
        raise ScenarioError(path, "", f"not a readable CSV file ({why}); every line needs the "
                            "header's fields, no more") from None


def _parquet_chunks(path: str, chunk_rows: int) -> Iterator[pd.DataFrame]:
    try:
        import pyarrow.parquet as pq
    except ImportError:
        raise ScenarioError(path, "", "reading Parquet needs pyarrow (pip install "
                            "'neutral-dosing[parquet]'); or give a CSV") from None
    import pyarrow as pa
    try:
        f = pq.ParquetFile(path)
        mapping = normalise_columns(f.schema.names, path)
        for batch in f.iter_batches(batch_size=chunk_rows, columns=list(mapping.values())):
            frame = batch.to_pandas()
            frame = frame.rename(columns={v: k for k, v in mapping.items()})
            frame["timestamp"] = _parse_times(frame["timestamp"])
            yield frame
    except (pa.ArrowException, OSError) as err:
        why = " ".join(str(err).split())[:160]
        raise ScenarioError(path, "", f"not a readable Parquet file ({why})") from None


def run_replay(path: str, scenario: Scenario, *, chunk_rows: int = CHUNK_ROWS,
               rows_out: io.TextIOBase | None = None,
               progress: Callable[[int], None] | None = None, keep_hourly: bool = True):
    """Replay the whole file; returns (report dict, totals).

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
        from .reagents import GENERAL_CAUTION
        for line in tuple(scenario.reagent.cautions) + (GENERAL_CAUTION,):
            rows_out.write(f"# {line}\n")
    for chunk in iter_chunks(path, chunk_rows):
        rows = plan_rows(chunk.reset_index(drop=True), scenario, state)
        totals.add(rows)
        if rows_out is not None:
            rows.to_csv(rows_out, header=header, index=False, float_format="%.9g")
            header = False
        if progress:
            progress(totals.rows)
    if totals.planned == 0:
        why = ", ".join(f"{k} ({v})" for k, v in totals.flags.most_common(3)) or "no rows"
        raise ScenarioError(path, "", f"no usable rows: {why}")
    return replay_report(totals, scenario, path), totals
