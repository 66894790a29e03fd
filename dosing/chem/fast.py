"""Whether the compiled fixed-pH loops (:mod:`.dose_kernel`,
:mod:`.alkalinity_kernel`) are used, and where they apply.

Tests turn :data:`DOSE_KERNEL` off to run the numpy references they are
checked against; without numba (a dependency, so not expected) the numpy
paths run.
"""

from __future__ import annotations

try:
    from . import alkalinity_kernel as _alk_kernel, dose_kernel as _kernel
except ImportError:                     # pragma: no cover - numba is a dependency
    _kernel = _alk_kernel = None

__all__ = ["DOSE_KERNEL", "compiled", "compiled_alkalinity", "simple_rows", "kernel_constants"]


class _Switch:
    """Whether the solvers use the compiled loops where they apply, and from
    how many waters in one call: below that the numpy path is as quick, and
    a command that never reaches it does not pay numba's start (about 0.3 s
    the first time a process calls any compiled function)."""

    on: bool = True
    min_rows: int = 20_000


DOSE_KERNEL = _Switch()


def _wanted(n: int) -> bool:
    return DOSE_KERNEL.on and n >= DOSE_KERNEL.min_rows


def compiled(n: int):
    """The compiled kernel module for a call on ``n`` waters, or None."""
    return _kernel if (_kernel is not None and _wanted(n)) else None


def compiled_alkalinity(n: int):
    """The compiled alkalinity kernel module for ``n`` waters, or None."""
    return _alk_kernel if (_alk_kernel is not None and _wanted(n)) else None


def simple_rows(rows, activity) -> bool:
    """Whether a solver's view is one the compiled loops solve: weak acids
    only (no complex, no solid, no calcite, nothing held by air), ideal or
    Davies activity."""
    import numpy as np
    return (rows.tab is None and rows.ca < 0 and not rows.has_solids
            and activity.name in ("ideal", "davies")
            and not bool(np.isfinite(rows.co2).any()))


def kernel_constants(rows, n: int):
    """(k, kw, a) of a solver's view as the compiled loops take them: one row
    for all waters when the constants are of one temperature (views of one
    row), else one row per water; contiguous float arrays."""
    import numpy as np
    one = rows.k.shape[0] > 1 and rows.k.strides[0] == 0
    a = np.broadcast_to(rows.a, (n,))
    k, kw, a = (rows.k[:1], rows.kw[:1], a[:1]) if one else (rows.k, rows.kw, a)
    f = np.ascontiguousarray
    return f(k, dtype=float), f(kw, dtype=float), f(a, dtype=float)
