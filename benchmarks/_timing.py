"""Shared timing helper of the benchmark scripts (imported as a sibling module)."""

from __future__ import annotations

import time


def best_of(fn, repeat: int = 3):
    """(fastest wall time of ``repeat`` runs [s], the last result)."""
    out, times = None, []
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return min(times), out
