"""Replay many sites (or one long record) in parallel on Dask.

A fleet file names each site with its scenario and its data files::

    [sites.north-quay]
    scenario = "north-quay.toml"          # a flow scenario
    data = ["logs/north/*.csv"]           # files or globs, read in this order

Paths are relative to the fleet file. Every file is cut into parts (byte
ranges of a CSV, row groups of a Parquet file); a ``dask.dataframe`` built
with ``from_map`` reads one part per partition and ``map_partitions`` runs
the replay kernel on it (:func:`dosing.planning.replay.plan_part`). The parts come
back to this process in record order and are put together by
:func:`dosing.planning.replay.stitch`, which plans each part's first rows with the
state the parts before it leave: the stuck-sensor run and the time step
carry across parts and files exactly as in one pass, so a site's figures
equal a single-site replay of the same files (to rounding of the sums).

Dask is an optional dependency (``pip install 'neutral-dosing[fleet]'``):
nothing here imports it until a replay runs. Workers must see the data
files at the same paths as this process (a shared disk for a remote
cluster).
"""

from __future__ import annotations

import contextlib
import logging
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterator, Mapping, Sequence

import pandas as pd

from ..errors import ScenarioError, UsageError
from ..planning.reagents import GENERAL_CAUTION
from ..planning.replay import nominal_step, plan_part, stitch
from ..planning.replay_totals import ReplayReport, ReplayTotals
from .replay_io import (CHUNK_ROWS, PART_BYTES, Part, file_parts, finish_replay,
                        iter_site_chunks, read_part, replay_refusal, site_files)
from ..planning.job import Scenario
from .scenario import load_scenario, parse_toml, read_text_file

__all__ = ["Site", "load_fleet", "cut_parts", "replay_sites", "fleet_report", "FleetReport", "ProductTotal",
           "dask_client"]

_SITE_KEYS = {"scenario": "the site's flow scenario file",
              "data": "a list of its data files or globs"}


@dataclass(frozen=True)
class Site:
    """One site of a fleet: its name, scenario and data files in record order."""

    name: str
    scenario: Scenario
    files: tuple[str, ...]


def single_site(name: str, scenario: Scenario, files: Sequence[str]) -> Site:
    """A site from the command line (``replay A.csv B.csv --scenario S``)."""
    return Site(name, scenario, tuple(files))


def load_fleet(path: str) -> list[Site]:
    """Read and check a fleet file; every scenario must plan a flow."""
    data = parse_toml(read_text_file(path, "fleet file"), path, "a fleet file")
    extra = sorted(set(data) - {"title", "sites"})
    if extra:
        raise ScenarioError(path, extra[0], "unknown key; a fleet file holds [sites.NAME] "
                            "tables (and an optional title)")
    sites = data.get("sites")
    if not isinstance(sites, dict) or not sites:
        raise ScenarioError(path, "sites", "no sites; give one [sites.NAME] table per site "
                            "with scenario = \"...\" and data = [\"...\"]")
    base = Path(path).resolve().parent
    return [_site(path, base, name, table) for name, table in sites.items()]


def _site(path: str, base: Path, name: str, table: Any) -> Site:
    where = f"sites.{name}"
    if not isinstance(table, dict):
        raise ScenarioError(path, where, "expected a table [sites.NAME]")
    for key in table:
        if key not in _SITE_KEYS:
            raise ScenarioError(path, f"{where}.{key}", "unknown key; allowed: "
                                + "; ".join(f"{k} ({v})" for k, v in _SITE_KEYS.items()))
    scen = table.get("scenario")
    if not isinstance(scen, str) or not scen:
        raise ScenarioError(path, f"{where}.scenario", "missing; give the site's flow "
                            "scenario file (relative to the fleet file)")
    data = table.get("data")
    if isinstance(data, str):
        data = [data]
    if (not isinstance(data, list) or not data
            or not all(isinstance(d, str) and d for d in data)):
        raise ScenarioError(path, f"{where}.data", "expected a list of data files or "
                            "globs, e.g. data = [\"logs/north/*.csv\"]")
    scenario = load_scenario(str(base / scen) if not Path(scen).is_absolute() else scen)
    why = replay_refusal(scenario)
    if why:
        raise ScenarioError(path, f"{where}.scenario", f"{scen}: {why}")
    return Site(name, scenario, tuple(site_files(data, base, f"{where}.data")))


# ----------------------------------------------------------------- run --
@contextlib.contextmanager
def dask_client(scheduler: str | None = None, workers: int | None = None) -> Iterator[Any]:
    """A Dask client: on the cluster at ``scheduler``, or on a local cluster
    of ``workers`` processes (default: one per core), stopped afterwards."""
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise UsageError("--fleet", "the fleet replay runs on Dask; install it with "
                         "pip install 'neutral-dosing[fleet]'") from None
    if scheduler:
        try:
            client = Client(scheduler, timeout="10s")
        except (OSError, TimeoutError, ValueError) as err:
            raise UsageError("--scheduler", f"no Dask scheduler answers at {scheduler} "
                             f"({' '.join(str(err).split())[:120]})") from None
        with client, _quiet_teardown():
            _ready(client, "--scheduler")
            yield client
        return
    import dask
    n = workers or os.cpu_count() or 1
    try:
        # One thread per worker process: the kernel is numpy, the GIL is shared.
        # Dask's nanny sets glibc's MALLOC_TRIM_THRESHOLD_, which also fixes
        # the mmap threshold, so every array over 128 KiB (all of a part's
        # columns) is mapped and unmapped afresh: measured here, the replay
        # ran 1.5 times slower in a worker than in this process. Left unset.
        with dask.config.set({"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_":
                              None}):
            cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                                   dashboard_address=":0", silence_logs=logging.CRITICAL)
    except (RuntimeError, OSError) as err:
        raise UsageError("--workers", f"a local Dask cluster of {n} workers did not start "
                         f"({' '.join(str(err).split())[:120]})") from None
    with cluster, Client(cluster) as client, _quiet_teardown():
        _ready(client, "--workers")
        yield client


@contextlib.contextmanager
def _quiet_teardown() -> Iterator[None]:
    """When the run fails, the cluster is stopped without its log lines
    (closed connections of workers being shut down) reaching the terminal:
    the error itself is the one line the operator sees."""
    try:
        yield
    except BaseException:
        for name in ("distributed", "tornado", "asyncio"):
            logging.getLogger(name).setLevel(logging.CRITICAL + 1)
        raise


def _import_kernel() -> bool:
    import dosing.io.replay_io  # noqa: F401  (the reader, the kernel; numpy, pandas, scipy)
    try:
        import pyarrow  # noqa: F401  (the time parser's fast path, when installed)
    except ImportError:
        pass
    return True


def _ready(client, option: str) -> None:
    """Import the replay kernel on every worker, and Dask's dataframe here,
    before any work is sent (each takes about a second the first time); a
    worker that cannot import the kernel (this package not installed there)
    is a clear error."""
    import dask.dataframe  # noqa: F401
    try:
        client.run(_import_kernel)
    except ImportError as err:
        raise UsageError(option, f"the Dask workers cannot import the replay kernel ({err}); "
                         "install this package on every worker") from None


def cut_parts(sites: Sequence[Site], part_bytes: int = PART_BYTES) -> list[tuple[int, Part]]:
    """Every site's files cut into parts: (site index, part). Each file is
    opened and its header checked here, so a missing, empty or unreadable
    file is a clear error before any cluster starts."""
    plan: list[tuple[int, Part]] = []
    for i, site in enumerate(sites):
        plan.extend((i, part) for f in site.files for part in file_parts(f, part_bytes))
    return plan


def replay_sites(sites: Sequence[Site], client, *, part_bytes: int = PART_BYTES,
                 chunk_rows: int = CHUNK_ROWS, keep_hourly: bool = False,
                 progress: Callable[[int, int], None] | None = None,
                 plan: list[tuple[int, Part]] | None = None
                 ) -> dict[str, tuple[ReplayReport, ReplayTotals]]:
    """Replay every site on the client's cluster: {name: (report, totals)}.

    ``progress(done, total)`` is called as parts finish. ``chunk_rows`` is
    the chunk a one-pass replay would read first, which sets the record's
    usual time step (so both give the same figures). ``plan``: the parts
    from :func:`cut_parts`, when already cut.
    """
    import dask.dataframe as dd
    if plan is None:
        plan = cut_parts(sites, part_bytes)
    if progress:
        progress(0, len(plan))            # the bar shows its total from the start
    # Each site's usual time step, from its first chunk: read on the workers
    # (in parallel, where the data is) rather than one site after another here.
    steps = client.gather(client.map(_first_step, list(sites), chunk_rows=chunk_rows,
                                     pure=False))
    frames = dd.from_map(read_part, [p for _, p in plan], meta=_RAW_META,
                         enforce_metadata=False)
    parts = frames.map_partitions(_plan_partition, [i for i, _ in plan], list(sites), steps,
                                  keep_hourly, meta=pd.Series(dtype=object))
    futures = client.compute(parts.to_delayed())
    results = _gather(client, futures, progress)
    out = {}
    for i, site in enumerate(sites):
        mine = [r for (j, _), r in zip(plan, results) if j == i]
        totals = ReplayTotals(rate_unit=_rate_unit(site.scenario), keep_hourly=keep_hourly)
        stitch(mine, site.scenario, steps[i], totals)
        out[site.name] = (finish_replay(totals, site.scenario, site.files), totals)
    return out


_RAW_META = pd.DataFrame({"timestamp": pd.Series(dtype="datetime64[ns]"),
                          "flow_m3_h": pd.Series(dtype=object),
                          "ph": pd.Series(dtype=object)})


def _rate_unit(scenario: Scenario) -> str:
    return "kg/h" if scenario.reagent.kg_product_per_mol is not None else "L/h"


def _first_step(site: Site, chunk_rows: int) -> float:
    """The site's usual time step, from the chunk a one-pass replay reads first."""
    with contextlib.closing(iter_site_chunks(site.files, chunk_rows)) as chunks:
        for chunk in chunks:
            return nominal_step(chunk)
    return nominal_step(pd.DataFrame({"timestamp": pd.Series(dtype="datetime64[ns]")}))


def _plan_partition(frame: pd.DataFrame, owners: list[int], sites: list[Site],
                    steps: list[float], keep_hourly: bool, partition_info=None) -> pd.Series:
    """The kernel one Dask partition runs: one part of one site's record."""
    k = partition_info["number"]
    site = sites[owners[k]]
    result = plan_part(frame, site.scenario, steps[owners[k]], _rate_unit(site.scenario),
                       keep_hourly)
    return pd.Series([result], index=[k], dtype=object)


def _gather(client, futures, progress) -> list:
    """Wait for every part, reporting progress; the parts in record order."""
    from distributed import as_completed
    done = 0
    for _ in as_completed(futures):
        done += 1
        if progress:
            progress(done, len(futures))
    return [s.iloc[0] for s in client.gather(futures)]


# -------------------------------------------------------------- report --
@dataclass(frozen=True)
class ProductTotal:
    """One product over the fleet (amounts of different products are never added)."""

    reagent_name: str
    sites: tuple[str, ...]
    kg_product: float
    litres_product: float
    cost: float | None                   #: over the sites that give a price; None
                                         #: when they price in different currencies
    sites_without_price: tuple[str, ...]
    currency: str = ""                   #: of the cost ("": the prices' own units)


@dataclass(frozen=True)
class FleetReport:
    """A fleet replay: each site's report, and totals per product."""

    fleet: str
    workers: int
    sites: Mapping[str, ReplayReport]
    products: Mapping[str, ProductTotal]
    cautions: tuple[str, ...]

    @property
    def rows(self) -> int:
        return sum(r.rows for r in self.sites.values())

    @property
    def rows_planned(self) -> int:
        return sum(r.rows_planned for r in self.sites.values())

    def to_dict(self) -> dict[str, Any]:
        """The fleet as plain data (SI units, JSON-ready, stable keys)."""
        return {"fleet": self.fleet, "workers": self.workers, "rows": self.rows,
                "rows_planned": self.rows_planned,
                "products": {k: {"reagent_name": p.reagent_name, "sites": list(p.sites),
                                 "kg_product": p.kg_product, "litres_product": p.litres_product,
                                 "cost": p.cost, "currency": p.currency or None,
                                 "sites_without_price": list(p.sites_without_price)}
                             for k, p in self.products.items()},
                "sites": {name: r.to_dict() for name, r in self.sites.items()},
                "cautions": list(self.cautions)}


def _product_total(rs: list[tuple[str, ReplayReport]]) -> ProductTotal:
    """One product's totals over its sites; costs in different currencies
    are not added."""
    priced = [(n, r) for n, r in rs if r.cost is not None]
    currencies = {r.currency for _, r in priced}
    return ProductTotal(
        reagent_name=rs[0][1].reagent_name, sites=tuple(n for n, _ in rs),
        kg_product=sum(r.kg_product for _, r in rs),
        litres_product=sum(r.litres_product or 0.0 for _, r in rs),
        cost=sum(r.cost for _, r in priced) if len(currencies) <= 1 else None,
        sites_without_price=tuple(n for n, r in rs if r.cost is None),
        currency=currencies.pop() if len(currencies) == 1 else "")


def fleet_report(fleet: str, results: Mapping[str, tuple[ReplayReport, ReplayTotals]],
                 workers: int) -> FleetReport:
    """The fleet summary: each site's report, and totals per product (a kg of
    caustic and a kg of acid are never added together)."""
    by_product: dict[str, list[tuple[str, ReplayReport]]] = {}
    cautions: list[str] = []
    for name, (r, _) in results.items():
        by_product.setdefault(r.reagent, []).append((name, r))
        cautions.extend(c for c in r.cautions if c not in cautions and c != GENERAL_CAUTION)
    products = {pid: _product_total(rs) for pid, rs in by_product.items()}
    return FleetReport(fleet, workers, {name: r for name, (r, _) in results.items()},
                       products, tuple(cautions) + (GENERAL_CAUTION,))
