"""Seconds to simulate continuous neutralisation, against scipy's solve_ivp.

One stage (feedback with ratio feedforward, SIMC tight) on the food-waste
demo over made-up disturbances: the simulator's exact-step loop at 10 s
and 1 s steps beside ``scipy.integrate.solve_ivp`` (LSODA, row by row) of
the same model over the same record, and how far apart their pH is. Then
two stages, and the year the issue asks about, estimated from the rate.
Prints figures (best of three, load noted); asserts nothing.

    python benchmarks/bench_simulate.py [--hours 24]
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from _timing import best_of  # noqa: E402
from dosing.io.scenario import load_scenario  # noqa: E402
from dosing.planning.job import make_plan  # noqa: E402
from dosing.planning.simulate import mixture_of, run_design  # noqa: E402
from dosing.planning.simulate_design import DesignChoice, build_design  # noqa: E402
from dosing.planning.simulate_influent import synthetic_influent  # noqa: E402
from tests.sim_reference import no_delay, reference_ph  # noqa: E402

YEAR_S = 365 * 86400.0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--hours", type=float, default=24.0)
    hours = ap.parse_args().hours
    s = load_scenario(ROOT / "scenarios" / "food-acetate-stream.toml")
    plan = make_plan(s, sampled=False)
    inf = synthetic_influent(s, hours, seed=5)
    mix0 = mixture_of(inf.state[0], inf.temperature_c[0], inf.activity, inf.unknown_pka)
    r = s.reagent.vector()
    print(f"load average {os.getloadavg()[0]:.2f}; {hours:g} h of made-up disturbances, "
          f"{inf.t_s.size} rows; best of 3")
    one = no_delay(build_design(DesignChoice(1, "tight", delay_s=0.0), s, mix0, 1.3, 10.0,
                                plan.control))
    t_ivp, (t_ref, ph_ref) = best_of(lambda: reference_ph(inf, one, r, True), 1)
    print(f"  solve_ivp (LSODA), 1 stage      {t_ivp:8.2f} s")
    for step in (10.0, 1.0):
        t, run = best_of(lambda: run_design(inf, one, r, True, (6.0, 10.0), step),
                         3 if step >= 10 else 1)
        diff = np.abs(np.interp(t_ref, run.t_s, run.ph[0]) - ph_ref).max()
        steps = run.t_s.size
        print(f"  exact step {step:4g} s, 1 stage     {t:8.2f} s  ({steps:,} steps, "
              f"{t / steps * 1e6:.0f} µs a step; solve_ivp / this {t_ivp / t:.2f}; "
              f"max pH apart {diff:.4f})")
    two = build_design(DesignChoice(2, "tight"), s, mix0, 1.3, 10.0, plan.control)
    t2, run2 = best_of(lambda: run_design(inf, two, r, True, (6.0, 10.0), 10.0), 3)
    per_step = t2 / run2.t_s.size
    print(f"  exact step   10 s, 2 stages    {t2:8.2f} s  ({per_step * 1e6:.0f} µs a step)")
    print(f"  a year of 2 stages at 10 s steps: about {YEAR_S / 10 * per_step / 60:.0f} min "
          "(the issue asks under 1 min)")


if __name__ == "__main__":
    main()
