"""Simulate every site of a fleet on Dask: each site's record one task
(a shell module: it reads files, runs the planner and hands back the
report layer's dictionary).

The fleet file is the one ``replay --fleet`` reads ([sites.NAME] with the
site's flow scenario and its data files). Each site's files are read and
simulated through the same designs by one task on a worker
(:func:`simulate_site`); the comparison comes back as its JSON-ready
dictionary (the traces stay on the worker), so a site's result equals
``dosing simulate SCENARIO --data FILES`` of that site alone.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Sequence

import pandas as pd

from .errors import DosingError, ScenarioError
from .planning.simulate_design import design_residence_min, simulate, simulation_refusal
from .planning.simulate_influent import record_influent
from .io.fleet import Site
from .io.replay_io import iter_chunks

__all__ = ["check_sites", "simulate_site", "simulate_sites"]


def check_sites(fleet: str, sites: Sequence[Site]) -> None:
    """Every site's scenario must be one the simulation takes."""
    for site in sites:
        refusal = simulation_refusal(site.scenario)
        if refusal:
            raise ScenarioError(fleet, f"sites.{site.name}.scenario", refusal[1])


def simulate_site(site: Site, choices, step_s: float) -> dict:
    """One site's record through the designs: the comparison as a dict
    (:func:`~dosing.report.simulate_report.simulation_dict`). A choice
    without a residence time takes the site's control design's."""
    from .planning.job import make_plan
    from .report.simulate_report import simulation_dict
    control = make_plan(site.scenario, sampled=False).control
    residence = design_residence_min(control)
    choices = [c if c.residence_min is not None else replace(c, residence_min=residence)
               for c in choices]
    frame = pd.concat([c for f in site.files for c in iter_chunks(f)], ignore_index=True)
    influent, held = record_influent(frame, site.scenario)
    sim = simulate(site.scenario, influent, choices, source=", ".join(site.files),
                   rows_held=held, step_s=step_s, control=control)
    return simulation_dict(sim)


def simulate_sites(sites: Sequence[Site], client, choices, step_s: float) -> dict[str, dict]:
    """Every site simulated on the client's cluster: {name: comparison}.
    A site that fails is an error naming the site."""
    futures = [client.submit(simulate_site, site, choices, step_s, pure=False)
               for site in sites]
    out = {}
    for site, future in zip(sites, futures):
        try:
            out[site.name] = future.result()
        except DosingError as err:
            raise ScenarioError(f"site {site.name}", "", str(err)) from None
    return out
