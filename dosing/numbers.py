"""Number formatting shared by every message the planner writes."""

from __future__ import annotations

import math

__all__ = ["fmt"]


def fmt(x: float | None, digits: int = 3) -> str:
    """A number to ``digits`` significant figures, with thousands separators.

    Examples
    --------
    >>> fmt(1601.4), fmt(0.012345), fmt(2.0), fmt(None)
    ('1,601', '0.0123', '2.00', 'n/a')
    """
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "n/a"
    if isinstance(x, float) and math.isinf(x):
        return "∞" if x > 0 else "-∞"
    if x == 0:
        return "0"
    mag = math.floor(math.log10(abs(x)))
    decimals = max(0, digits - 1 - mag)
    return f"{x:,.{decimals}f}"
