"""Replay speed and memory: rows per second and peak memory.

1. The per-row dose solve on arrays (ideal and Davies), against a plain
   per-row scalar baseline written here: for each row, brentq over the dose
   with a nested brentq for the pH (ideal model).
2. A year of one-minute rows (525,600) replayed end to end, CSV read
   included, in a fresh process, against a bare ``pandas.read_csv`` of the
   same file in another fresh process (first run and best of three more);
   and the whole ``dosing replay`` command against the whole bare
   ``python -c "import pandas; pandas.read_csv(...)"`` (start-up and imports
   included in both).
3. Peak memory of a chunked replay of a 5,000,000-row file, in a fresh
   process (``--big``; the file takes a minute to write).

Prints figures; asserts nothing.

    python benchmarks/bench_replay.py [--big]
"""

from __future__ import annotations

import math
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd
from scipy.optimize import brentq

ROOT = Path(__file__).resolve().parents[1]
SCEN = ROOT / "scenarios" / "flow-metering-pump.toml"


def make_log(path: Path, n: int, first: int = 0, new_waters: bool = False) -> None:
    """An invented log of ``n`` one-minute rows, from minute ``first`` of 2025.

    ``new_waters``: pH to 4 decimals and an alkalinity column, so every row
    is a water of its own (no two rows solve the same)."""
    rng = np.random.default_rng(5 + first)
    step = 1_000_000
    with open(path, "w") as fh:
        for start in range(0, n, step):
            m = min(step, n - start)
            i = np.arange(first + start, first + start + m)
            ts = pd.Timestamp("2025-01-01") + pd.to_timedelta(i, unit="min")
            day = np.sin(i / 1440 * 2 * np.pi)
            frame = pd.DataFrame({"timestamp": ts.strftime("%Y-%m-%d %H:%M"),
                                  "flow_m3_h": (20 + 5 * day + rng.normal(0, 1, m)).round(3),
                                  "ph": (10.1 + 0.5 * day + rng.normal(0, 0.1, m)).round(
                                      4 if new_waters else 3)})
            if new_waters:
                frame["alkalinity_mg_l"] = (400 + 40 * day + rng.normal(0, 5, m)).round(2)
            frame.to_csv(fh, header=start == 0, index=False)


def best_of(k: int, job) -> float:
    """Shortest of ``k`` timed runs [s] (the usual way to time code: the
    other runs were slowed by something else on the machine)."""
    times = []
    for _ in range(k):
        t0 = time.perf_counter()
        job()
        times.append(time.perf_counter() - t0)
    return min(times)


def dose_solve_rates() -> None:
    from dosing.chem import (N_SYSTEMS, Mixture, constants_at, dose_to_ph,
                             strong_balance_at_ph, system_index)
    from dosing.chem.activity import DAVIES, IDEAL
    from dosing.planning.reagents import get_reagent
    from dosing.io.scenario import load_scenario
    s = load_scenario(SCEN)
    reagent = get_reagent("hydrochloric-32")
    n = 500_000
    rng = np.random.default_rng(1)
    ph = rng.uniform(9.0, 11.0, n)
    base = np.zeros((n, N_SYSTEMS))
    for k, v in s.water.totals_mol_l.items():
        base[:, system_index(k)] = v
    for model in (IDEAL, DAVIES):
        sb, _ = strong_balance_at_ph(base, ph, 32.0, activity=model)
        mix = Mixture.build(base, sb, 0.5 * np.abs(sb), 32.0, math.nan, model)
        dt = best_of(5, lambda: dose_to_ph(mix, reagent.vector(), 7.5))
        label = f"{model.label:<6}"
        print(f"dose solve, {label}: {n / dt:12,.0f} rows/s ({dt * 1000:.0f} ms for {n:,})")
        if model.ideal:
            ideal_rate = n / dt
    # Plain per-row baseline: nested scalar root finding, ideal model.
    const = constants_at(np.array([32.0]))
    cols = [j for j in range(N_SYSTEMS) if base[0, j] > 0]
    zs = {j: [(-1 if j == system_index("sulfate") else 0) - m for m in range(4)] for j in cols}
    kw = float(const.kw[0])

    def resid(p, s_eq, extra_cl):
        h = 10.0 ** -p
        r = s_eq - extra_cl + h - kw / h
        for j in cols:
            terms = [1.0]
            for kk in const.k[0, j]:
                terms.append(terms[-1] * kk / h if kk > 0 else 0.0)
            tot = sum(terms)
            r += base[0, j] * sum(z * t / tot for z, t in zip(zs[j], terms))
        return r

    rows = 200
    sb, _ = strong_balance_at_ph(base[:rows], ph[:rows], 32.0, activity=IDEAL)
    t0 = time.perf_counter()
    for i in range(rows):
        def ph_after(d):
            return brentq(resid, -1.5, 15.5, args=(sb[i], d), xtol=1e-12)
        brentq(lambda d: ph_after(d) - 7.5, 0.0, 1.0, xtol=1e-13)
    base_rate = rows / (time.perf_counter() - t0)
    print(f"scalar baseline (ideal): {base_rate:12,.0f} rows/s; vectorised ideal is "
          f"x{ideal_rate / base_rate:,.0f} faster")


def end_to_end(path: Path, label: str) -> None:
    """The replay in a fresh process: its first run (cold: lazy imports,
    caches) and the best of three more, against a bare ``pandas.read_csv``
    timed the same way in another fresh process."""
    # Peak memory from VmHWM of the child: it starts afresh at exec, whereas
    # ru_maxrss carries over the parent's high-water mark on Linux.
    code = (f"import time; from dosing.io.scenario import load_scenario; "
            f"from dosing.io.replay_io import run_replay; s = load_scenario({str(SCEN)!r}); "
            f"ts = []\nfor _ in range(4):\n t = time.perf_counter(); "
            f"r, _ = run_replay({str(path)!r}, s, keep_hourly=False); "
            f"ts.append(time.perf_counter() - t)\n"
            f"hwm = [l.split()[1] for l in open('/proc/self/status') if l.startswith('VmHWM')]; "
            f"print(r.rows, ts[0], min(ts[1:]), hwm[0])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.split()
    rows, cold, warm, rss_kb = int(out[0]), float(out[1]), float(out[2]), int(out[3])
    bare_cold, bare_warm = _bare_read_s(path)
    print(f"{label}: {rows:,} rows in {warm:.2f} s ({rows / warm:,.0f} rows/s end to end, "
          f"CSV read included, Davies; first run {cold:.2f} s); peak memory "
          f"{rss_kb / 1024:,.0f} MiB")
    print(f"  a bare pandas.read_csv of the same file: {bare_warm:.3f} s (first {bare_cold:.3f} s);"
          f" the replay takes x{warm / bare_warm:.1f} that (first runs: x{cold / bare_cold:.1f})")


def whole_commands(path: Path) -> None:
    """The comparison as a user meets it: wall time of the whole ``dosing
    replay`` command (start-up, imports, read, plan, report) against the
    whole ``python -c "import pandas; pandas.read_csv(...)"``; best of three."""
    replay = best_of(3, lambda: subprocess.run(
        [sys.executable, "-m", "dosing.cli", "replay", str(path), "--scenario", str(SCEN)],
        capture_output=True, check=True))
    bare = best_of(3, lambda: subprocess.run(
        [sys.executable, "-c", f"import pandas; pandas.read_csv({str(path)!r})"],
        capture_output=True, check=True))
    print(f"  whole commands: dosing replay {replay:.2f} s, python -c \"import pandas; "
          f"pandas.read_csv(...)\" {bare:.2f} s: x{replay / bare:.1f}")


def _bare_read_s(path: Path) -> tuple[float, float]:
    """Seconds a plain ``pandas.read_csv`` of the file takes in a fresh
    process: the first read and the best of three more."""
    code = (f"import time, pandas\nts = []\nfor _ in range(4):\n t = time.perf_counter(); "
            f"pandas.read_csv({str(path)!r}); ts.append(time.perf_counter() - t)\n"
            f"print(ts[0], min(ts[1:]))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.split()
    return float(out[0]), float(out[1])


def main() -> None:
    dose_solve_rates()
    with tempfile.TemporaryDirectory() as d:
        year = Path(d) / "year.csv"
        make_log(year, 525_600)
        end_to_end(year, "one year of minute data")
        whole_commands(year)
        fresh = Path(d) / "fresh.csv"
        n_fresh = 5_000_000 if "--big" in sys.argv else 1_000_000
        make_log(fresh, n_fresh, new_waters=True)
        end_to_end(fresh, f"{n_fresh:,} rows, every row a new water (pH to 4 decimals, "
                          "alkalinity)")
        whole_commands(fresh)
        if "--big" in sys.argv:
            big = Path(d) / "big.csv"
            make_log(big, 5_000_000)
            print(f"5M-row file: {big.stat().st_size / 2**20:,.0f} MiB on disk")
            end_to_end(big, "five million rows, chunked")


if __name__ == "__main__":
    main()
