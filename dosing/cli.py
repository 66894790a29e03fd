"""The ``dosing`` command: a thin shell over the engine.

Subcommands
-----------
plan       read a scenario, print the dose sheet (or ``--json``), ``--plot``.
reagents   list the reagent catalogue.
solutes    list the weak-acid systems and their reporting basis.
tui        open Tankside, the terminal view.
replay     plan every row of logged flow and pH data; totals, percentiles, plot.
titration  scale a bench titration, and fit a water to it, for a full-scale dose.
simulate   tanks, probe, pump and controller in time over a record; designs compared.
log        the shift log: add, follow-up, list, show, export.

Every error of the planner's own family prints one line on stderr and exits
with code 2; nothing is written when a run fails.
"""

from __future__ import annotations

import argparse
import sys

from . import commands, commands_simulate, commands_web
from .errors import DosingError, InputError, UsageError
from .report.text import printable, printable_stdout

__all__ = ["main"]

EXIT_BAD_INPUT = 2


class _OneLineParser(argparse.ArgumentParser):
    """argparse with every usage error on one line (exit code 2, as all input errors)."""

    def error(self, message: str):
        self.exit(EXIT_BAD_INPUT, f"{self.prog}: error: {' '.join(message.split())} "
                                  f"(see {self.prog} -h)\n")


#: Engine fields given on the command line as options (errors name the option).
OPTION_OF_FIELD = commands.OPTION_OF_FIELD


def _parser() -> argparse.ArgumentParser:
    ap = _OneLineParser(
        prog="dosing",
        description="Neutralisation dosing planner: measured pH and alkalinity in, "
                    "a dose of product out. Local codes, the discharge permit and a "
                    "licensed engineer have the final word.")
    sub = ap.add_subparsers(dest="command", required=True, metavar="COMMAND")
    _plan_parser(sub)
    _sweep_parser(sub)
    sub.add_parser("reagents", help="list the reagent catalogue")
    sub.add_parser("solutes", help="list the solutes a scenario may name")
    t = sub.add_parser("tui", help="open Tankside, the terminal view")
    t.add_argument("scenario", nargs="?", help="scenario file to open")
    t.add_argument("--db", metavar="PATH", help="shift log for recording decisions")
    _log_parser(sub)
    _replay_parser(sub)
    _titration_parser(sub)
    commands_simulate.add_parser(sub)
    commands_web.add_parsers(sub)
    return ap


def _plan_parser(sub) -> None:
    p = sub.add_parser("plan", help="plan the dose for a scenario file")
    p.add_argument("scenario", help="scenario file (TOML)")
    p.add_argument("--json", action="store_true", help="print the plan as JSON")
    p.add_argument("--plot", metavar="FILE.png", help="write the titration curve as PNG")
    p.add_argument("--pdf", metavar="FILE.pdf", help="write the printable one-page sheet "
                   "as PDF (boxes for the readings, cautions, signature lines)")
    p.add_argument("--paper", choices=("a4", "letter"), default="a4",
                   help="paper size of the PDF (default a4)")
    p.add_argument("--figure", choices=("operator", "engineer"), default="operator",
                   help="engineer: the figure also draws the buffer intensity")
    p.add_argument("--db", metavar="PATH", help="compare with the shift log's record of "
                   "this tank (how far its doses ran from plan); read only")
    p.add_argument("--units", choices=("metric", "us"), default="metric",
                   help="units of the dose sheet (default metric)")
    p.add_argument("--simulate-hours", type=float, metavar="H",
                   help="a flow: also simulate its control design over H hours of the "
                   "scenario's disturbances (or made-up ones) and say how often the "
                   "discharge leaves its window")
    p.add_argument("--force", action="store_true", help="replace an existing output "
                   "file this program did not write (never an input, never through a link)")


def _sweep_parser(sub) -> None:
    w = sub.add_parser("sweep", help="tank sizes (or flows) against product strengths")
    w.add_argument("scenario", help="scenario file (TOML)")
    w.add_argument("--strengths", metavar="PCT,PCT", help="strengths of the scenario's "
                   "product in %% (default: its usual ones, e.g. 20,25,32,50 for caustic)")
    w.add_argument("--sizes", metavar="X,Y", help="tank volumes in m3 (or flows in m3/h) "
                   "(default: a quarter to four times the scenario's)")
    w.add_argument("--with", dest="others", action="append", metavar="REAGENT",
                   help="another catalogue product side by side (repeat; default one "
                   "alternative; 'none' for none)")
    w.add_argument("--json", action="store_true", help="print the grid as JSON")
    w.add_argument("--csv", metavar="OUT.csv", help="write the grid as CSV (SI units)")
    w.add_argument("--units", choices=("metric", "us"), default="metric")
    w.add_argument("--force", action="store_true", help="replace an existing output "
                   "file this program did not write (never an input, never through a link)")


def _replay_parser(sub) -> None:
    r = sub.add_parser("replay", help="replay logged flow and pH data through the planner")
    r.add_argument("data", nargs="*", help="CSV (or Parquet) files or globs with timestamp, "
                   "flow (m3/h) and pH columns; several are read as one record, in order")
    r.add_argument("--scenario", help="scenario: water model, reagent, window")
    r.add_argument("--fleet", metavar="FLEET.toml",
                   help="replay every site of a fleet file ([sites.NAME] scenario, data) on Dask")
    r.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on this Dask cluster (default: a local one, one worker per core)")
    r.add_argument("--workers", type=int, metavar="N",
                   help="local Dask workers (also runs a single site in parallel)")
    r.add_argument("--part-mb", type=float, default=16.0, metavar="MB",
                   help="size of the file parts each Dask task reads (default 16)")
    r.add_argument("--json", action="store_true", help="print the summary as JSON")
    r.add_argument("--csv", metavar="OUT.csv", help="write per-row results")
    r.add_argument("--plot", metavar="FILE.png", help="write time series and daily use")
    r.add_argument("--units", choices=("metric", "us"), default="metric")
    r.add_argument("--chunk-rows", type=int, default=100_000, metavar="N",
                   help="about this many rows read at a time (memory stays constant)")
    r.add_argument("--force", action="store_true", help="replace an existing output "
                   "file this program did not write (never an input, never through a link)")


def _titration_parser(sub) -> None:
    t = sub.add_parser("titration", help="scale a bench titration to a full-scale dose")
    t.add_argument("data", help="CSV with titrant volume (mL) and pH columns")
    t.add_argument("--sample-ml", type=float, required=True, help="sample volume, mL")
    t.add_argument("--titrant", required=True,
                   help="catalogue id or strength, e.g. '0.1 M NaOH', '0.02 N H2SO4'")
    t.add_argument("--scenario", help="tank or flow, window and full-scale reagent "
                   "(default: window 6-9, per m3, the titrant's catalogue product)")
    t.add_argument("--unknown-acid", choices=("auto", "yes", "no"), default="auto",
                   help="fit an unidentified weak acid too (default: when it helps)")
    t.add_argument("--fit", choices=("auto", "simple", "spectrum"), default="auto",
                   help="model of the sample: carbonate and at most one unlisted acid "
                        "(simple), a buffer spectrum of many sites (spectrum), or the "
                        "simple one while it explains the curve (default)")
    t.add_argument("--drop", type=int, action="append", default=[], metavar="ROW",
                   help="leave out this file row (a known misread); repeatable")
    t.add_argument("--json", action="store_true")
    t.add_argument("--plot", metavar="FILE.png")
    t.add_argument("--units", choices=("metric", "us"), default="metric")
    t.add_argument("--force", action="store_true", help="replace an existing output "
                   "file this program did not write (never an input, never through a link)")


def _log_parser(sub) -> None:
    lg = sub.add_parser("log", help="the shift log of dosing decisions")
    lsub = lg.add_subparsers(dest="log_command", required=True, metavar="ACTION")
    db_help = "log file (default: $DOSING_LOG_DB or the per-user data folder)"
    a = lsub.add_parser("add", help="record a decision for a scenario")
    a.add_argument("scenario")
    a.add_argument("--operator", required=True)
    a.add_argument("--dosed", metavar="KG", help="product actually dosed, kg (for a flow, the "
                   "rate it ran at, kg/h); for a treatment train one figure per dose step, "
                   "in step order, separated by commas")
    a.add_argument("--dosed-l", metavar="L", help="the same in litres of product (L/h for a "
                   "flow), recorded as kg by the product's density; not with --dosed")
    a.add_argument("--ph-after", type=float, metavar="PH", help="pH measured after dosing")
    a.add_argument("--note", default="")
    a.add_argument("--corrects", type=int, metavar="ID", help="this entry corrects entry ID")
    a.add_argument("--db", metavar="PATH", help=db_help)
    f = lsub.add_parser("follow-up", help="attach a later pH reading to an entry")
    f.add_argument("id", type=int)
    f.add_argument("--ph-after", type=float, required=True, metavar="PH")
    f.add_argument("--operator", default="")
    f.add_argument("--note", default="")
    f.add_argument("--db", metavar="PATH", help=db_help)
    ls = lsub.add_parser("list", help="list entries")
    ls.add_argument("--since", metavar="DATE", help="only entries from this date (ISO 8601)")
    ls.add_argument("--tank", help="only this tank")
    ls.add_argument("--wide", action="store_true", help="every column (about 150 wide): "
                    "operator, pH aim and the entry referred to")
    ls.add_argument("--db", metavar="PATH", help=db_help)
    sh = lsub.add_parser("show", help="show one entry with its corrections and follow-ups")
    sh.add_argument("id", type=int)
    sh.add_argument("--db", metavar="PATH", help=db_help)
    ex = lsub.add_parser("export", help="export the log")
    ex.add_argument("--csv", required=True, metavar="FILE")
    ex.add_argument("--since", metavar="DATE")
    ex.add_argument("--tank")
    ex.add_argument("--db", metavar="PATH", help=db_help)
    ex.add_argument("--force", action="store_true", help="replace an existing output "
                   "file this program did not write (never an input, never through a link)")


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``dosing`` command; returns the exit code."""
    args = _parser().parse_args(argv)
    handler = commands.HANDLERS[args.command]
    try:
        if args.command == "tui":
            return handler(args)            # the terminal view draws with escape codes
        with printable_stdout():
            return handler(args)
    except DosingError as err:
        if isinstance(err, InputError) and err.field in OPTION_OF_FIELD:
            # The engine names its fields; on the command line they are options.
            err = UsageError(OPTION_OF_FIELD[err.field], err.reason)
        sys.stderr.write(f"dosing: error: {printable(str(err))}\n")
        return EXIT_BAD_INPUT
    except BrokenPipeError:
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
