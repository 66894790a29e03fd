"""Small helpers shared by the tests."""

from __future__ import annotations

import numpy as np

from dosing.chem import N_SYSTEMS, system_index


def totals(**mol_l) -> np.ndarray:
    """An (m,) totals vector from keyword totals [mol/L]."""
    v = np.zeros(N_SYSTEMS)
    for key, value in mol_l.items():
        v[system_index(key)] = value
    return v


def run_cli(*args, env=None, timeout=300):
    """Run ``python -m dosing.cli ARGS`` from the project root; returns the result."""
    import subprocess
    import sys
    from pathlib import Path
    root = Path(__file__).resolve().parents[1]
    return subprocess.run([sys.executable, "-m", "dosing.cli", *args], capture_output=True,
                          text=True, cwd=root, timeout=timeout, env=env)
