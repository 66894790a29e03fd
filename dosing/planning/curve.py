"""The titration curve of a water and a reagent: pH and buffer intensity against dose.

Laid out on an even grid of pH between the two ends (forward solves), each
dose from the direct fixed-pH solve: points fall where the pH moves, steep
jumps included.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..chem import add_dose, dose_to_ph, solve_ph, speciate
from ..errors import InputError
from .effluent import Water
from .reagents import Reagent

__all__ = ["TitrationCurve", "titration_curve"]


@dataclass(frozen=True, eq=False)
class TitrationCurve:
    """pH against dose for one water and reagent (arrays of equal length)."""

    dose_mol_l: np.ndarray           #: dose of active compound [mol/L]
    ph: np.ndarray                   #: pH after that dose [-]
    buffer_intensity_eq_l: np.ndarray  #: β of the dosed water [eq/(L pH)]


def titration_curve(water: Water, reagent: Reagent, max_dose_mol_l: float,
                    *, points: int = 301) -> TitrationCurve:
    """pH and buffer intensity against dose, from 0 to ``max_dose_mol_l``.

    The two ends are forward solves; in between the curve is laid out on an
    even grid of pH and each dose comes from the direct fixed-pH solve (one
    vectorised call), which puts points where the pH moves, steep jumps
    included.
    """
    if not (math.isfinite(max_dose_mol_l) and max_dose_mol_l > 0):
        raise InputError("max_dose_mol_l", f"{max_dose_mol_l!r}; allowed: above 0")
    if points < 3:
        raise InputError("points", "a curve needs at least 3 points")
    mix = water.mixture()
    vec = reagent.vector()
    ends = add_dose(mix.repeat(2), vec, np.array([0.0, max_dose_mol_l]))
    p0, p1 = solve_ph(ends, ph_guess=np.full(2, water.ph))
    grid = np.linspace(p0, p1, points)
    d, _ = dose_to_ph(mix.repeat(points), vec, grid)
    d[0], d[-1] = 0.0, max_dose_mol_l
    keep = np.isfinite(d) & (d >= 0.0) & (d <= max_dose_mol_l)
    keep[[0, -1]] = True
    grid, d = grid[keep], d[keep]
    order = np.argsort(d, kind="stable")
    grid, d = grid[order], d[order]
    dosed = add_dose(mix.repeat(d.size), vec, d)
    beta = speciate(dosed, grid).buffer_intensity_eq_l
    return TitrationCurve(d, grid, beta)
