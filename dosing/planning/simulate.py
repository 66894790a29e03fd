"""Continuous neutralisation in time: tanks, probe, pump and controller.

The state of each tank is its reaction invariants (McAvoy, Hsu & Lowenthal
1972, Ind. Eng. Chem. Process Des. Dev. 11:68; Gustafsson & Waller 1983,
Chem. Eng. Sci. 38:389): the total of every weak-acid system and metal,
the strong-ion balance and the ionic strength the strong ions carry. They
mix linearly as flows enter and leave; the pH at any moment is the
engine's equilibrium of that state (:func:`~dosing.chem.solve_ph`, metal
hydroxides included), never an interpolation.

Over each step the inflow and the pump rate are held, and the tank is
advanced by the exact solution of its linear balance

    V dc/dt = Q c_in + u r - (Q + u v) c

(an exponential approach to its steady state, exact for held inputs at
any step length), so what entered minus what left is what the tank
gained, to rounding. A stage's outflow over the step (the exact mean of
c) feeds the next stage. Tanks are closed to air and well mixed;
precipitation is instant.

The probe reads the tank's pH after an optional transport delay through a
first-order lag, plus a calibration drift growing with time and a seeded
random noise on each reading (both optional). The pump delivers 0 or between its minimum and maximum
rate. The controller is PI (a P controller with ``ti_s`` infinite) on the
pH error, in % of the stage's nominal rate, with an optional ratio
feedforward from the influent flow and conditional integration (no
integration while the pump is at a limit and the error pushes further:
anti-windup).

Pure: arrays in, results out (:class:`DesignRun`).
"""

from __future__ import annotations

import math
import zlib
from collections import deque
from dataclasses import dataclass, field

import numpy as np

from ..chem import Mixture, solve_ph
from ..chem.columns import N_SYSTEMS
from ..chem.mixture import ReagentVector

__all__ = ["INVARIANTS", "Influent", "StageSpec", "Design", "Excursion", "DesignRun",
           "invariants_of", "reagent_invariants", "mixture_of", "run_design", "run_designs"]

#: Columns of a tank state: each system's total, strong-ion balance [eq/L]
#: and the ionic strength of the strong ions [mol/L].
INVARIANTS = N_SYSTEMS + 2
#: m3/h to L/s.
_L_S_PER_M3_H = 1000.0 / 3600.0


@dataclass(frozen=True)
class Influent:
    """The stream into the first stage, one row per logged (or made) reading."""

    t_s: np.ndarray             #: start of each row [s from the record's start]
    dt_s: np.ndarray            #: time each row stands for [s]
    flow_m3_h: np.ndarray       #: influent flow [m3/h]
    state: np.ndarray           #: (rows, INVARIANTS) the water's invariants
    temperature_c: np.ndarray   #: [°C]
    held: np.ndarray            #: rows that repeat the one before (a gap or a bad reading)
    activity: object            #: the scenario's activity model
    unknown_pka: float | None = None


@dataclass(frozen=True)
class StageSpec:
    """One dosing stage: a well-mixed tank, its probe, pump and controller."""

    volume_m3: float
    setpoint_ph: float
    nominal_mol_s: float        #: reagent rate that holds the set-point at nominal flow
    pump_max_mol_s: float
    pump_min_mol_s: float       #: the pump meters nothing below this (it stops)
    kc_pct_per_ph: float        #: controller gain [% of the nominal rate per pH]
    ti_s: float                 #: integral time [s] (math.inf: proportional only)
    feedforward: bool = True    #: ratio feedforward from the influent flow
    manual_pct: float = 0.0     #: a fixed output added to the controller's [%]
    delay_s: float = 0.0        #: dosing point to probe
    probe_lag_s: float = 30.0   #: first-order lag of the probe
    probe_noise_ph: float = 0.0     #: standard deviation of each reading's noise [pH]
    probe_drift_ph_per_h: float = 0.0   #: calibration drift of the probe [pH/h]
    tuning: str = ""            #: the rule kc and ti come from ("SIMC tight"), or ""
    gain_ph_per_pct: float = 0.0    #: process gain at the set-point [pH per % of rate]


@dataclass(frozen=True)
class Design:
    """A train of stages in series and its name in the comparison."""

    name: str
    stages: tuple[StageSpec, ...]
    nominal_flow_m3_h: float


@dataclass(frozen=True)
class Excursion:
    """The discharge outside its window without a break."""

    start_s: float
    duration_s: float
    peak_ph: float              #: the pH furthest outside the window


@dataclass
class DesignRun:
    """What one design did over the record."""

    design: Design
    t_s: np.ndarray                     #: end of each step [s]
    ph: np.ndarray                      #: (stages, steps) tank pH
    measured_ph: np.ndarray             #: (stages, steps) what each probe read
    rate_mol_s: np.ndarray              #: (stages, steps) reagent rate
    step_s: np.ndarray                  #: (steps,) length of each step
    reagent_mol: float = 0.0
    outside_s: float = 0.0              #: discharge outside the window
    excursions: tuple[Excursion, ...] = ()
    entered: np.ndarray = field(default_factory=lambda: np.zeros(INVARIANTS))
    left: np.ndarray = field(default_factory=lambda: np.zeros(INVARIANTS))
    held_start: np.ndarray | None = None    #: (stages, INVARIANTS) x volume, at the start
    held_end: np.ndarray | None = None

    @property
    def total_s(self) -> float:
        return float(self.step_s.sum())

    def at_limit_s(self, stage: int) -> tuple[float, float]:
        """Seconds a stage's pump spent at its maximum and stopped."""
        st = self.design.stages[stage]
        r = self.rate_mol_s[stage]
        return (float(self.step_s[r >= st.pump_max_mol_s * (1 - 1e-12)].sum()),
                float(self.step_s[r <= 0.0].sum()))


def invariants_of(mix: Mixture) -> np.ndarray:
    """(n, INVARIANTS) states of a mixture's waters."""
    return np.column_stack([mix.totals_mol_l, mix.strong_eq_l, mix.strong_ionic_strength])


def reagent_invariants(r: ReagentVector) -> np.ndarray:
    """What one mole of product adds to a tank's invariants."""
    return np.concatenate([r.totals_mol, [r.strong_eq, r.ionic_strength]])


def mixture_of(state: np.ndarray, temperature_c, activity, unknown_pka=None) -> Mixture:
    """The engine's mixture for tank states (closed to air)."""
    s = np.atleast_2d(state)
    return Mixture.build(s[:, :N_SYSTEMS], s[:, N_SYSTEMS], s[:, N_SYSTEMS + 1],
                         temperature_c, math.nan, activity, unknown_pka)


def tank_step(c, c_in, q_l_s: float, u_mol_s: float, r_inv, v_l_mol: float,
              volume_l: float, h: float):
    """A tank's state after ``h`` seconds of held inputs, and the exact mean
    state over the step (what flowed out, per litre)."""
    out_l_s = q_l_s + u_mol_s * v_l_mol
    if out_l_s <= 0.0:
        return c + u_mol_s * r_inv * h / volume_l, c + u_mol_s * r_inv * h / (2 * volume_l)
    a = out_l_s / volume_l
    steady = (q_l_s * c_in + u_mol_s * r_inv) / out_l_s
    decay = math.exp(-a * h)
    c_new = steady + (c - steady) * decay
    mean = steady + (c - steady) * (-math.expm1(-a * h)) / (a * h)
    return c_new, mean


def _pump(st: StageSpec, wanted: float) -> float:
    """What the pump delivers for a wanted rate [mol/s]."""
    u = min(max(wanted, 0.0), st.pump_max_mol_s)
    if 0.0 < u < st.pump_min_mol_s:
        u = st.pump_min_mol_s if u >= 0.5 * st.pump_min_mol_s else 0.0
    return u


def _controller(st: StageSpec, error: float, integral: float, flow_ratio: float,
                h: float) -> tuple[float, float]:
    """Pump rate [mol/s] and the new integral [pH s]; ``error`` is positive
    when more reagent is needed."""
    base = st.manual_pct + (100.0 * flow_ratio if st.feedforward else 0.0)
    ti = st.ti_s if st.ti_s > 0 else math.inf
    wanted = (base + st.kc_pct_per_ph * (error + integral / ti)) * 0.01 * st.nominal_mol_s
    u = _pump(st, wanted)
    saturated = (wanted >= st.pump_max_mol_s and error > 0) or (wanted <= 0.0 and error < 0)
    if not saturated and math.isfinite(ti):
        integral += error * h
    return u, integral


def _start(design: Design, first: np.ndarray, temp: float, activity, pka, r_inv, v_r):
    """Tanks at the steady state of the nominal flow with the nominal rates;
    probes reading the set-points; integrals that start the output there."""
    q = design.nominal_flow_m3_h * _L_S_PER_M3_H
    states, c_in = [], first
    for st in design.stages:
        out = q + st.nominal_mol_s * v_r            # the balance at rest: in = out
        c = (q * c_in + st.nominal_mol_s * r_inv) / out
        states.append(c)
        c_in, q = c, out
    ph = solve_ph(mixture_of(np.array(states), temp, activity, pka))
    integrals = []
    for st in design.stages:
        need = 0.0 if st.feedforward else 100.0 - st.manual_pct
        ok = st.kc_pct_per_ph > 0 and math.isfinite(st.ti_s)
        integrals.append(need * st.ti_s / st.kc_pct_per_ph if ok else 0.0)
    return np.array(states), ph, integrals


class _Loop:
    """One design's tanks, probes and controllers as a run goes."""

    def __init__(self, design: Design, influent: Influent, reagent: ReagentVector,
                 raises_ph: bool, step_s: float, seed: int = 0):
        self.design, self.influent = design, influent
        self.r_inv, self.v_r = reagent_invariants(reagent), reagent.volume_l
        self.vol_l = np.array([st.volume_m3 * 1000.0 for st in design.stages])
        self.c, self.ph, self.integ = _start(
            design, influent.state[0], float(influent.temperature_c[0]), influent.activity,
            influent.unknown_pka, self.r_inv, self.v_r)
        self.measured = self.ph.copy()      # the probe's lagged view of the tank
        self.reading = self.ph.copy()       # what it reports: plus drift and noise
        self.rng = np.random.default_rng(seed)
        self.delays = [deque([p] * max(0, round(st.delay_s / step_s)))
                       for st, p in zip(design.stages, self.ph)]
        self.sign = 1.0 if raises_ph else -1.0
        self.run = DesignRun(design, *(np.empty(0),) * 5)
        self.run.held_start = self.c * self.vol_l[:, None]
        self.trace = _Trace()
        self.rates = np.zeros(len(design.stages))

    def advance(self, i: int, h: float) -> None:
        """Controllers and tanks over one step of influent row ``i``."""
        inf, run = self.influent, self.run
        q = inf.flow_m3_h[i] * _L_S_PER_M3_H
        ratio = inf.flow_m3_h[i] / self.design.nominal_flow_m3_h
        c_in, q_in = inf.state[i], q
        run.entered += q * c_in * h
        for k, st in enumerate(self.design.stages):
            err = self.sign * (st.setpoint_ph - self.reading[k])
            u, self.integ[k] = _controller(st, err, self.integ[k], ratio, h)
            self.rates[k] = u
            run.entered += u * self.r_inv * h
            self.c[k], mean = tank_step(self.c[k], c_in, q_in, u, self.r_inv, self.v_r,
                                        self.vol_l[k], h)
            c_in, q_in = mean, q_in + u * self.v_r
        run.left += q_in * c_in * h
        run.reagent_mol += float(self.rates.sum()) * h

    def observe(self, ph: np.ndarray, h: float, t: float) -> None:
        """The tanks' new pH: probes read it, the trace keeps it."""
        self.ph = ph
        _read_probes(self.design, ph, self.measured, self.delays, h)
        for k, st in enumerate(self.design.stages):
            noise = self.rng.normal(0.0, st.probe_noise_ph) if st.probe_noise_ph > 0 else 0.0
            self.reading[k] = self.measured[k] + st.probe_drift_ph_per_h * t / 3600.0 + noise
        self.trace.add(t, h, ph, self.reading, self.rates)

    def finish(self, window) -> DesignRun:
        self.run.held_end = self.c * self.vol_l[:, None]
        return _finish(self.run, self.trace, window)


def run_designs(influent: Influent, designs, reagent: ReagentVector, raises_ph: bool,
                window: tuple[float, float], step_s: float) -> list[DesignRun]:
    """Run several designs over the same influent record, side by side: each
    step solves the pH of every tank of every design at once."""
    # Each design's probe noise from its own generator, seeded by its name:
    # a design reads the same noise alone or beside others.
    loops = [_Loop(d, influent, reagent, raises_ph, step_s, zlib.crc32(d.name.encode()))
             for d in designs]
    ends = np.cumsum([len(d.stages) for d in designs])
    spans = list(zip(np.concatenate([[0], ends[:-1]]), ends))
    ph = np.concatenate([lp.ph for lp in loops])
    t = 0.0
    for i in range(influent.t_s.size):
        n_sub = max(1, round(influent.dt_s[i] / step_s))
        h = influent.dt_s[i] / n_sub
        temp = influent.temperature_c[i]
        for _ in range(n_sub):
            for lp in loops:
                lp.advance(i, h)
            states = np.concatenate([lp.c for lp in loops])
            ph = solve_ph(mixture_of(states, temp, influent.activity, influent.unknown_pka),
                          ph_guess=ph)
            t += h
            for lp, (a, b) in zip(loops, spans):
                lp.observe(ph[a:b], h, t)
    return [lp.finish(window) for lp in loops]


def run_design(influent: Influent, design: Design, reagent: ReagentVector, raises_ph: bool,
               window: tuple[float, float], step_s: float) -> DesignRun:
    """Run one design over the influent record."""
    return run_designs(influent, [design], reagent, raises_ph, window, step_s)[0]


def _read_probes(design: Design, ph, measured, delays, h: float) -> None:
    """Each probe moves toward the (delayed) tank pH through its lag."""
    for k, st in enumerate(design.stages):
        seen = ph[k]
        if delays[k]:
            delays[k].append(ph[k])
            seen = delays[k].popleft()
        lag = st.probe_lag_s
        measured[k] = seen if lag <= 0 else measured[k] + (seen - measured[k]) * (
            -math.expm1(-h / lag))


class _Trace:
    """Per-step records, gathered in lists and stacked once."""

    def __init__(self):
        self.t, self.h, self.ph, self.meas, self.rate = [], [], [], [], []

    def add(self, t, h, ph, meas, rate) -> None:
        self.t.append(t)
        self.h.append(h)
        self.ph.append(ph.copy())
        self.meas.append(meas.copy())
        self.rate.append(rate.copy())


def _finish(run: DesignRun, trace: _Trace, window) -> DesignRun:
    """Stack the trace; time outside the window and the excursions."""
    run.t_s = np.array(trace.t)
    run.step_s = np.array(trace.h)
    run.ph = np.array(trace.ph).T
    run.measured_ph = np.array(trace.meas).T
    run.rate_mol_s = np.array(trace.rate).T
    out = run.ph[-1]
    lo, hi = window
    outside = (out < lo) | (out > hi)
    run.outside_s = float(run.step_s[outside].sum())
    run.excursions = excursions(run.t_s, run.step_s, out, outside, window)
    return run


def excursions(t_s, step_s, ph, outside, window) -> tuple[Excursion, ...]:
    """Runs of steps outside the window: start, length and the furthest pH."""
    if not outside.any():
        return ()
    edges = np.diff(np.concatenate([[0], outside.astype(np.int8), [0]]))
    starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    lo, hi = window
    out = []
    for a, b in zip(starts, ends):
        seg = ph[a:b]
        dev = np.where(seg < lo, lo - seg, seg - hi)
        j = int(np.argmax(dev))
        out.append(Excursion(float(t_s[a] - step_s[a]), float(step_s[a:b].sum()),
                             float(seg[j])))
    return tuple(out)
