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

__all__ = ["DOSE_KERNEL", "compiled", "compiled_alkalinity", "simple_rows"]


class _Switch:
    """Whether the solvers use the compiled loops where they apply."""

    on: bool = True


DOSE_KERNEL = _Switch()


def compiled():
    """The compiled kernel module, or None when it is off or missing."""
    return _kernel if (_kernel is not None and DOSE_KERNEL.on) else None


def compiled_alkalinity():
    """The compiled alkalinity kernel module, or None when off or missing."""
    return _alk_kernel if (_alk_kernel is not None and DOSE_KERNEL.on) else None


def simple_rows(rows, activity) -> bool:
    """Whether a solver's view is one the compiled loops solve: weak acids
    only (no complex, no solid, no calcite, nothing held by air), ideal or
    Davies activity."""
    import numpy as np
    return (rows.tab is None and rows.ca < 0 and not rows.has_solids
            and activity.name in ("ideal", "davies")
            and not bool(np.isfinite(rows.co2).any()))
