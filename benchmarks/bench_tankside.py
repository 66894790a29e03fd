"""Milliseconds per recompute in Tankside, the terminal view.

Opens each demo scenario in Tankside (headless, Textual's test
driver), changes the pH a number of times and prints how long each
recompute (read form, validate, plan, render every view) took. Prints
figures; asserts nothing.

    python benchmarks/bench_tankside.py
"""

from __future__ import annotations

import asyncio
import statistics
import time
from pathlib import Path

from tui.app import make_app
from tui.form import field_id

ROOT = Path(__file__).resolve().parents[1]


async def one(path: Path, changes: int = 20) -> list[float]:
    app = make_app(str(path))
    times = []
    async with app.run_test(size=(150, 45)) as pilot:
        await pilot.pause()
        box = app.query_one("#" + field_id("effluent.ph"))
        base = float(box.value)
        for i in range(changes):
            t0 = time.perf_counter()
            box.value = f"{base + (0.01 if i % 2 else -0.01):g}"   # fires Input.Changed
            await pilot.pause()
            times.append((time.perf_counter() - t0) * 1000)
            times[-1] = app.last_recompute_ms if app.last_recompute_ms else times[-1]
    return times


def main() -> None:
    print(f"{'scenario':<28} {'median ms':>10} {'max ms':>8}  (read form, validate, plan, render all views, per change)")
    for path in sorted((ROOT / "scenarios").glob("*.toml")):
        t = asyncio.run(one(path))
        print(f"{path.stem:<28} {statistics.median(t):>10.1f} {max(t):>8.1f}")


if __name__ == "__main__":
    main()
