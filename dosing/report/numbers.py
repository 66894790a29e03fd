"""Number formatting shared by every message the planner writes."""

from __future__ import annotations

import math

__all__ = ["fmt", "require_finite", "to_json", "csv_text", "csv_safe_frame"]

TINY_EXPONENT = -6


def fmt(x: float | None, digits: int = 3, *, floor: float | None = None,
        zero_below: float | None = None) -> str:
    """A number to ``digits`` significant figures, with thousands separators.

    A value below what the model resolves for its quantity is not printed
    digit by digit: under ``floor`` (an amount that cannot be negative) it
    reads "below FLOOR", under ``zero_below`` (a signed change) it reads 0.
    Otherwise a number under 1e-6 is written with an exponent.

    Examples
    --------
    >>> fmt(1601.4), fmt(0.012345), fmt(2.0), fmt(None)
    ('1,601', '0.0123', '2.00', 'n/a')
    >>> fmt(7.1e-18, floor=1e-4), fmt(-6.5e-20, 2, zero_below=5e-4), fmt(0.0, floor=1e-4)
    ('below 0.0001', '0', '0')
    >>> fmt(7.3488e-311), fmt(2.5e-7, 2)
    ('7.35e-311', '2.5e-07')
    """
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "n/a"
    if isinstance(x, float) and math.isinf(x):
        return "∞" if x > 0 else "-∞"
    if x == 0 or (zero_below is not None and abs(x) < zero_below):
        return "0"
    if floor is not None and abs(x) < floor:
        return f"below {floor:g}" if floor >= 1e-4 else f"below {floor:.0e}"
    mag = math.floor(math.log10(abs(x)))
    if mag < TINY_EXPONENT:     # 300 zeros help no one: 7.35e-311
        return f"{x:.{digits - 1}e}"
    decimals = max(0, digits - 1 - mag)
    return f"{x:,.{decimals}f}"


def require_finite(data, where: str = "output"):
    """Return ``data`` unchanged, or raise if any number in it is NaN or infinite.

    Every output (sheet, JSON, log record) passes through here: a number the
    model could not produce is an error, never printed.

    Raises
    ------
    ModelError
        Naming the first key that holds a non-finite number.
    """
    from ..errors import ModelError
    bad = _first_non_finite(data, where)
    if bad is not None:
        raise ModelError(f"{bad} could not be computed (the result is not a finite "
                         "number); check the inputs that set it")
    return data


def _first_non_finite(x, path: str):
    if isinstance(x, float):
        return None if math.isfinite(x) else path
    if isinstance(x, dict):
        for k, v in x.items():
            hit = _first_non_finite(v, f"{path}.{k}")
            if hit:
                return hit
    elif isinstance(x, (list, tuple)):
        for i, v in enumerate(x):
            hit = _first_non_finite(v, f"{path}[{i}]")
            if hit:
                return hit
    return None


def to_json(data) -> str:
    """Indented JSON of ``data`` after :func:`require_finite` (never NaN/Infinity)."""
    import json
    return json.dumps(require_finite(data, "result"), indent=2, ensure_ascii=False,
                      allow_nan=False, default=str) + "\n"


#: First characters that make a spreadsheet read a cell as a formula (or,
#: tab and carriage return, shift it into one).
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def csv_text(value):
    """A text cell for a CSV that a spreadsheet will open: one starting like
    a formula gets a leading single quote (common practice, the OWASP advice
    on CSV injection), so it is shown, never run. Non-text is returned as it is."""
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        return "'" + value
    return value


def csv_safe_frame(frame):
    """A copy of a DataFrame with every text cell made safe by :func:`csv_text`;
    numeric columns (a -0.5 stays a number) are not touched."""
    out = frame.copy()
    for col in out.columns:
        if out[col].dtype == object or str(out[col].dtype).startswith("str"):
            out[col] = out[col].map(csv_text)
    return out

