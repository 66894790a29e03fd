"""``dosing simulate``: continuous neutralisation in time, designs side by side.

Reads a flow scenario and, optionally, a logged record (the files
``replay`` reads); without one, made-up disturbances around the scenario's
stream. Each design (stages times tunings) runs over the same influent;
the comparison prints as text or JSON. Every error is one line (exit 2);
nothing is written when a run fails.
"""

from __future__ import annotations

import sys

from .errors import ScenarioError, UsageError
from .io.files import write_atomic
from .io.outputs import check_outputs
from .report.numbers import require_finite, to_json

__all__ = ["add_parser", "cmd_simulate"]



def add_parser(sub) -> None:
    s = sub.add_parser("simulate", help="simulate tanks, probe, pump and controller over "
                       "time and compare designs")
    s.add_argument("scenario", nargs="?", help="flow scenario: water model, reagent, window")
    s.add_argument("--fleet", metavar="FLEET.toml", help="simulate every site of a fleet "
                   "file (as replay --fleet reads) on Dask, each site's record one task")
    s.add_argument("--workers", type=int, metavar="N",
                   help="local Dask workers for --fleet (default: one per core)")
    s.add_argument("--scheduler", metavar="ADDRESS",
                   help="run --fleet on this Dask cluster")
    s.add_argument("--data", nargs="+", metavar="FILE", help="logged record (CSV or "
                   "Parquet with timestamp, flow and pH, as replay reads); default: the "
                   "scenario's [[disturbance]] steps and ramps, or made-up ones")
    s.add_argument("--hours", type=float, default=24.0,
                   help="length of the made-up record (default 24)")
    s.add_argument("--seed", type=int, default=1, help="seed of the made-up record")
    s.add_argument("--step-s", type=float, default=10.0,
                   help="integration step in seconds (default 10)")
    s.add_argument("--stages", default="1,2", help="stage counts to compare (default 1,2)")
    s.add_argument("--tunings", default="tight,smooth",
                   help="controller tunings to compare: tight, smooth (default both)")
    s.add_argument("--without-feedforward", action="store_true",
                   help="also run each design with feedback only (no flow feedforward)")
    s.add_argument("--residence-min", default=None,
                   help="residence time of each stage's tank in minutes; several "
                   "separated by commas compare tank sizes (default: the "
                   "control design's)")
    s.add_argument("--probe-lag-s", type=float, default=30.0, help="probe lag (default 30 s)")
    s.add_argument("--delay-s", type=float, default=10.0,
                   help="dosing point to probe transport delay (default 10 s)")
    s.add_argument("--probe-noise-ph", type=float, default=0.0,
                   help="random noise on each probe reading, standard deviation in pH "
                   "(default 0)")
    s.add_argument("--probe-drift-ph-per-day", type=float, default=0.0,
                   help="calibration drift of the probes, pH per day (default 0)")
    s.add_argument("--json", action="store_true", help="print the comparison as JSON")
    s.add_argument("--plot", metavar="FILE.png", help="write the discharge pH and pump "
                   "rate of each design against the window")
    s.add_argument("--units", choices=("metric", "us"), default="metric")
    s.add_argument("--force", action="store_true", help="replace an existing output file "
                   "this program did not write")


def _range(option: str, value: float, low: float, high: float, unit: str) -> float:
    if not low <= value <= high:
        raise UsageError(option, f"{value:g}; allowed: {low:g} to {high:g} {unit}")
    return value


def _residences(args) -> list[float] | None:
    """The tank residence times asked for [min], or None for the default."""
    if args.residence_min is None:
        return None
    try:
        values = sorted({float(v) for v in str(args.residence_min).split(",") if v.strip()})
    except ValueError:
        values = []
    if not values or not all(0.5 <= v <= 240.0 for v in values):
        raise UsageError("--residence-min", f"{args.residence_min!r}; allowed: minutes from "
                         "0.5 to 240, separated by commas")
    return values


def _choices(args, residences: list):
    from .planning.simulate_design import TUNINGS, DesignChoice
    try:
        stages = sorted({int(v) for v in args.stages.split(",") if v.strip()})
    except ValueError:
        stages = []
    if not stages or not set(stages) <= {1, 2, 3}:
        raise UsageError("--stages", f"{args.stages!r}; give 1, 2 or 3, separated by commas")
    tunings = [v.strip() for v in args.tunings.split(",") if v.strip()]
    if not tunings or not set(tunings) <= set(TUNINGS):
        raise UsageError("--tunings", f"{args.tunings!r}; allowed: {', '.join(TUNINGS)}")
    feeds = (True, False) if args.without_feedforward else (True,)
    named = len(residences) > 1         # several tank sizes: each design says its own
    return [DesignChoice(n, t, ff, r, args.probe_lag_s, args.delay_s,
                         args.probe_noise_ph, args.probe_drift_ph_per_day / 24.0, named)
            for r in residences for ff in feeds for n in stages for t in tunings]


def _scenario(path: str):
    from .io.scenario import load_scenario
    from .planning.simulate_design import simulation_refusal
    scenario = load_scenario(path)
    refusal = simulation_refusal(scenario)
    if refusal:
        raise ScenarioError(path, *refusal)
    return scenario


def _influent(args, scenario):
    from .planning.simulate_influent import made_influent, record_influent
    if not args.data:
        _range("--hours", args.hours, 0.1, 24.0 * 366, "h")
        influent, source = made_influent(scenario, args.hours, args.seed)
        return influent, 0, source
    import pandas as pd
    from .io.replay_io import iter_chunks, site_files
    files = site_files(args.data, where="data")
    frame = pd.concat([c for f in files for c in iter_chunks(f)], ignore_index=True)
    influent, held = record_influent(frame, scenario)
    return influent, held, ", ".join(files)


def _fleet(args, step: float) -> int:
    """``--fleet``: every site's record, each one task on Dask."""
    from .io.fleet import dask_client, load_fleet
    from .simulate_fleet import check_sites, simulate_sites
    from .report.simulate_report import render_fleet_simulation
    if args.scenario or args.data or args.plot:
        raise UsageError("--fleet", "the fleet file names each site's scenario and data; "
                         "leave out the scenario, --data and --plot")
    if args.workers is not None and not 1 <= args.workers <= 256:
        raise UsageError("--workers", "allowed: 1 to 256")
    sites = load_fleet(args.fleet)
    check_sites(args.fleet, sites)
    choices = _choices(args, _residences(args) or [None])
    with dask_client(args.scheduler, args.workers) as client:
        results = simulate_sites(sites, client, choices, step)
    data = {"fleet": args.fleet, "sites": results}
    require_finite(data, f"{args.fleet}: fleet simulation")
    sys.stdout.write(to_json(data) if args.json
                     else render_fleet_simulation(args.fleet, results, args.units))
    return 0


def cmd_simulate(args) -> int:
    """Handler of ``dosing simulate``."""
    from .planning.job import make_plan
    from .planning.simulate_design import design_residence_min, simulate
    from .report.simulate_report import render_simulation, simulation_dict
    if args.plot and not args.plot.lower().endswith(".png"):
        raise ScenarioError(args.plot, "", "give a file name ending in .png")
    check_outputs([("--plot", args.plot)], [args.scenario, *(args.data or [])],
                  force=args.force)
    step = _range("--step-s", args.step_s, 1.0, 600.0, "s")
    _range("--probe-lag-s", args.probe_lag_s, 0.0, 3600.0, "s")
    _range("--delay-s", args.delay_s, 0.0, 3600.0, "s")
    _range("--probe-noise-ph", args.probe_noise_ph, 0.0, 1.0, "pH")
    _range("--probe-drift-ph-per-day", args.probe_drift_ph_per_day, -5.0, 5.0, "pH/day")
    given = _residences(args)
    if args.fleet:
        return _fleet(args, step)
    if not args.scenario:
        raise UsageError("simulate", "give the flow scenario, or --fleet FLEET.toml")
    scenario = _scenario(args.scenario)
    plan = make_plan(scenario, sampled=False)
    choices = _choices(args, given or [design_residence_min(plan.control)])
    influent, held, source = _influent(args, scenario)
    sim = simulate(scenario, influent, choices, source=source, rows_held=held, step_s=step,
                   control=plan.control)
    data = simulation_dict(sim)
    require_finite(data, f"{args.scenario}: simulation")
    if args.plot:
        from .report.simulate_plot import simulation_figure_png
        write_atomic(args.plot, simulation_figure_png(sim, args.units))
    sys.stdout.write(to_json(data) if args.json else render_simulation(sim, args.units))
    return 0
