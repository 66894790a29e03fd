"""Fleet replay on Dask: rows per second with 1 and 2 local workers, against
the one-process replay of the same sites in the same run, and peak memory
per worker.

Writes an invented fleet (SITES sites x 2 files of ROWS one-minute rows each)
to a temporary folder, then replays it:

1. in this process, site after site (``run_replay``: the baseline);
2. on a local Dask cluster of 1 worker, then of 2 workers (cluster start-up,
   with the imports on the workers, timed apart from the replay).

Each replay is timed three times and the best kept: this machine's timings
wander by a third from run to run.

Prints figures; asserts nothing.

    python benchmarks/bench_fleet.py [--sites 4] [--rows 1000000]
"""

from __future__ import annotations

import argparse
import resource
import shutil
import tempfile
import time
from pathlib import Path

from bench_replay import best_of, make_log   # a sibling script: the same invented log

ROOT = Path(__file__).resolve().parents[1]
SCEN = ROOT / "scenarios" / "flow-metering-pump.toml"


def _peak_mib() -> float:
    """Peak resident memory of the calling process [MiB] (Linux: ru_maxrss in KiB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def write_fleet(folder: Path, sites: int, rows: int) -> Path:
    """Two files per site, the second going on where the first ends; every
    site gets a copy of the same two (written once: writing is the slow part)."""
    lines = []
    for k in (1, 2):
        make_log(folder / f"site0-{k}.csv", rows, first=(k - 1) * rows)
    for s in range(sites):
        for k in (1, 2):
            if s:
                shutil.copyfile(folder / f"site0-{k}.csv", folder / f"site{s}-{k}.csv")
        lines.append(f'[sites.plant-{s}]\nscenario = "{SCEN}"\ndata = ["site{s}-*.csv"]\n')
    fleet = folder / "fleet.toml"
    fleet.write_text("\n".join(lines))
    return fleet


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sites", type=int, default=4)
    ap.add_argument("--rows", type=int, default=1_000_000, help="rows per file")
    a = ap.parse_args()
    from dosing.io.fleet import dask_client, load_fleet, replay_sites
    from dosing.io.replay_io import run_replay
    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        fleet = write_fleet(Path(tmp), a.sites, a.rows)
        sites = load_fleet(str(fleet))
        n = a.sites * 2 * a.rows
        print(f"fleet: {a.sites} sites x 2 files x {a.rows:,} rows = {n:,} rows "
              f"(written in {time.perf_counter() - t0:.1f} s)")
        base = best_of(3, lambda: [run_replay(list(site.files), site.scenario,
                                              keep_hourly=False) for site in sites])
        print(f"one process, site after site: {base:6.2f} s  {n / base:10,.0f} rows/s")
        rates = {}
        for workers in (1, 2):
            t0 = time.perf_counter()
            with dask_client(workers=workers) as client:
                up = time.perf_counter() - t0
                run = best_of(3, lambda: replay_sites(sites, client))
                peaks = client.run(_peak_mib)
            rates[workers] = n / run
            print(f"Dask, {workers} worker{'s' if workers > 1 else ' '}: {run:6.2f} s  "
                  f"{n / run:10,.0f} rows/s  (x{base / run:.2f} the one-process run; "
                  f"cluster start {up:.1f} s; peak per worker "
                  + ", ".join(f"{v:.0f}" for v in peaks.values()) + " MiB)")
        print(f"2 workers / 1 worker: x{rates[2] / rates[1]:.2f}")


if __name__ == "__main__":
    main()
