"""The influent of a simulation: made-up disturbances, or a logged record.

* :func:`synthetic_influent`: the scenario's water at its pH and flow,
  with steps in flow (within the scenario's flow range, or +-30 % of the
  nominal flow without one) every 30 to 120 minutes and in pH (+-0.3)
  every 1 to 3 hours, drawn from a seeded generator: invented disturbances
  for comparing designs, not a forecast.
* :func:`record_influent`: rows of a logged record (the columns ``replay``
  reads); a row with a missing or implausible reading, or a gap in time,
  holds the row before, and is counted.

Each row's water is the engine's (:func:`~dosing.planning.replay.row_mixture`):
the scenario's solutes and metals, carbonate from the row's alkalinity
when logged, the strong-ion balance from its pH.

Pure: arrays and frames in, :class:`~dosing.planning.simulate.Influent` out.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..chem import dose_to_ph
from ..errors import InputError
from dataclasses import dataclass

from .replay import ReplayState, _readings, _time_steps, distinct_rows, row_mixture
from .simulate import Influent, invariants_of

__all__ = ["synthetic_influent", "record_influent", "static_reagent_mol", "Disturbance",
           "scheduled_influent", "made_influent"]

#: Flow steps without a scenario flow range: +-30 % (invented disturbances).
_FLOW_SWING = 0.3
#: pH steps of the made-up influent [pH].
_PH_SWING = 0.3


def _steps(rng, n: int, row_s: float, every_s: tuple[float, float], draw,
           first: float) -> np.ndarray:
    """A piecewise-constant series of ``n`` rows changing at random times,
    starting at ``first`` (the scenario's own value) for a first stretch."""
    out = np.empty(n)
    i, value = 0, first
    while i < n:
        length = max(1, int(rng.uniform(*every_s) / row_s))
        out[i:i + length] = value
        i += length
        value = draw()
    return out


def synthetic_influent(scenario, hours: float, seed: int, row_s: float = 60.0) -> Influent:
    """``hours`` of made-up disturbances around the scenario's stream."""
    rng = np.random.default_rng(seed)
    n = max(2, int(round(hours * 3600.0 / row_s)))
    q = scenario.basis.m3_per_h
    lo, hi = scenario.flow_range_m3_h or (q * (1 - _FLOW_SWING), q * (1 + _FLOW_SWING))
    flow = _steps(rng, n, row_s, (1800.0, 7200.0), lambda: rng.uniform(lo, hi), q)
    ph0 = scenario.water.ph
    ph = np.clip(ph0 + _steps(rng, n, row_s, (3600.0, 10800.0),
                              lambda: rng.uniform(-_PH_SWING, _PH_SWING), 0.0), 0.5, 13.5)
    temp = np.full(n, scenario.water.temperature_c)
    state = _states(scenario, ph, temp, None)
    return Influent(np.arange(n) * row_s, np.full(n, row_s), flow, state, temp,
                    np.zeros(n, dtype=bool), scenario.water.activity,
                    scenario.water.unknown_pka)


@dataclass(frozen=True)
class Disturbance:
    """A step (or a ramp) of the influent, from a scenario's [[disturbance]]."""

    at_h: float
    flow_m3_h: float | None     #: the flow from then on (None: unchanged)
    ph: float | None            #: the influent pH from then on (None: unchanged)
    ramp_h: float = 0.0         #: reached over this time (0: a step)


def _schedule(t_h: np.ndarray, start: float, changes) -> np.ndarray:
    """A series that starts at ``start`` and moves to each (at, value, ramp)
    in turn: a step, or a straight ramp from wherever it stands then."""
    out = np.full(t_h.size, start)
    for at, value, ramp in changes:
        before = float(np.interp(at, t_h, out))
        if ramp > 0:
            share = np.clip((t_h - at) / ramp, 0.0, 1.0)
            out = np.where(t_h >= at, before + (value - before) * share, out)
        else:
            out = np.where(t_h >= at, value, out)
    return out


def scheduled_influent(scenario, hours: float, row_s: float = 60.0) -> Influent:
    """The scenario's stream with its [[disturbance]] steps and ramps."""
    n = max(2, int(round(hours * 3600.0 / row_s)))
    t_h = np.arange(n) * row_s / 3600.0
    ds = scenario.disturbances
    flow = _schedule(t_h, scenario.basis.m3_per_h,
                     [(d.at_h, d.flow_m3_h, d.ramp_h) for d in ds if d.flow_m3_h is not None])
    ph = _schedule(t_h, scenario.water.ph,
                   [(d.at_h, d.ph, d.ramp_h) for d in ds if d.ph is not None])
    ph = np.round(ph, 4)                # a ramp's rows share waters to the 4th decimal
    temp = np.full(n, scenario.water.temperature_c)
    return Influent(np.arange(n) * row_s, np.full(n, row_s), flow,
                    _states(scenario, ph, temp, None), temp, np.zeros(n, dtype=bool),
                    scenario.water.activity, scenario.water.unknown_pka)


def made_influent(scenario, hours: float, seed: int) -> tuple[Influent, str]:
    """The scenario's own [[disturbance]] steps and ramps when it has any,
    else made-up ones; and the words that say which."""
    if scenario.disturbances:
        n = len(scenario.disturbances)
        return (scheduled_influent(scenario, hours),
                f"the scenario's {n} disturbance{'s' if n > 1 else ''}")
    return synthetic_influent(scenario, hours, seed), f"made-up disturbances (seed {seed})"


def _states(scenario, ph, temp, alk) -> np.ndarray:
    """Invariants of each row's water, each distinct water solved once."""
    cols = [ph, temp] + ([alk] if alk is not None else [])
    first, inverse = distinct_rows(cols)
    mix, bad, unsettled = row_mixture(scenario, ph[first], temp[first],
                                      None if alk is None else alk[first])
    if (bad | unsettled).any():
        raise InputError("data", "a reading gives a water the model cannot settle "
                         "(an alkalinity no water at that pH can have)")
    return invariants_of(mix)[inverse]


def record_influent(frame: pd.DataFrame, scenario) -> tuple[Influent, int]:
    """A logged record as the influent, and how many rows were held."""
    state = ReplayState()
    flag = np.zeros(len(frame), dtype=np.uint8)
    t, dt = _time_steps(frame, state, flag)
    flow, ph, temp = _readings(frame, scenario, flag)
    alk = (pd.to_numeric(frame["alkalinity_mg_l_as_caco3"], errors="coerce").to_numpy(float)
           if "alkalinity_mg_l_as_caco3" in frame else None)
    good = flag == 0
    if alk is not None:
        good &= np.isfinite(alk) & (alk >= 0)
    if not good.any():
        raise InputError("data", "no row has a usable time, flow and pH")
    # A bad row holds the last good one before it (the first good one at the start).
    idx = np.where(good, np.arange(len(frame)), -1)
    idx = np.maximum.accumulate(idx)
    idx[idx < 0] = int(np.flatnonzero(good)[0])
    flow, ph, temp = flow[idx], ph[idx], temp[idx]
    alk = None if alk is None else alk[idx]
    start = np.nanmin(t) if np.isfinite(t).any() else 0.0
    t_rel = np.where(np.isfinite(t), t - start, 0.0)
    states = _states(scenario, ph, temp, alk)
    keep = dt > 0
    return Influent(t_rel[keep], dt[keep], flow[keep], states[keep], temp[keep],
                    ~good[keep], scenario.water.activity,
                    scenario.water.unknown_pka), int((~good).sum())


def static_reagent_mol(influent: Influent, scenario) -> float:
    """Reagent [mol] if every row were dosed exactly to the aim at once
    (what ``replay`` assumes), for the same record."""
    from .simulate import mixture_of
    first, inverse = distinct_rows([influent.state[:, j] for j in
                                    range(influent.state.shape[1])] + [influent.temperature_c])
    mix = mixture_of(influent.state[first], influent.temperature_c[first],
                     influent.activity, influent.unknown_pka)
    dose, _ = dose_to_ph(mix, scenario.reagent.vector(), scenario.target.ph_aim)
    dose = np.where(np.isfinite(dose) & (dose > 0), dose, 0.0)[inverse]
    return float(np.sum(dose * influent.flow_m3_h * 1000.0 / 3600.0 * influent.dt_s))
