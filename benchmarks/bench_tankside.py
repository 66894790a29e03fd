"""Milliseconds per change in Tankside, the terminal view.

Opens each demo scenario in Tankside (headless, Textual's test driver),
changes the pH a number of times and prints, per change (median and max):

* ``plan``: from the change to its plan ready (read the form, validate,
  plan in the worker thread);
* ``show``: from the plan ready to the view on screen drawn with it (the
  target: under 30 ms);
* ``all views``: the baseline, in the same run: the work each change put
  on the event loop before the views were drawn only when seen and the
  sweep moved to a worker (every view drawn, the sweep planned), not
  counting the screen refresh that ``show`` includes (about 20 ms of
  Textual layout and paint at 150x45 here).

Prints figures; asserts nothing. The machine's load is printed first.

    python benchmarks/bench_tankside.py
"""

from __future__ import annotations

import asyncio
import os
import statistics
import time
from pathlib import Path

from dosing.planning.sweep import default_sizes, strength_grid
from tui.app import make_app
from tui.form import field_id
from tui.view_render import VIEWS

ROOT = Path(__file__).resolve().parents[1]


def _all_views_ms(app) -> float:
    """The old way: every view drawn and the sweep planned, on the loop."""
    t0 = time.perf_counter()
    s = app.scenario
    if not s.train:
        app.sweep = strength_grid(s, default_sizes(s.basis), known={s.reagent.id: app.plan})
    for part in VIEWS:
        getattr(app, f"_draw_{part}")()
    return (time.perf_counter() - t0) * 1000


async def one(path: Path, changes: int = 12) -> dict[str, list[float]]:
    app = make_app(str(path), show_timing=False)
    out: dict[str, list[float]] = {"plan": [], "show": [], "all": []}
    async with app.run_test(size=(150, 45)) as pilot:
        await pilot.pause()
        await app.workers.wait_for_complete()
        box = app.query_one("#" + field_id("effluent.ph"))
        if box.disabled or not box.value:
            return {}                        # a blend: its streams give the pH
        base = float(box.value)
        for i in range(changes):
            box.value = f"{base + (0.01 if i % 2 else -0.01):g}"   # fires Input.Changed
            await pilot.pause()
            await app.workers.wait_for_complete()
            await pilot.pause(0.05)
            out["plan"].append(app.last_plan_ms)
            out["show"].append(app.last_show_ms)
            out["all"].append(_all_views_ms(app))
    return out


def main() -> None:
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"load average {load:.2f}; milliseconds per change, median (max)")
    print(f"{'scenario':<28} {'plan':>14} {'show':>14} {'all views':>14} {'all/show':>9}")
    for path in sorted((ROOT / "scenarios").glob("*.toml")):
        t = asyncio.run(one(path))
        if not t:
            print(f"{path.stem:<28} (a blend: the pH comes from its streams, not the form)")
            continue
        med = {k: statistics.median(v) for k, v in t.items()}
        cells = "".join(f"{med[k]:>8.1f} ({max(t[k]):>4.0f})" for k in ("plan", "show", "all"))
        print(f"{path.stem:<28} {cells} {med['all'] / max(med['show'], 1e-9):>8.1f}x")


if __name__ == "__main__":
    main()
