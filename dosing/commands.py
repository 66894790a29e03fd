"""What each ``dosing`` subcommand does, once :mod:`dosing.cli` has parsed it.

One handler per subcommand (:data:`HANDLERS`): each reads its inputs through
:mod:`dosing.io`, plans through the planning layer and prints through
:mod:`dosing.report`; it returns the exit code, and lets the planner's own
errors reach :func:`dosing.cli.main`, which prints them on one line.
"""

from __future__ import annotations

import contextlib
import csv
import sys

from .errors import ScenarioError, UsageError
from .io.files import write_atomic
from .io.outputs import check_outputs
from .commands_simulate import cmd_simulate
from .commands_web import cmd_accounts, cmd_serve
from .report.numbers import require_finite, to_json

__all__ = ["HANDLERS", "OPTION_OF_FIELD"]

#: Engine fields given on the command line as options (errors name the option).
OPTION_OF_FIELD = {"titrant": "--titrant", "sample_ml": "--sample-ml", "fit": "--fit",
                   "operator": "--operator", "ph_after": "--ph-after", "since": "--since",
                   "dosed": "--dosed", "dosed_l": "--dosed-l", "step_s": "--step-s",
                   "tuning": "--tunings", "data": "--data",
                   "probe_lag_s": "--probe-lag-s"}


def _now() -> str:
    """The local date and time a figure is made, to print on it."""
    from datetime import datetime
    return datetime.now().strftime("%Y-%m-%d %H:%M")


def _cmd_plan(args) -> int:
    from .io.scenario import load_scenario
    if args.plot and not args.plot.lower().endswith(".png"):
        raise ScenarioError(args.plot, "", "the plot is written as PNG; give a "
                            "file name ending in .png")
    if args.pdf and not args.pdf.lower().endswith(".pdf"):
        raise ScenarioError(args.pdf, "", "the sheet is written as PDF; give a file name "
                            "ending in .pdf")
    check_outputs([("--plot", args.plot), ("--pdf", args.pdf)], [args.scenario, args.db],
                  force=args.force)
    scenario = load_scenario(args.scenario)
    text, data, png, (plan, train) = (_plan_train if scenario.train else _plan_one)(
        scenario, args)
    data = require_finite(data, "plan")
    pdf = None
    if args.pdf:
        from .report.print_pdf import print_pdf
        from .report.print_sheet import print_sheet
        pdf = print_pdf(print_sheet(scenario, plan, train, args.units, _now()), args.paper)
    for path, content, what in ((args.plot, png, "plot"), (args.pdf, pdf, "printable sheet")):
        if content is not None:
            write_atomic(path, content)
            sys.stderr.write(f"dosing: wrote the {what} to {path}\n")
    sys.stdout.write(to_json(data) if args.json else text)
    return 0


def _plan_one(scenario, args):
    """A one-dose scenario: its sheet, data and figure; with the train the
    planner proposes first when one dose cannot meet the window and the caps."""
    from .planning.job import make_plan
    from .planning.train_job import make_train
    from .report.plan_json import sheet_dict
    from .report.sheet import figure_title, render_sheet
    plan = make_plan(scenario)
    if args.db:
        plan = _with_log_bias(args.db, scenario, plan)
    train = make_train(scenario, plan)
    data = sheet_dict(scenario, plan)
    text = render_sheet(scenario, plan, args.units)
    if train is not None:
        from .report.train_json import train_keys
        from .report.train_sheet import render_train
        from .report.train_view import train_view
        data |= train_keys(train_view(scenario, train))
        text = (render_train(scenario, train, args.units) + "\n"
                + "ONE DOSE ALONE, FOR COMPARISON (it cannot meet the window and the caps)\n"
                + text)
    if args.simulate_hours is not None:
        text, data = _with_simulation(scenario, plan, args, text, data)
    png = None
    if args.plot:
        from .report.plot import plan_figure_png, train_figure_png
        title = figure_title(scenario, _now())
        png = (train_figure_png(train, title, args.units) if train is not None else
               plan_figure_png(plan, title, args.units, engineer=args.figure == "engineer",
                               window="permit window" if scenario.permit else
                               "target window"))
    return text, data, png, (plan, train)


def _with_simulation(scenario, plan, args, text: str, data: dict):
    """The sheet and JSON with the control design simulated (``--simulate-hours``)."""
    from .planning.simulate_design import own_design_simulation, simulation_refusal
    from .report.simulate_report import control_check_text, simulation_dict
    refusal = simulation_refusal(scenario)
    if refusal:
        raise UsageError("--simulate-hours", refusal[1])
    if not 0.1 <= args.simulate_hours <= 24.0 * 31:
        raise UsageError("--simulate-hours", f"{args.simulate_hours:g}; allowed: 0.1 to 744 h")
    sim = own_design_simulation(scenario, plan, args.simulate_hours)
    # Above the cautions, which stay last.
    at = text.rfind("\nCAUTIONS")
    at = len(text) if at < 0 else at + 1
    text = text[:at] + control_check_text(sim, args.units) + "\n" + text[at:]
    return text, data | {"simulated_control": simulation_dict(sim)}


def _plan_train(scenario, args):
    """A train scenario: its sheet, data and figure."""
    from .planning.train_job import make_train
    from .report.sheet import figure_title
    from .report.train_json import train_dict
    from .report.train_sheet import render_train
    if args.db:
        raise UsageError("--db", "the shift log's bias is per tank and one dose; a train "
                         "is planned without it")
    train = make_train(scenario)
    png = None
    if args.plot:
        from .report.plot import train_figure_png
        png = train_figure_png(train, figure_title(scenario, _now()), args.units)
    return (render_train(scenario, train, args.units), train_dict(scenario, train), png,
            (None, train))


def _numbers(option: str, text: str | None, low: float, high: float, unit: str):
    """A comma-separated list of numbers within (low, high], or None."""
    if text is None:
        return None
    try:
        values = tuple(float(v) for v in text.split(",") if v.strip())
    except ValueError:
        values = ()
    if not values or not all(low < v <= high for v in values):
        raise UsageError(option, f"{text!r}; give numbers separated by commas, each "
                         f"above {low:g} and up to {high:,g} {unit}")
    return values


def _cmd_sweep(args) -> int:
    from .planning.reagents import get_reagent
    from .io.scenario import load_scenario
    from .planning.sweep import default_alternative, default_sizes, strength_grid
    from .report.sweep_sheet import render_sweep, sweep_csv, sweep_dict
    if args.csv and not args.csv.lower().endswith(".csv"):
        raise ScenarioError(args.csv, "", "give a file name ending in .csv")
    check_outputs([("--csv", args.csv)], [args.scenario], force=args.force)
    strengths = _numbers("--strengths", args.strengths, 0.0, 100.0, "%")
    scenario = load_scenario(args.scenario)
    sizes = _numbers("--sizes", args.sizes, 0.0, 1e6, "m3 (or m3/h)")
    if scenario.train:
        result = _train_grid(scenario, args, sizes)
    elif args.others == ["none"]:
        others = ()
    elif args.others:
        others = tuple(get_reagent(o) for o in args.others)
    else:
        others = (default_alternative(scenario.reagent),)
    if not scenario.train:
        result = strength_grid(scenario, sizes or default_sizes(scenario.basis),
                               strengths=tuple(v / 100 for v in strengths) if strengths
                               else None, others=others)
    data = require_finite(sweep_dict(result, scenario), "sweep")
    if args.csv:
        write_atomic(args.csv, sweep_csv(result, scenario).encode())
        sys.stderr.write(f"dosing: wrote the grid to {args.csv}\n")
    sys.stdout.write(to_json(data) if args.json else render_sweep(result, scenario, args.units))
    return 0


def _train_grid(scenario, args, sizes):
    """A train's dose steps against sizes (its products are its steps')."""
    from .planning.sweep import default_sizes, train_sweep
    from .planning.train_job import make_train
    for option, given in (("--strengths", args.strengths), ("--with", args.others)):
        if given:
            raise UsageError(option, "a treatment train's products are its steps'; the grid "
                             "gives each dose step's product per size")
    return train_sweep(make_train(scenario), sizes or default_sizes(scenario.basis))


def _with_log_bias(db: str, scenario, plan):
    """The plan with what the shift log says about the scenario's tank."""
    from dataclasses import replace
    from .io.shiftlog import BIAS_MIN_ENTRIES, ShiftLog
    tank = scenario.tank
    with ShiftLog(db, writable=False) as log:
        tanks = log.tanks()
        if not tank or tank not in tanks:
            raise ScenarioError(db, "", f"no entries for tank {tank!r} (the scenario's "
                                "tank); tanks in this log: " + (", ".join(tanks) or "none"))
        bias = log.bias(tank)
    note = "" if bias else (f"fewer than {BIAS_MIN_ENTRIES} decisions on {tank} with the "
                            "product given and a pH after inside the window: no estimate "
                            "of the model's bias yet")
    return replace(plan, log_bias=bias, log_note=note)


def _cmd_reagents(_args) -> int:
    from .planning.reagents import CATALOGUE, COMPOUNDS
    for r in CATALOGUE.values():
        dens = f"{r.density_kg_l:.4g} kg/L" if r.density_kg_l else r.form
        sys.stdout.write(f"{r.id:<16} {r.name:<32} {r.compound.formula:<8} {dens}\n")
        if r.density_source:
            sys.stdout.write(f"{'':<16} density: {r.density_source}\n")
    sys.stdout.write(f"\nCustom reagents: compound one of {', '.join(COMPOUNDS)}, "
                     "with mass_fraction (and density_kg_l for a solution) or "
                     "molarity_mol_l.\n")
    return 0


def _cmd_solutes(_args) -> int:
    from .chem.species import SITE_IDS, SYSTEMS
    for s in (x for x in SYSTEMS if x.id not in SITE_IDS):
        pks = ", ".join(f"{p:g}" for p in s.pka25)
        sys.stdout.write(f"{s.id:<10} {s.name:<32} pKa {pks:<20} mg/L as {s.basis}\n")
    return 0


def _cmd_tui(args) -> int:
    from tui.app import run
    return run(args.scenario, db=args.db)


def _count_lines(path: str) -> int | None:
    """Data rows in a text file (for the progress bar), or None if unknown."""
    try:
        with open(path, "rb") as fh:
            return max(sum(buf.count(b"\n") for buf in iter(lambda: fh.read(1 << 20), b""))
                       - 1, 1)
    except OSError:
        return None


class _progress:
    """A progress bar on stderr while a replay runs (rich: width, rate and time
    left handled there); nothing when stderr is not a terminal. The callable
    it gives takes the count done (and, optionally, the total)."""

    def __init__(self, total: int | None, unit: str):
        self.total, self.unit = total, unit
        self._bar = None

    def __enter__(self):
        if not sys.stderr.isatty():
            return lambda n, total=None: None
        from rich.console import Console
        from rich.progress import (BarColumn, MofNCompleteColumn, Progress, TextColumn,
                                   TimeRemainingColumn)
        self._bar = Progress(TextColumn("replay"), BarColumn(), MofNCompleteColumn(),
                             TextColumn(self.unit), TimeRemainingColumn(),
                             console=Console(stderr=True), transient=True)
        self._bar.start()
        task = self._bar.add_task("replay", total=self.total)
        return lambda n, total=None: self._bar.update(task, completed=n,
                                                      total=total or self.total)

    def __exit__(self, *exc):
        if self._bar is not None:
            self._bar.stop()
        return False


def _cmd_replay(args) -> int:
    from .report.replay_text import render_replay
    for opt, ext in ((args.csv, ".csv"), (args.plot, ".png")):
        if opt and not opt.lower().endswith(ext):
            raise ScenarioError(opt, "", f"give a file name ending in {ext}")
    if args.chunk_rows < 1000:
        raise UsageError("--chunk-rows", "allowed: 1000 or more")
    if args.workers is not None and not 1 <= args.workers <= 256:
        raise UsageError("--workers", "allowed: 1 to 256")
    if not 0.01 <= args.part_mb <= 4096:
        raise UsageError("--part-mb", "allowed: 0.01 to 4096 MB")
    if args.fleet:
        return _replay_fleet(args)
    if not args.data:
        raise UsageError("replay", "give the data file(s) and --scenario, or --fleet FLEET.toml")
    if not args.scenario:
        raise UsageError("--scenario", "missing; give the flow scenario the data belong to")
    from .io.replay_io import site_files
    files = site_files(args.data, where="data")
    check_outputs([("--csv", args.csv), ("--plot", args.plot)], [args.scenario, *files],
                  force=args.force)
    scenario = _flow_scenario(args.scenario)
    if args.scheduler or args.workers:
        if args.csv:
            raise UsageError("--csv", "per-row results are written by a one-process replay; "
                             "leave out --workers and --scheduler")
        from .io.fleet import Site
        report, totals = _run_on_dask(args, [Site("data", scenario, tuple(files))])[0]["data"]
    else:
        report, totals = _replay_in_process(args, scenario, files)
    if args.plot:
        from .report.plot import replay_figure_png
        write_atomic(args.plot, replay_figure_png(totals, report, args.units))
    sys.stdout.write(to_json(report.to_dict()) if args.json
                     else render_replay(report, args.units))
    return 0


def _flow_scenario(path: str):
    from .io.replay_io import replay_refusal
    from .io.scenario import load_scenario
    scenario = load_scenario(path)
    why = replay_refusal(scenario)
    if why:
        raise ScenarioError(path, "[[step]]" if scenario.train else "[flow]", why)
    return scenario


def _replay_in_process(args, scenario, files: list[str]):
    """One site, one pass, in this process (the per-row CSV is written here)."""
    from .io.files import atomic_text_writer
    from .io.replay_io import run_replay
    counts = [_count_lines(f) for f in files]
    total = None if None in counts else sum(counts)
    # The finite check runs inside the CSV writer, so a report that cannot be
    # printed leaves no per-row file behind either.
    with _progress(total, "rows") as progress, \
            (atomic_text_writer(args.csv) if args.csv else contextlib.nullcontext()) as fh:
        report, totals = run_replay(files, scenario, chunk_rows=args.chunk_rows,
                                    rows_out=fh, progress=progress,
                                    keep_hourly=bool(args.plot))
        require_finite(report.to_dict(), f"{report.source}: replay")
    return report, totals


def _run_on_dask(args, sites):
    """Replay sites on Dask (a local cluster or ``--scheduler``):
    ({name: (report, totals)}, the number of workers)."""
    from .io.fleet import cut_parts, dask_client, replay_sites
    part_bytes = int(args.part_mb * 2**20)
    plan = cut_parts(sites, part_bytes)     # every file checked before the cluster starts
    with _progress(None, "parts") as progress, \
            dask_client(args.scheduler, args.workers) as client:
        workers = len(client.scheduler_info().get("workers", {}))
        results = replay_sites(sites, client, part_bytes=part_bytes,
                               chunk_rows=args.chunk_rows, keep_hourly=bool(args.plot),
                               progress=progress, plan=plan)
    for name, (report, _) in results.items():
        require_finite(report.to_dict(), f"{report.source}: replay")
    return results, workers


def _replay_fleet(args) -> int:
    from .io.fleet import fleet_report, load_fleet
    from .report.replay_text import render_fleet
    for given, option in ((args.data, "data files"), (args.scenario, "--scenario"),
                          (args.csv, "--csv"), (args.plot, "--plot")):
        if given:
            raise UsageError("--fleet", f"{option} cannot go with a fleet file; each site's "
                             "scenario and data are in the fleet file")
    sites = load_fleet(args.fleet)
    report = fleet_report(args.fleet, *_run_on_dask(args, sites))
    sys.stdout.write(to_json(report.to_dict()) if args.json
                     else render_fleet(report, args.units))
    return 0


def _default_titration_scenario(titrant):
    from .io.scenario import build_scenario
    product = "caustic-50" if titrant.compound.raises_ph else "sulfuric-98"
    return build_scenario({
        "title": "bench titration (no scenario: per m3, window 6-9)",
        "effluent": {"ph": 7.0, "alkalinity_mg_l_as_caco3": 0.0},
        "batch": {"volume_m3": 1.0}, "target": {"ph_min": 6.0, "ph_max": 9.0},
        "reagent": {"id": product}}, "defaults")


def _cmd_titration(args) -> int:
    from .errors import InputError, UnreachableError
    from .io.scenario import load_scenario
    from .report.titration import render_titration, titration_dict
    from .planning.bench import check_curve, parse_titrant
    from .planning.titration import compare
    from .io.titration_io import read_titration_csv
    if args.plot and not args.plot.lower().endswith(".png"):
        raise ScenarioError(args.plot, "", "give a file name ending in .png")
    check_outputs([("--plot", args.plot)], [args.data, args.scenario], force=args.force)
    try:
        titrant = parse_titrant(args.titrant)
        vols, phs, lines, notes = read_titration_csv(args.data, args.drop)
        curve = check_curve(args.sample_ml, titrant, vols, phs, lines, source="titration")
    except InputError as err:
        if err.field in OPTION_OF_FIELD:
            raise                   # main names the option
        raise ScenarioError(args.data, "", err.reason) from None
    from dataclasses import replace
    curve = replace(curve, notes=tuple(notes) + curve.notes)
    scenario = (load_scenario(args.scenario) if args.scenario
                else _default_titration_scenario(titrant))
    try:
        report = compare(curve, scenario, unknown_acid=args.unknown_acid, fit_mode=args.fit)
    except (InputError, UnreachableError) as err:
        key = getattr(err, "field", "")
        if key in OPTION_OF_FIELD:
            raise                   # main names the option
        why = getattr(err, "reason", str(err))
        raise ScenarioError(args.data, "", why if key in ("", "titration")
                            else f"{key}: {why}") from None
    data = require_finite(titration_dict(report), "titration")
    if args.plot:
        from .report.plot import titration_figure_png
        from .report.sheet import figure_title
        write_atomic(args.plot, titration_figure_png(curve, report,
                                                     figure_title(scenario, _now())))
    sys.stdout.write(to_json(data) if args.json
                     else render_titration(scenario, report, args.units))
    return 0


def _cmd_log(args) -> int:
    from .io.shiftlog import ShiftLog, parse_since
    from .report import logview
    since = parse_since(args.since) if getattr(args, "since", None) else None
    if args.log_command == "export":
        if not args.csv.lower().endswith(".csv"):
            raise ScenarioError(args.csv, "", "the export is CSV; give a name ending in .csv")
        from .io.shiftlog import default_log_path
        db = args.db or default_log_path()
        check_outputs([("--csv", args.csv)], [db, f"{db}-wal", f"{db}-shm"],
                      force=args.force)
    if args.log_command == "add":
        from pathlib import Path
        from .io.scenario import load_scenario
        scenario = load_scenario(args.scenario)
        plan, dosed = _plan_to_record(scenario, args.dosed, args.dosed_l)
        toml_text = Path(args.scenario).read_text(encoding="utf-8")
        with ShiftLog(args.db) as log:
            entry_id = log.record_decision(
                operator=args.operator, scenario_toml=toml_text, plan=plan, dosed_kg=dosed,
                ph_after=args.ph_after, note=args.note, corrects=args.corrects)
            sys.stdout.write(logview.render_entry(log, log.get(entry_id)))
        return 0
    with ShiftLog(args.db, writable=args.log_command == "follow-up") as log:
        if args.log_command == "follow-up":
            new = log.record_follow_up(args.id, ph_after=args.ph_after,
                                       operator=args.operator, note=args.note)
            sys.stdout.write(f"recorded follow-up {new} on entry {args.id}: "
                             f"pH {args.ph_after:g}\n")
        elif args.log_command == "list":
            sys.stdout.write(logview.render_list(log, since_utc=since, tank=args.tank,
                                                 wide=args.wide))
        elif args.log_command == "show":
            sys.stdout.write(logview.render_entry(log, log.get(args.id)))
        elif args.log_command == "export":
            frame = log.frame(since_utc=since, tank=args.tank)
            from .report.numbers import csv_safe_frame
            # Text always quoted (a carriage return inside a note stays in its
            # cell); numbers bare, so a spreadsheet reads them as numbers.
            write_atomic(args.csv, csv_safe_frame(frame).to_csv(
                index=False, quoting=csv.QUOTE_NONNUMERIC).encode("utf-8"))
            sys.stdout.write(f"wrote {len(frame)} entries to {args.csv}\n"
                             + logview.unreadable_line(log))
    return 0


def _plan_to_record(scenario, dosed_text: str | None, dosed_l_text: str | None = None
                    ) -> tuple[dict, float | None]:
    """What ``log add`` records: the plan (a train whole) and the one dosed
    figure; litres given (``--dosed-l``) are recorded as kg by the density."""
    from .planning.job import make_plan
    from .planning.train_job import make_train
    from .report.record import litres_to_kg, record_of
    if dosed_text and dosed_l_text:
        raise UsageError("--dosed-l", "give what was dosed in kg (--dosed) or in litres "
                         "(--dosed-l), not both")
    plan = None if scenario.train else make_plan(scenario)
    train = make_train(scenario, plan)
    figures = _numbers("--dosed", dosed_text, -1e-300, 1e9, "kg") if dosed_text else None
    if dosed_l_text:
        figures = litres_to_kg(scenario, plan, train,
                               _numbers("--dosed-l", dosed_l_text, -1e-300, 1e9, "L"))
    return record_of(scenario, plan, train, figures)


#: The handler of each subcommand.
HANDLERS = {"plan": _cmd_plan, "reagents": _cmd_reagents, "solutes": _cmd_solutes,
            "tui": _cmd_tui, "log": _cmd_log, "replay": _cmd_replay, "sweep": _cmd_sweep,
            "titration": _cmd_titration, "simulate": cmd_simulate, "serve": cmd_serve,
            "accounts": cmd_accounts}
