"""Designs to simulate, from a flow scenario: stages, set-points, pumps, tuning.

For each design the engine gives, at the nominal influent:

* each stage's set-point: one stage aims at the scenario's aim; with two
  or three, the first stages take a share of the dose (the control
  design's split when it has one, else 90 % in the first of two: the bulk
  and trim of Shinskey 1973, *pH and pIon Control*, from memory) and the
  last trims to the aim;
* each stage's nominal rate: the dose that brings its inlet to its
  set-point, times its inlet flow;
* each stage's process gain at its set-point (pH per 1 % of its rate, the
  slope of the titration curve there) and its residence time V/Q.

Tuning is the SIMC rule of Skogestad (2003, J. Process Control 13:291,
from memory) for a first-order process with dead time: Kc = tau /
(K (tau_c + theta)), Ti = min(tau, 4 (tau_c + theta)), with theta the
probe's delay plus its lag plus half a step, and tau_c = theta ("tight")
or 3 theta ("smooth"). The gain is taken at the set-point, where the
titration curve of a strong acid or base is steepest, so the loop is
slower, not unstable, away from it.

Pure: numbers in, designs out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..chem import add_dose, dose_to_ph, solve_ph
from ..errors import InputError
from .simulate import Design, StageSpec

__all__ = ["DesignChoice", "TUNINGS", "build_design", "PUMP_TURNDOWN", "PUMP_HEADROOM",
           "Simulation", "simulate", "simulation_refusal", "own_design_simulation",
           "design_residence_min"]

#: tau_c as a multiple of the dead time, per tuning name (Skogestad 2003).
TUNINGS = {"tight": 1.0, "smooth": 3.0}
#: A metering pump's turndown by stroke and speed (common practice: 100:1).
PUMP_TURNDOWN = 100.0
#: Pump maximum over the nominal rate at the highest flow (common practice).
PUMP_HEADROOM = 2.0
#: Most integration steps one run may take (about an hour at 1.5 ms a step).
MAX_STEPS = 2_000_000
#: Share of the dose in the first of two stages without a control design's split.
_FIRST_SHARE = 0.9


@dataclass(frozen=True)
class DesignChoice:
    """What differs between the designs compared."""

    stages: int = 1
    tuning: str = "tight"
    feedforward: bool = True
    residence_min: float | None = 10.0     #: None: the site's control design's (fleet)
    probe_lag_s: float = 30.0
    delay_s: float = 10.0
    probe_noise_ph: float = 0.0
    probe_drift_ph_per_h: float = 0.0
    name_residence: bool = False    #: the name says the residence time (sizes compared)

    @property
    def name(self) -> str:
        ff = "" if self.feedforward else ", no feedforward"
        size = f", {self.residence_min:g} min" if self.name_residence else ""
        return f"{self.stages} stage{'s' if self.stages > 1 else ''}, {self.tuning}{ff}{size}"


def _shares(n: int, control) -> list[float]:
    """Cumulative share of the dose reached after each stage."""
    if n == 1:
        return [1.0]
    if control is not None and len(control.stages) == n:
        return list(np.cumsum([s.share for s in control.stages]))
    first = _FIRST_SHARE if n == 2 else 0.8
    return [first] + ([0.97] if n == 3 else []) + [1.0]


def _stage_points(mix, reagent, aim: float, shares, flow_l_s: float):
    """Set-point, nominal rate [mol/s], gain [pH/%] and inlet flow of each stage."""
    r = reagent.vector()
    total, _ = dose_to_ph(mix, r, aim)
    total = float(total[0])
    if not math.isfinite(total) or total <= 0:
        raise InputError("target.ph_aim", "the nominal influent needs no dose of this "
                         "product to reach the aim: nothing to control")
    points, inlet, q = [], mix, flow_l_s
    for k, share in enumerate(shares):
        setpoint = aim if k == len(shares) - 1 else float(
            solve_ph(add_dose(mix, r, share * total))[0])
        d = float(dose_to_ph(inlet, r, setpoint)[0][0])
        probe = solve_ph(add_dose(inlet.repeat(2), r, np.array([0.99 * d, 1.01 * d])))
        gain = abs(float(probe[1] - probe[0])) / 2.0
        points.append((setpoint, d * q, gain, q))
        inlet = add_dose(inlet, r, d)
        q = q + d * q * r.volume_l
    return points


def build_design(choice: DesignChoice, scenario, mix, flow_max_ratio: float,
                 step_s: float, control=None) -> Design:
    """One design for a scenario's nominal influent ``mix`` (one row)."""
    if choice.tuning not in TUNINGS:
        raise InputError("tuning", f"{choice.tuning!r}; allowed: {', '.join(TUNINGS)}")
    q_nom = scenario.basis.m3_per_h
    points = _stage_points(mix, scenario.reagent, scenario.target.ph_aim,
                           _shares(choice.stages, control), q_nom * 1000.0 / 3600.0)
    stages = []
    theta = choice.delay_s + choice.probe_lag_s + step_s / 2.0
    for setpoint, nominal, gain, q_l_s in points:
        volume_m3 = q_l_s * 3.6 * choice.residence_min / 60.0
        tau = volume_m3 * 1000.0 / q_l_s
        tau_c = TUNINGS[choice.tuning] * theta
        kc = tau / (gain * (tau_c + theta)) if gain > 0 else 0.0
        ti = min(tau, 4.0 * (tau_c + theta))
        pump_max = PUMP_HEADROOM * nominal * max(1.0, flow_max_ratio)
        stages.append(StageSpec(
            volume_m3=volume_m3, setpoint_ph=setpoint, nominal_mol_s=nominal,
            pump_max_mol_s=pump_max, pump_min_mol_s=pump_max / PUMP_TURNDOWN,
            kc_pct_per_ph=kc, ti_s=ti, feedforward=choice.feedforward,
            delay_s=choice.delay_s, probe_lag_s=choice.probe_lag_s,
            probe_noise_ph=choice.probe_noise_ph,
            probe_drift_ph_per_h=choice.probe_drift_ph_per_h,
            tuning=f"SIMC {choice.tuning}", gain_ph_per_pct=gain))
    return Design(choice.name, tuple(stages), q_nom)


@dataclass(frozen=True)
class Simulation:
    """Designs run over one influent record, side by side."""

    title: str
    source: str                 #: the record's file, or "made-up disturbances"
    hours: float
    step_s: float
    rows: int
    rows_held: int
    window: tuple[float, float]
    aim: float
    reagent: object             #: the scenario's Reagent
    static_mol: float           #: reagent if every row were dosed exactly (replay)
    runs: tuple                 #: DesignRun per design


def simulate(scenario, influent, choices, *, source: str, rows_held: int = 0,
             step_s: float = 10.0, control=None) -> Simulation:
    """Run each design choice over ``influent`` for a flow scenario."""
    from .simulate import mixture_of, run_designs
    from .simulate_influent import static_reagent_mol
    if not 1.0 <= step_s <= 600.0:
        raise InputError("step_s", f"{step_s:g} s; allowed: 1 to 600 s")
    seconds = float(influent.dt_s.sum())
    if seconds / step_s > MAX_STEPS:
        raise InputError("step_s", f"the record needs {seconds / step_s:,.0f} steps, beyond "
                         f"{MAX_STEPS:,}: simulate a part of it, or a longer step")
    if any(c.probe_lag_s + c.delay_s >= seconds for c in choices):
        raise InputError("probe_lag_s", "the probe's lag and delay are longer than the "
                         "record: give a longer record or a faster probe")
    mix0 = mixture_of(influent.state[0], influent.temperature_c[0], influent.activity,
                      influent.unknown_pka)
    q = scenario.basis.m3_per_h
    high = max(float(np.max(influent.flow_m3_h)), (scenario.flow_range_m3_h or (q, q))[1])
    window = (scenario.target.ph_min, scenario.target.ph_max)
    designs = [build_design(choice, scenario, mix0, high / q, step_s, control)
               for choice in choices]
    runs = run_designs(influent, designs, scenario.reagent.vector(),
                       scenario.reagent.raises_ph, window, step_s)
    return Simulation(scenario.title, source, float(influent.dt_s.sum()) / 3600.0, step_s,
                      int(influent.t_s.size), rows_held, window, scenario.target.ph_aim,
                      scenario.reagent, static_reagent_mol(influent, scenario), tuple(runs))


def simulation_refusal(scenario) -> tuple[str, str] | None:
    """(scenario key, why) when a scenario cannot be simulated, else None."""
    from .basis import Flow
    if scenario.train:
        return "[[step]]", ("simulate runs one dosing point per stage; a treatment train "
                            "is not simulated")
    if not isinstance(scenario.basis, Flow):
        return "[flow]", ("simulate needs a continuous stream: give [flow] m3_per_h "
                          "instead of [batch]")
    slow = scenario.reagent.compound.formula in ("Ca(OH)2", "CaO", "Mg(OH)2", "CaCO3")
    if scenario.reagent.form != "liquid" or slow:
        return "reagent", (f"{scenario.reagent.name} is a slurry or a solid that dissolves "
                           "over minutes, which the simulation does not model; simulate "
                           "with a liquid product")
    return None


def design_residence_min(control) -> float:
    """Residence time of a stage's tank [min]: the control design's, or
    10 min without one (common practice for a fast reagent, control.py)."""
    return control.stages[0].residence_min if control else 10.0


def own_design_simulation(scenario, plan, hours: float, seed: int = 1,
                          stages: tuple[int, ...] | None = None) -> Simulation:
    """A flow plan's own control design (its stage count, or each of
    ``stages``; its residence time, ratio feedforward, tight tuning) over
    the scenario's disturbances or made-up ones."""
    from .simulate_influent import made_influent
    control = plan.control
    counts = stages or ((len(control.stages) if control else 1),)
    residence = design_residence_min(control)
    influent, source = made_influent(scenario, hours, seed)
    return simulate(scenario, influent, [DesignChoice(n, "tight", True, residence)
                                         for n in counts],
                    source=source, control=control)
