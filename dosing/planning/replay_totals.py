"""What a replay adds up: per-chunk sums, and the report made from them.

:class:`ReplayTotals` is what the chunks (and the parts of a fleet) add
into: rows, flags, product, time outside the window, a histogram of dose
rates on logarithmic bins, and sums per day and per clock hour.
:func:`replay_report` turns them into a :class:`ReplayReport`.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

__all__ = ["FLAGS", "FLATLINE_ROWS", "HourSums", "ReplayTotals", "ReplayReport",
           "replay_report"]


#: A pH reading unchanged for this many rows in a row is a stuck sensor
#: (common practice: an hour of one-minute data).
FLATLINE_ROWS = 60


FLAGS = {
    "bad_timestamp": "timestamp missing, unreadable or outside the years 1900-2200",
    "time_not_increasing": "timestamp not after the previous row",
    "flow_missing": "flow missing or not a number",
    "flow_negative": "flow negative",
    "flow_implausible": "flow above 100,000 m3/h or not a finite number",
    "ph_missing": "pH missing or not a number",
    "ph_out_of_range": "pH outside 0-14",
    "temperature_out_of_range": "temperature outside 0-60 °C or missing",
    "alkalinity_bad": "alkalinity missing, negative, above 100,000 mg/L or inconsistent "
                      "with the pH",
    "ph_flatline": f"pH unchanged for {FLATLINE_ROWS} rows or more (stuck sensor?)",
    "wrong_direction": "the reagent moves the pH away from the aim for this water",
    "cannot_reach": "the aim cannot be reached with this reagent",
    "model_failed": "the ionic strength of this water did not settle (a brine?)",
}


#: Row flags are kept as small codes while planning (0: planned).
_FLAG_NAMES = ("",) + tuple(FLAGS)


_FLAG_CODE = {name: k for k, name in enumerate(_FLAG_NAMES)}


# Histogram of dose rates for percentiles with constant memory: a zero bin
# and 100 bins per decade from 1e-6 to 1e6 (2.3 % wide).
_EDGES = np.concatenate([[0.0], np.logspace(-6, 6, 1201)])


def _calendar_groups(ts: np.ndarray, unit: str) -> tuple[np.ndarray, np.ndarray]:
    """The days or hours (``unit`` "D" or "h") the valid times fall in, in
    order, and which of them each time is in; without sorting when they
    span a short stretch, as a chunk of a log does."""
    k = ts.astype(f"datetime64[{unit}]").astype(np.int64)
    lo, hi = int(k.min()), int(k.max())
    if hi - lo >= 4 * k.size + 1024:
        keys, which = np.unique(k, return_inverse=True)
    else:
        present = np.bincount(k - lo, minlength=hi - lo + 1) > 0
        keys = np.flatnonzero(present) + lo
        which = (np.cumsum(present) - 1)[k - lo]
    return keys.astype(f"datetime64[{unit}]"), which


def _bin_of(rate: np.ndarray) -> np.ndarray:
    """Histogram bin of each finite rate: as ``searchsorted(_EDGES, rate,
    side="right") - 1`` (0 for rates at or below zero), found from the
    logarithm and then put right against the edges themselves."""
    with np.errstate(divide="ignore", invalid="ignore"):
        guess = np.floor((np.log10(rate) + 6.0) * 100.0)
    idx = np.clip(np.nan_to_num(guess, nan=-1.0, neginf=-1.0), -1, _EDGES.size - 2)
    idx = idx.astype(np.int64) + 1
    idx -= rate < _EDGES[idx]
    idx += (idx < _EDGES.size - 1) & (rate >= _EDGES[np.minimum(idx + 1, _EDGES.size - 1)])
    idx[rate <= 0] = 0
    return idx


@dataclass(frozen=True)
class HourSums:
    """One hour of a replay, for the plot: sums and counts of the raw pH
    and of the dose rate (means are sum / count)."""

    ph_sum: float = 0.0
    ph_n: int = 0
    rate_sum: float = 0.0
    rate_n: int = 0

    def __add__(self, other: "HourSums") -> "HourSums":
        return HourSums(self.ph_sum + other.ph_sum, self.ph_n + other.ph_n,
                        self.rate_sum + other.rate_sum, self.rate_n + other.rate_n)

    @property
    def ph_mean(self) -> float:
        return self.ph_sum / self.ph_n if self.ph_n else math.nan

    @property
    def rate_mean(self) -> float:
        return self.rate_sum / self.rate_n if self.rate_n else math.nan


@dataclass
class ReplayTotals:
    """Sums that chunks add into; the report is made from these alone."""

    rows: int = 0
    planned: int = 0
    flags: Counter = field(default_factory=Counter)
    kg: float = 0.0
    litres: float = 0.0
    seconds: float = 0.0
    seconds_outside: float = 0.0
    seconds_planned: float = 0.0
    rate_sum: float = 0.0
    rate_max: float = 0.0
    hist: np.ndarray = field(default_factory=lambda: np.zeros(_EDGES.size, dtype=np.int64))
    daily_kg: dict = field(default_factory=dict)
    daily_l: dict = field(default_factory=dict)
    hourly: dict = field(default_factory=dict)      #: hour -> HourSums
    first: Any = None
    last: Any = None
    rate_unit: str = "kg/h"
    keep_hourly: bool = True     #: hourly means for the plot (grows with hours covered)

    def add(self, rows: pd.DataFrame) -> None:
        """Add one chunk of :func:`plan_rows` output."""
        self.rows += len(rows)
        codes = rows["flag"].cat.codes.to_numpy()
        ok = codes == 0
        self.planned += int(ok.sum())
        counts = np.bincount(codes[~ok], minlength=len(_FLAG_NAMES))
        self.flags.update({_FLAG_NAMES[k]: int(c) for k, c in enumerate(counts) if k and c})
        dt = rows["dt_s"].to_numpy()
        self.seconds += float(dt.sum())
        self.seconds_outside += float(dt[rows["outside"].to_numpy()].sum())
        rate_col = "dose_kg_h" if self.rate_unit == "kg/h" else "dose_l_h"
        rate_all = rows[rate_col].to_numpy()
        self.seconds_planned += float(dt[ok].sum())
        self.kg += float(np.nansum(rows["kg"].to_numpy()[ok]))
        self.litres += float(np.nansum(rows["litres"].to_numpy()[ok]))
        self._add_rates(rate_all[ok])
        ts = rows["timestamp"].to_numpy(dtype="datetime64[ns]")
        valid = ~np.isnat(ts)
        if valid.any():
            tv = ts[valid]
            # Earliest and latest, whatever the order of the rows.
            lo, hi = pd.Timestamp(tv.min()), pd.Timestamp(tv.max())
            self.first = lo if self.first is None else min(self.first, lo)
            self.last = hi if self.last is None else max(self.last, hi)
        day_rows = ok & valid
        self._add_days(ts[day_rows], rows["kg"].to_numpy()[day_rows],
                       rows["litres"].to_numpy()[day_rows])
        if self.keep_hourly and valid.any():
            self._add_hours(ts[valid], rows["ph"].to_numpy()[valid], rate_all[valid])

    def _add_rates(self, rate: np.ndarray) -> None:
        """Sum, maximum and histogram of the planned rows' dose rates."""
        rate = rate[np.isfinite(rate)]
        if rate.size:
            self.rate_sum += float(rate.sum())
            self.rate_max = max(self.rate_max, float(rate.max()))
            self.hist += np.bincount(_bin_of(rate), minlength=_EDGES.size)

    def _add_hours(self, ts: np.ndarray, ph: np.ndarray, rate: np.ndarray) -> None:
        """Sums and counts per clock hour of the raw pH and the dose rate
        (readings that are not numbers left out)."""
        hours, which = _calendar_groups(ts, "h")

        def sum_count(x):
            have = ~np.isnan(x)
            return (np.bincount(which[have], weights=x[have], minlength=hours.size).tolist(),
                    np.bincount(which[have], minlength=hours.size).tolist())
        (ph_s, ph_n), (r_s, r_n) = sum_count(ph), sum_count(rate)
        for k, h in enumerate(pd.DatetimeIndex(hours.astype("datetime64[ns]"))):
            self.hourly[h] = self.hourly.get(h, HourSums()) + HourSums(
                ph_s[k], ph_n[k], r_s[k], r_n[k])

    def _add_days(self, ts: np.ndarray, kg: np.ndarray, litres: np.ndarray) -> None:
        """Product per calendar day (``YYYY-MM-DD``) of planned rows."""
        if not ts.size:
            return
        days, which = _calendar_groups(ts, "D")
        for book, vals in ((self.daily_kg, kg), (self.daily_l, litres)):
            sums = np.bincount(which, weights=np.nan_to_num(vals), minlength=days.size)
            for d, v in zip(np.datetime_as_string(days), sums.tolist()):
                book[d] = book.get(d, 0.0) + v

    def merge(self, other: "ReplayTotals") -> None:
        """Add another part's totals (parts of one site, in any order)."""
        for name in ("rows", "planned", "kg", "litres", "seconds", "seconds_outside",
                     "seconds_planned", "rate_sum"):
            setattr(self, name, getattr(self, name) + getattr(other, name))
        self.flags.update(other.flags)
        self.rate_max = max(self.rate_max, other.rate_max)
        self.hist += other.hist
        for mine, theirs in ((self.daily_kg, other.daily_kg), (self.daily_l, other.daily_l)):
            for d, v in theirs.items():
                mine[d] = mine.get(d, 0.0) + v
        for h, b in other.hourly.items():
            self.hourly[h] = self.hourly.get(h, HourSums()) + b
        if other.first is not None:
            self.first = other.first if self.first is None else min(self.first, other.first)
            self.last = other.last if self.last is None else max(self.last, other.last)

    def percentile(self, q: float) -> float:
        """Dose-rate percentile from the histogram (upper bin edge) [rate unit]."""
        total = int(self.hist.sum())
        if total == 0:
            return math.nan
        k = int(np.searchsorted(np.cumsum(self.hist), math.ceil(q / 100.0 * total)))
        if k == 0:
            return 0.0
        # The bin's upper edge, but never past the largest rate seen (a bin
        # is 2.3 % wide: with few rows its edge can lie above them all).
        return min(float(_EDGES[min(k + 1, _EDGES.size - 1)]), self.rate_max)


@dataclass(frozen=True)
class ReplayReport:
    """A replay summed up: what it planned, the reagent used, the pump it needs.

    Amounts are SI; rates are in :attr:`rate_unit` (kg/h of product, or L/h
    for a product sold by volume). ``to_dict`` gives the JSON (stable keys).
    """

    source: str
    title: str
    site: str
    tank: str
    reagent: str                          #: catalogue id
    reagent_name: str
    rows: int
    rows_planned: int
    not_planned: dict[str, tuple[int, str]]   #: flag -> (rows, why)
    first: str | None
    last: str | None
    hours_covered: float
    kg_product: float
    litres_product: float
    cost: float | None
    days: int
    mean_kg_per_day: float
    max_kg_per_day: float
    mean_litres_per_day: float
    rate_unit: str
    rate_mean: float
    rate_p95: float
    rate_max: float
    rate_p5_nonzero: float | None
    days_of_supply: float | None
    hours_outside_window: float
    fraction_outside_window: float | None
    daily_kg_product: dict[str, float]
    cautions: tuple[str, ...]
    files: tuple[str, ...] = ()           #: the files read, in order
    currency: str = ""                    #: what the cost is in ("": the price's units)

    @property
    def rows_not_planned(self) -> int:
        return self.rows - self.rows_planned

    @property
    def turndown(self) -> float | None:
        """Highest over lowest steady rate the pump must hold [-]."""
        return self.rate_max / self.rate_p5_nonzero if self.rate_p5_nonzero else None

    def to_dict(self) -> dict[str, Any]:
        """The report as plain data (SI units, JSON-ready, stable keys)."""
        return {
            "source": self.source, "scenario": self.title, "site": self.site,
            "tank": self.tank, "reagent": self.reagent, "rows": self.rows,
            "rows_planned": self.rows_planned, "rows_not_planned": self.rows_not_planned,
            "not_planned": {k: {"rows": n, "why": why} for k, (n, why) in self.not_planned.items()},
            "first": self.first, "last": self.last, "hours_covered": self.hours_covered,
            "total": {"kg_product": self.kg_product, "litres_product": self.litres_product,
                      "cost": self.cost, "currency": self.currency or None},
            "daily": {"days": self.days, "mean_kg_product": self.mean_kg_per_day,
                      "max_kg_product": self.max_kg_per_day,
                      "mean_litres_product": self.mean_litres_per_day},
            "dose_rate": {"unit": self.rate_unit, "mean": self.rate_mean, "p95": self.rate_p95,
                          "max": self.rate_max, "p5_nonzero": self.rate_p5_nonzero,
                          "turndown": self.turndown, "percentile_resolution": "2.3 % bins"},
            "days_of_supply": self.days_of_supply,
            "hours_outside_window": self.hours_outside_window,
            "fraction_outside_window": self.fraction_outside_window,
            "daily_kg_product": dict(self.daily_kg_product),
            "reagent_name": self.reagent_name,
            "cautions": list(self.cautions),
            "files": list(self.files),
        }


def replay_report(totals: ReplayTotals, scenario, source: str,
                  files: tuple[str, ...] = ()) -> ReplayReport:
    """The replay summary of ``totals`` for ``scenario``."""
    from .reagents import GENERAL_CAUTION
    days = sorted(totals.daily_kg)
    daily_kg = [totals.daily_kg[d] for d in days]
    daily_l = [totals.daily_l.get(d, 0.0) for d in days]
    mean_daily_kg = float(np.mean(daily_kg)) if daily_kg else 0.0
    mean_daily_l = float(np.mean(daily_l)) if daily_l else 0.0
    low = None
    if totals.hist[1:].sum():
        # Smallest rate the pump must hold: 5th percentile of non-zero rates.
        cum = np.cumsum(totals.hist[1:])
        k = int(np.searchsorted(cum, math.ceil(0.05 * cum[-1])))
        low = min(float(_EDGES[k + 1]), totals.rate_max)
    return ReplayReport(
        source=source, title=scenario.title, site=scenario.site, tank=scenario.tank,
        reagent=scenario.reagent.id, reagent_name=scenario.reagent.name, rows=totals.rows,
        rows_planned=totals.planned,
        not_planned={k: (v, FLAGS[k]) for k, v in sorted(totals.flags.items())},
        first=None if totals.first is None else str(totals.first),
        last=None if totals.last is None else str(totals.last),
        hours_covered=totals.seconds / 3600.0, kg_product=totals.kg,
        litres_product=totals.litres,
        cost=totals.kg * scenario.price_per_kg if scenario.price_per_kg else None,
        days=len(days), mean_kg_per_day=mean_daily_kg,
        max_kg_per_day=max(daily_kg) if daily_kg else 0.0, mean_litres_per_day=mean_daily_l,
        rate_unit=totals.rate_unit,
        rate_mean=totals.rate_sum / totals.planned if totals.planned else math.nan,
        rate_p95=totals.percentile(95), rate_max=totals.rate_max, rate_p5_nonzero=low,
        days_of_supply=scenario.storage_lasts(mean_daily_l, mean_daily_kg),
        hours_outside_window=totals.seconds_outside / 3600.0,
        fraction_outside_window=(totals.seconds_outside / totals.seconds
                                 if totals.seconds else None),
        daily_kg_product=dict(zip(days, daily_kg)),
        cautions=tuple(scenario.reagent.cautions) + (GENERAL_CAUTION,), files=tuple(files),
        currency=getattr(scenario, "currency", ""))
