"""The model's own uncertainty: which constants a water leans on, and how far they are known.

Published compilations disagree on the constants behind metal chemistry:
hydrolysis constants by 0.1-0.5 log units, the solubility of a fresh
hydroxide against an aged one by 1-3, complexes of the chelants and the
ammines by a few tenths. A water leans on some of them; :func:`model_groups`
lists those it does (its metals, the ligands that hold them, the solids it
may form) with one standard deviation each, and :func:`shift_of` turns a
sample of standard normal scores into per-water shifts of the constants
(:class:`~dosing.chem.mixture.LogKShift`), sampled beside the measurements
by :mod:`dosing.planning.uncertainty`.

Spreads: each complex and solid carries the range between compilations in
its catalogue row (:mod:`dosing.chem.complexes`, :mod:`dosing.chem.phases`),
taken here as two standard deviations. The first hydrolysis constant of each
metal: half the range between Baes & Mesmer (1976), Nordstrom et al. (1990),
Stumm & Morgan (1996, ch. 6) and the IUPAC evaluations of Powell et al.
(2007, 2013), all from memory (:data:`HYDROLYSIS_SD`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable

import numpy as np

from ..chem import system_index
from ..chem.columns import COLUMN_IDS
from ..chem.complexes import COMPLEXES
from ..chem.metals import METALS, label
from ..chem.mixture import LogKShift
from ..chem.phases import PHASES

__all__ = ["Group", "model_groups", "shift_of", "HYDROLYSIS_SD", "group_of", "present_ids"]

#: One standard deviation of each metal's first hydrolysis constant [log
#: units] (half the range between compilations, from memory; see the notes).
HYDROLYSIS_SD = {"iron_iii": 0.05, "iron_ii": 0.2, "aluminium": 0.1, "zinc": 0.1,
                 "copper": 0.25, "nickel": 0.1, "cadmium": 0.1, "lead": 0.1,
                 "chromium_iii": 0.25, "manganese": 0.1, "magnesium": 0.05,
                 "calcium": 0.05}
_METAL_IDS = {m.id for m in METALS}
_HYDROXIDE = {m.id: i for i, m in enumerate(METALS)}      # PHASES begins with them


@dataclass(frozen=True)
class Group:
    """Constants that move together in the sample."""

    key: str                      #: ``model:aluminium:solid``, ``model:ammonia`` ...
    words: str                    #: how the sheet names it (``aluminium constants``)
    sd: float                     #: one standard deviation [log units]
    first_step: tuple[int, ...] = ()   #: columns whose first step it moves
    complexes: tuple[int, ...] = ()    #: positions in COMPLEXES
    phases: tuple[int, ...] = ()       #: positions in PHASES


def group_of(key: str) -> str:
    """The group a sampled key belongs to (a metal's solid and hydrolysis are one)."""
    parts = key.split(":")
    return ":".join(parts[:2])


def model_groups(present: Iterable[str], *, solids: bool = True) -> tuple[Group, ...]:
    """The constants a water with columns ``present`` leans on (ids, its
    reagent's included)."""
    here = set(present)
    out: list[Group] = []
    for m in METALS:
        if m.id not in here:
            continue
        name = f"{label(m.id)} constants"
        out.append(Group(f"model:{m.id}:hydrolysis", name, HYDROLYSIS_SD[m.id],
                         first_step=(system_index(m.id),)))
        if solids:
            out.append(Group(f"model:{m.id}:solid", name, PHASES[_HYDROXIDE[m.id]].spread / 2,
                             phases=(_HYDROXIDE[m.id],)))
    by_ligand: dict[str, list[int]] = {}
    for i, c in enumerate(COMPLEXES):
        parts = {p for p, _ in c.parts}
        if parts <= here:
            for ligand in sorted(parts - _METAL_IDS) or sorted(parts)[-1:]:
                by_ligand.setdefault(ligand, []).append(i)
    for ligand, idx in by_ligand.items():
        sd = max(COMPLEXES[i].spread for i in idx) / 2
        words = f"{ligand.replace('edta', 'EDTA')} complexes and pairs"
        out.append(Group(f"model:{ligand}", words, sd, complexes=tuple(idx)))
    if solids:
        for i, p in enumerate(PHASES[len(METALS):], start=len(METALS)):
            if {q for q, _ in p.parts} <= here and len(p.parts) > 1:
                out.append(Group(f"model:{p.id}", f"{p.name} solubility", p.spread / 2,
                                 phases=(i,)))
    return tuple(out)


def shift_of(groups: tuple[Group, ...], z: np.ndarray) -> LogKShift:
    """Per-water shifts from standard normal scores ``z`` (n, len(groups))."""
    shift = LogKShift.zeros(z.shape[0])
    for g, col in zip(groups, z.T):
        d = g.sd * col
        for j in g.first_step:
            shift.first_step[:, j] += d
        for i in g.complexes:
            shift.complexes[:, i] += d
        for i in g.phases:
            shift.phases[:, i] += d
    return shift


def present_ids(vec: np.ndarray, extra: Iterable[str] = ()) -> set[str]:
    """Column ids with a total in ``vec`` (N_SYSTEMS,), with ``extra`` ids."""
    return {COLUMN_IDS[j] for j in np.flatnonzero(vec)} | set(extra)
