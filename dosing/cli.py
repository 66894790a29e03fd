"""The ``dosing`` command: a thin shell over the engine.

Subcommands
-----------
plan      read a scenario, print the dose sheet (or ``--json``), ``--plot``.
reagents  list the reagent catalogue.
solutes   list the weak-acid systems and their reporting basis.
tui       open the terminal workbench.

Every error of the planner's own family prints one line on stderr and exits
with code 2; nothing is written when a run fails.
"""

from __future__ import annotations

import argparse
import json
import sys

from .errors import DosingError, ScenarioError
from .files import write_atomic

__all__ = ["main"]

EXIT_BAD_INPUT = 2


def _parser() -> argparse.ArgumentParser:
    ap = argparse.ArgumentParser(
        prog="dosing",
        description="Neutralisation dosing planner: measured pH and alkalinity in, "
                    "a dose of product out. Local codes, the discharge permit and a "
                    "licensed engineer have the final word.")
    sub = ap.add_subparsers(dest="command", required=True, metavar="COMMAND")
    p = sub.add_parser("plan", help="plan the dose for a scenario file")
    p.add_argument("scenario", help="scenario file (TOML)")
    p.add_argument("--json", action="store_true", help="print the plan as JSON")
    p.add_argument("--plot", metavar="FILE.png", help="write the titration curve as PNG")
    p.add_argument("--units", choices=("metric", "us"), default="metric",
                   help="units of the dose sheet (default metric)")
    sub.add_parser("reagents", help="list the reagent catalogue")
    sub.add_parser("solutes", help="list the solutes a scenario may name")
    t = sub.add_parser("tui", help="open the terminal workbench")
    t.add_argument("scenario", nargs="?", help="scenario file to open")
    return ap


def _cmd_plan(args) -> int:
    from .scenario import load_scenario
    from .sheet import make_plan, render_sheet, sheet_dict
    if args.plot and not args.plot.lower().endswith(".png"):
        raise ScenarioError(args.plot, "", "the plot is written as PNG; give a "
                            "file name ending in .png")
    scenario = load_scenario(args.scenario)
    plan = make_plan(scenario)
    png = None
    if args.plot:
        from .plot import plan_figure_png
        png = plan_figure_png(plan, scenario.title, args.units)
    text = (json.dumps(sheet_dict(scenario, plan), indent=2, ensure_ascii=False) + "\n"
            if args.json else render_sheet(scenario, plan, args.units))
    if png is not None:
        write_atomic(args.plot, png)
    sys.stdout.write(text)
    return 0


def _cmd_reagents(_args) -> int:
    from .reagents import CATALOGUE, COMPOUNDS
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
    from .species import SYSTEMS
    for s in SYSTEMS:
        pks = ", ".join(f"{p:g}" for p in s.pka25)
        sys.stdout.write(f"{s.id:<10} {s.name:<32} pKa {pks:<20} mg/L as {s.basis}\n")
    return 0


def _cmd_tui(args) -> int:
    from tui.app import run
    return run(args.scenario)


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``dosing`` command; returns the exit code."""
    args = _parser().parse_args(argv)
    handler = {"plan": _cmd_plan, "reagents": _cmd_reagents, "solutes": _cmd_solutes,
               "tui": _cmd_tui}[args.command]
    try:
        return handler(args)
    except DosingError as err:
        sys.stderr.write(f"dosing: error: {err}\n")
        return EXIT_BAD_INPUT
    except BrokenPipeError:
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
