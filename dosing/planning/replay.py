"""Replay logged plant data through the planner: one dose per row, vectorised.

For every row of a log (timestamp, flow, pH, optionally temperature and
alkalinity) the dose that takes that water to the scenario's aim is found by
the fixed-pH direct solve over numpy arrays, never a Python loop over rows.
Rows that cannot be planned are flagged with the reason and counted, never
dropped silently.

The water model of a row: the scenario's weak-acid totals (carbonate
included, from its alkalinity) with the strong-ion balance re-found from
that row's pH and temperature. Where the log carries an alkalinity column,
each row's carbonate comes from its own alkalinity instead.

This module is pure: it takes pandas frames already read and returns frames
and summaries. Reading files in chunks lives with the command line.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from ..chem import (CARBONATE, N_SYSTEMS, Mixture, add_dose, carbonate_for_alkalinity,
                    co2_in_air_mol_l, dose_to_ph, speciate, strong_balance_at_ph, system_index)
from .effluent import aerate
from .measurements import (ALKALINITY_ENDPOINT_PH, CACO3_MG_PER_MEQ, MEASURED_MAX_MG_L,
                           totals_vector)
from .hazards import calcite_si
from .plan import CALCITE_SI_FAST, has_grip
from ..errors import ScenarioError
from .job import Scenario
from .replay_totals import _FLAG_CODE, _FLAG_NAMES, FLATLINE_ROWS, ReplayTotals
from ..chem.water import T_MAX_C, T_MIN_C

__all__ = ["COLUMN_NAMES", "normalise_columns", "ReplayState", "plan_rows", "GAP_LIMIT_S",
           "PartResult", "plan_part", "as_numbers", "stitch", "head_length", "nominal_step"]

#: Accepted spellings of each column (lower case, units in brackets ignored).
COLUMN_NAMES = {
    "timestamp": ("timestamp", "time", "datetime", "date_time", "ts", "date"),
    "flow_m3_h": ("flow_m3_h", "flow_m3_per_h", "flow", "q_m3_h", "flow_rate", "q"),
    "ph": ("ph", "ph_value"),
    "temperature_c": ("temperature_c", "temperature", "temp_c", "temp", "t_c"),
    "alkalinity_mg_l_as_caco3": ("alkalinity_mg_l_as_caco3", "alkalinity", "alk",
                                 "alkalinity_mg_l"),
}
REQUIRED = ("timestamp", "flow_m3_h", "ph")
#: A gap between rows longer than this is not bridged [s] (common practice).
GAP_LIMIT_S = 900.0
#: No single effluent stream carries more [m3/h]: the largest treatment works
#: take a few 10^4 m3/h (common practice); above it a row is a logger fault.
FLOW_MAX_M3_H = 1e5


def _key(name: str) -> str:
    base = str(name).split("(")[0].split("[")[0]
    return base.strip().lower().replace(" ", "_").replace("-", "_")


def normalise_columns(columns, path: str) -> dict[str, str]:
    """Map the file's column names to ours; raises ScenarioError if one is missing."""
    found: dict[str, str] = {}
    for col in columns:
        k = _key(col)
        for ours, spellings in COLUMN_NAMES.items():
            if k in spellings and ours not in found:
                found[ours] = col
    missing = [c for c in REQUIRED if c not in found]
    if missing:
        raise ScenarioError(path, missing[0], "column missing; the data needs timestamp, "
                            "flow (m3/h) and pH columns; found: "
                            + ", ".join(map(str, columns)))
    return found


@dataclass
class ReplayState:
    """What one chunk hands the next: the last timestamp and the pH run."""

    last_ts: Any = None
    last_ph: float = math.nan
    run: int = 0
    nominal_s: float | None = None
    #: Waters solved so far in this record: (pH, temperature[, alkalinity])
    #: -> (dose [mol/L], flag code); a few thousand for a rounded log.
    solved: dict = field(default_factory=dict, repr=False)


def _seconds(ts: pd.Series) -> np.ndarray:
    """Timestamps as float seconds (NaN for missing)."""
    vals = ts.to_numpy(dtype="datetime64[ns]")
    out = vals.astype("int64").astype(float) / 1e9
    out[np.isnat(vals)] = np.nan
    return out


def plan_rows(frame: pd.DataFrame, scenario: Scenario, state: ReplayState) -> pd.DataFrame:
    """Plan every row of ``frame`` (columns already named as ours).

    Returns a frame with, per row: ``dt_s`` (time the row stands for),
    ``dose_mmol_l``, ``dose_kg_h`` and ``dose_l_h`` of product, ``kg`` and
    ``litres`` of product for the row, ``outside`` (raw pH outside the
    window) and ``flag`` ("" when planned). ``state`` carries the time step
    and the pH run from the rows before and is updated for the rows after.
    """
    flag = _no_flags(len(frame))
    t, dt = _time_steps(frame, state, flag)
    flow, ph, temp = _readings(frame, scenario, flag)
    _flatline(ph, state, flag)
    good_t = ~np.isnan(t)
    if good_t.any():
        state.last_ts = t[good_t][-1]
    ok = flag == 0
    dose = np.full(len(frame), np.nan)
    if ok.any():
        dose[ok] = _dose_for(scenario, ph[ok], temp[ok],
                             frame["alkalinity_mg_l_as_caco3"].to_numpy()[ok]
                             if "alkalinity_mg_l_as_caco3" in frame else None, flag, ok,
                             state.solved)
    return _row_results(frame, scenario, flag, flow, ph, temp, dt, dose)


def _no_flags(n: int) -> np.ndarray:
    """A flag code per row, all 0 (planned): see :data:`_FLAG_NAMES`."""
    return np.zeros(n, dtype=np.uint8)


def _mark(flag: np.ndarray, mask: np.ndarray, name: str) -> None:
    """Flag the rows in ``mask`` not flagged already (the first reason wins)."""
    flag[mask & (flag == 0)] = _FLAG_CODE[name]


def _time_steps(frame: pd.DataFrame, state: ReplayState, flag: np.ndarray):
    """Seconds of each row and the time it stands for [s].

    A row stands for the time since the last valid timestamp before it; the
    first row of a record, and a step over a gap longer than
    :data:`GAP_LIMIT_S`, stand for the record's usual step (the median of
    the first chunk, kept in ``state``). Rows with no valid time stand for 0.
    """
    t = _seconds(frame["timestamp"])
    _mark(flag, np.isnan(t), "bad_timestamp")
    prev = np.concatenate([[state.last_ts if state.last_ts is not None else np.nan], t[:-1]])
    # carry the last valid time forward over bad rows
    prev = pd.Series(prev).ffill().to_numpy(copy=True)
    good_t = ~np.isnan(t)
    if state.last_ts is None and good_t.any():
        # The first valid row has no predecessor.
        first = int(np.flatnonzero(good_t)[0])
        prev[: first + 1] = np.nan
    dt = t - prev
    _mark(flag, good_t & ~np.isnan(dt) & (dt <= 0), "time_not_increasing")
    if state.nominal_s is None:
        steps = dt[np.isfinite(dt) & (dt > 0)]
        state.nominal_s = float(np.median(steps)) if steps.size else 60.0
    nominal = state.nominal_s
    dt = np.where(np.isnan(dt), nominal, dt)
    dt = np.where(dt > GAP_LIMIT_S, nominal, np.maximum(dt, 0.0))
    dt[~good_t] = 0.0
    return t, dt


def _readings(frame: pd.DataFrame, scenario: Scenario, flag: np.ndarray):
    """Flow [m3/h], pH and temperature [°C] as numbers, implausible ones flagged."""
    flow = as_numbers(frame["flow_m3_h"])
    ph = as_numbers(frame["ph"])
    _mark(flag, np.isnan(flow), "flow_missing")
    _mark(flag, flow < 0, "flow_negative")
    _mark(flag, ~(flow <= FLOW_MAX_M3_H), "flow_implausible")
    _mark(flag, np.isnan(ph), "ph_missing")
    _mark(flag, (ph < 0) | (ph > 14), "ph_out_of_range")
    if "temperature_c" in frame:
        temp = as_numbers(frame["temperature_c"])
    else:
        temp = np.full(len(frame), scenario.water.temperature_c)
    _mark(flag, ~((temp >= T_MIN_C) & (temp <= T_MAX_C)), "temperature_out_of_range")
    return flow, ph, temp


def as_numbers(col) -> np.ndarray:
    """A column as floats: a cell that is not a number becomes NaN (and a
    column the reader took as true/false is not numbers at all)."""
    col = pd.Series(col)
    if col.dtype.kind in "iuf":
        return col.to_numpy(dtype=float, na_value=np.nan)   # nullable ints too
    if col.dtype.kind == "b":
        return np.full(len(col), np.nan)
    try:
        return pd.to_numeric(col, errors="coerce").to_numpy(dtype=float)
    except (OverflowError, ValueError, TypeError):
        # an integer of hundreds of digits: cell by cell, too big is infinite
        # (and flagged as implausible by the checks after)
        return np.array([_one_number(v) for v in col.tolist()], dtype=float)


def _one_number(v) -> float:
    try:
        return float(v)
    except OverflowError:                   # an int too large for a float
        return math.inf if v > 0 else -math.inf
    except (ValueError, TypeError):
        return math.nan


def _flatline(ph: np.ndarray, state: ReplayState, flag: np.ndarray) -> None:
    """Flag a stuck sensor: runs of the same pH, carried across chunks."""
    n = ph.size
    same = np.concatenate([[ph[0] == state.last_ph] if n else [], ph[1:] == ph[:-1]])
    idx = np.arange(n)
    last_reset = np.maximum.accumulate(np.where(~same, idx, -1)) if n else idx
    run = np.where(last_reset < 0, state.run + idx + 1, idx - last_reset + 1)
    _mark(flag, run >= FLATLINE_ROWS, "ph_flatline")
    if n:
        state.last_ph = ph[-1]
        state.run = int(run[-1])


def _row_results(frame, scenario: Scenario, flag, flow, ph, temp, dt, dose) -> pd.DataFrame:
    """The per-row output frame: dose, product per hour and per row, window."""
    planned = flag == 0
    r_ = scenario.reagent
    kg_mol = r_.kg_product_per_mol
    l_mol = r_.litres_product_per_mol
    mol_h = np.where(planned, dose, np.nan) * np.where(np.isnan(flow), 0, flow) * 1000.0
    def finite(x):                  # an infinite reading is echoed empty (flag says why)
        return np.where(np.isfinite(x), x, np.nan)
    out = pd.DataFrame({
        "timestamp": frame["timestamp"].to_numpy(),
        "flow_m3_h": finite(flow), "ph": finite(ph), "temperature_c": finite(temp), "dt_s": dt,
        "dose_mmol_l": np.where(planned, dose * 1000.0, np.nan),
        "dose_kg_h": mol_h * kg_mol if kg_mol is not None else np.nan,
        "dose_l_h": mol_h * l_mol if l_mol is not None else np.nan,
    })
    out["kg"] = out["dose_kg_h"] * dt / 3600.0
    out["litres"] = out["dose_l_h"] * dt / 3600.0
    t_ = scenario.target
    out["outside"] = ~np.isnan(ph) & ((ph < t_.ph_min) | (ph > t_.ph_max))
    out["flag"] = pd.Categorical.from_codes(flag, categories=_FLAG_NAMES)
    return out


def _dose_for(scenario: Scenario, ph, temp, alk, flag, ok, solved: dict) -> np.ndarray:
    """Dose to the aim [mol/L] for rows that passed the data checks.

    Rows with the same pH, temperature (and alkalinity) are the same water:
    each distinct one is solved once and its dose shared, and ``solved``
    keeps them for the chunks after. Logged readings are rounded (to 0.01
    or 0.001 pH), so a year of minute rows holds a few thousand distinct
    waters, not half a million.
    """
    a = as_numbers(alk) if alk is not None else None
    cols = [ph, temp] + ([a] if a is not None else [])
    first, inverse = distinct_rows(cols)
    if first.size > _FRESH_SHARE * inverse.size:
        # Most rows are waters of their own (readings to many decimals): the
        # memory of waters seen would cost a lookup a row and save nothing.
        dose, why = _dose_distinct(scenario, ph[first], temp[first],
                                   a[first] if a is not None else None)
        return _shared(dose, why, inverse, flag, ok)
    keys = list(zip(*(c[first].tolist() for c in cols)))
    known = [solved.get(k) for k in keys]
    new = np.array([v is None for v in known], dtype=bool)
    dose = np.array([v[0] if v is not None else np.nan for v in known])
    why = np.array([v[1] if v is not None else 0 for v in known], dtype=np.uint8)
    if new.any():
        fresh = first[new]
        dose[new], why[new] = _dose_distinct(scenario, ph[fresh], temp[fresh],
                                             a[fresh] if a is not None else None)
        if len(solved) > _SOLVED_MAX:
            solved.clear()
        solved.update(zip((k for k, n in zip(keys, new) if n),
                          zip(dose[new].tolist(), why[new].tolist())))
    return _shared(dose, why, inverse, flag, ok)


def _shared(dose, why, inverse, flag, ok) -> np.ndarray:
    """Each row's dose from its distinct water's, its flag set in ``flag``."""
    why = why[inverse]
    hit = why != 0
    flag[np.flatnonzero(ok)[hit]] = why[hit]
    return dose[inverse]


#: Distinct waters kept between chunks (past this the memory is started afresh).
_SOLVED_MAX = 200_000
#: Above this share of new waters in a chunk, no memory of waters is kept.
_FRESH_SHARE = 0.5


def distinct_rows(columns: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Rows that differ in at least one column: (index of each distinct
    row's first appearance, which distinct row each row is). NaN equals NaN.

    Hash-based, O(rows): each column is factorised and the codes combined.
    """
    code = np.zeros(len(columns[0]), dtype=np.int64)
    for col in columns:
        if col.size and (col == col[0]).all():
            continue                    # one value (the scenario's temperature, say)
        k, uniq = pd.factorize(col, use_na_sentinel=False)
        code, _ = pd.factorize(code * len(uniq) + k)
    # Codes number the distinct rows in order of first appearance, so a
    # row is a first appearance exactly when its code beats all before it.
    before = np.maximum.accumulate(np.concatenate([[-1], code]))[:-1]
    new = code > before
    return np.flatnonzero(new), code


def row_mixture(scenario: Scenario, ph, temp, a):
    """Each row's water as sampled, as the engine holds it: the scenario's
    solutes and metals, carbonate from the row's alkalinity (if given) and
    the strong-ion balance from its pH. Returns the mixture and two masks:
    rows whose alkalinity is unusable, and rows the model could not settle
    (their strong-ion balance is set to 0 there)."""
    w = scenario.water
    m = ph.size
    # Each row's water as sampled: the scenario's solutes and metals.
    base = np.broadcast_to(totals_vector(w.totals_mol_l, w.metals_mol_l),
                           (m, N_SYSTEMS)).copy()
    pka = w.unknown_pka
    extra = w.known_ionic_strength
    bad = np.zeros(m, dtype=bool)
    if a is not None:
        bad |= ~(a >= 0) | ~(a <= MEASURED_MAX_MG_L)
        a_eq = np.where(bad, 0.0, a) / CACO3_MG_PER_MEQ / 1000.0
        carb, coef, _ = carbonate_for_alkalinity(base, ph, temp, a_eq, ALKALINITY_ENDPOINT_PH,
                                                 activity=w.activity, extra_ionic_strength=extra,
                                                 unknown_pka=pka)
        carb = np.where((a_eq == 0) & (ph <= ALKALINITY_ENDPOINT_PH), 0.0, carb)
        bad |= ~np.isfinite(carb) | (carb < 0)
        base[:, CARBONATE] = np.where(bad, 0.0, carb)
    s, _ = strong_balance_at_ph(base, ph, temp, activity=w.activity, extra_ionic_strength=extra,
                                unknown_pka=pka, known_strong_eq_l=w.known_strong_eq_l,
                                ionic_guess=w.ionic_strength)
    co2 = (co2_in_air_mol_l(temp, w.pco2_atm) if w.dosed_at_air_equilibrium
           else np.full(m, np.nan))
    unsettled = ~np.isfinite(s) & ~bad
    s = np.where(np.isfinite(s), s, 0.0)
    tank = aerate(base) if w.ferrous_oxidised else base
    mix = replace(Mixture.build(tank, s, w.strong_ionic_strength_for(s), temp, co2, w.activity,
                                pka), calcite=w.calcite == "precipitates")
    return mix, bad, unsettled


def _dose_distinct(scenario: Scenario, ph, temp, a) -> tuple[np.ndarray, np.ndarray]:
    """Dose [mol/L] and flag code (0 when planned) for distinct waters."""
    reagent, target = scenario.reagent, scenario.target
    w, m = scenario.water, ph.size
    mix, bad, unsettled = row_mixture(scenario, ph, temp, a)
    dose, grip = dose_to_ph(mix, reagent.vector(), target.ph_aim)
    if w.calcite == "auto":
        dose = _calcite_where_fast(mix, reagent, target.ph_aim, dose)
    inside = (ph >= target.ph_min) & (ph <= target.ph_max)
    limit = reagent.practical_limit(target.ph_aim) is not None
    no_grip = ~has_grip(reagent, dose, grip) | limit
    wrong = ~no_grip & (dose < 0) & ~inside
    dose = np.where(~no_grip & (dose < 0) & inside, 0.0, dose)
    why = _no_flags(m)
    why[bad] = _FLAG_CODE["alkalinity_bad"]
    why[unsettled] = _FLAG_CODE["model_failed"]
    bad = bad | unsettled
    why[~bad & no_grip] = _FLAG_CODE["cannot_reach"]
    why[~bad & ~no_grip & wrong] = _FLAG_CODE["wrong_direction"]
    return np.where(bad | no_grip | wrong, np.nan, dose), why


def _calcite_where_fast(mix: Mixture, reagent, aim: float, dose: np.ndarray) -> np.ndarray:
    """The planner's calcite rule row by row: where the dose without calcite
    leaves the water above :data:`~dosing.planning.plan.CALCITE_SI_FAST`, the dose
    with calcite precipitating."""
    ca, c = system_index("calcium"), CARBONATE
    idx = np.flatnonzero(np.isfinite(dose) & (dose > 0) & (mix.totals_mol_l[:, c] > 0)
                         & ((mix.totals_mol_l[:, ca] > 0) | (reagent.vector().totals_mol[ca] > 0)))
    if idx.size == 0:
        return dose
    sub = mix.take(idx)
    sp = speciate(add_dose(sub, reagent.vector(), dose[idx]), aim)
    fast = idx[calcite_si(sp, sub.temperature_c) > CALCITE_SI_FAST]
    if fast.size:
        dose = dose.copy()
        dose[fast] = dose_to_ph(replace(mix.take(fast), calcite=True), reagent.vector(),
                                aim)[0]
    return dose


# ------------------------------------------------------------ parts --
# A long record cut into parts (blocks of a file, files of a site) is planned
# part by part in any order, on any worker, and gives the same totals as one
# pass: only a part's first rows depend on the rows before it (the pH run of
# the stuck-sensor check, the step from the last valid time), so each part
# plans its body alone and hands back its head, which :func:`stitch` plans in
# order once the state before it is known.

def nominal_step(frame: pd.DataFrame) -> float:
    """A record's usual time step [s]: the median step of its first chunk
    (60 s when that chunk has no step), as :func:`plan_rows` finds it."""
    state = ReplayState()
    frame = frame.reset_index(drop=True)
    _time_steps(frame, state, _no_flags(len(frame)))
    return state.nominal_s


def head_length(frame: pd.DataFrame) -> int:
    """Leading rows of a part whose results depend on the rows before it.

    A pH run reaches :data:`FLATLINE_ROWS` within the part from row
    ``FLATLINE_ROWS - 1`` on, whatever came before; a row's time step needs
    the last valid time before it, which lies inside the part after its
    first valid timestamp.
    """
    return _head_rows(_seconds(frame["timestamp"]))


def _head_rows(t: np.ndarray) -> int:
    """:func:`head_length` from the part's times [s] (NaN where unreadable)."""
    valid = np.flatnonzero(~np.isnan(t))
    first_valid = int(valid[0]) + 1 if valid.size else t.size
    return min(t.size, max(FLATLINE_ROWS - 1, first_valid))


@dataclass
class PartResult:
    """One part planned without knowing what came before it.

    ``totals`` holds the rows after the head; ``head`` is the raw leading
    rows; ``last_ph``, ``tail_run`` (rows at the end with that pH) and
    ``last_ts`` (last valid time, or None) are what the part hands on.
    """

    totals: ReplayTotals
    head: pd.DataFrame
    rows: int
    last_ph: float
    tail_run: int
    last_ts: float | None


def plan_part(frame: pd.DataFrame, scenario: Scenario, nominal_s: float,
              rate_unit: str, keep_hourly: bool = True) -> PartResult:
    """Plan one part of a record; see :func:`stitch` for putting parts together."""
    frame = frame.reset_index(drop=True)
    t = _seconds(frame["timestamp"])
    n, h = len(frame), _head_rows(t)
    totals = ReplayTotals(rate_unit=rate_unit, keep_hourly=keep_hourly)
    state = ReplayState(nominal_s=nominal_s)
    if h < n:
        totals.add(plan_rows(frame, scenario, state).iloc[h:])
    ph = as_numbers(frame["ph"])
    changes = np.flatnonzero(ph[1:] != ph[:-1])      # NaN differs from everything
    tail_run = n - 1 - int(changes[-1]) if changes.size else n
    valid = t[~np.isnan(t)]
    return PartResult(totals=totals, head=frame.iloc[:h], rows=n,
                      last_ph=float(ph[-1]) if n else math.nan, tail_run=max(tail_run, 1),
                      last_ts=float(valid[-1]) if valid.size else None)


def stitch(parts, scenario: Scenario, nominal_s: float, totals: ReplayTotals) -> None:
    """Add the parts of one record, in record order, into ``totals``.

    Each part's head is planned with the state the parts before it leave, so
    the sum equals one pass over the whole record (to rounding of the sums).
    """
    state = ReplayState(nominal_s=nominal_s)
    for part in parts:
        if len(part.head):
            totals.add(plan_rows(part.head, scenario, state))
        totals.merge(part.totals)
        body = part.rows - len(part.head)
        if body:
            # A run that reaches back into the head continues the head's run.
            state.run = part.tail_run if part.tail_run <= body else state.run + body
            state.last_ph = part.last_ph
        if part.last_ts is not None:
            state.last_ts = part.last_ts


