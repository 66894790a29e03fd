"""Small helpers shared by the tests."""

from __future__ import annotations

import numpy as np

from dosing.equilibrium import N_SYSTEMS, system_index


def totals(**mol_l) -> np.ndarray:
    """An (m,) totals vector from keyword totals [mol/L]."""
    v = np.zeros(N_SYSTEMS)
    for key, value in mol_l.items():
        v[system_index(key)] = value
    return v
