"""Numbers and ``name=value`` lists as people type them, read one way for
every front end (Tankside's form and the web page's): a decimal point or a
decimal comma, and one reason when a value cannot be read.
"""

from __future__ import annotations

__all__ = ["parse_pairs", "read_number"]


def read_number(text: str) -> float:
    """A number as typed: a decimal point, or a decimal comma (``2,8``) where
    the writer's locale uses one. A comma before exactly three digits
    (``1,234``) could be either a decimal or a thousands mark, so it is
    refused with a reason rather than guessed.

    >>> read_number("2,8"), read_number("12.75"), read_number("-0,05")
    (2.8, 12.75, -0.05)
    """
    t = text.strip()
    if "," in t and "." not in t and t.count(",") == 1:
        whole, frac = t.split(",")
        if len(frac) == 3 and whole.lstrip("+-").isdigit():
            raise ValueError(f"{t!r} could be {whole}.{frac} or {whole}{frac}: write it "
                             "with a point, or without the comma")
        t = f"{whole}.{frac}"
    return float(t)


def parse_pairs(text: str) -> dict[str, float]:
    """``"sulfate=1.8; acetate=3"`` to a dict; raises ValueError with a reason.

    Entries are separated by ``,`` or ``;``; a comma followed by digits and
    no ``=`` is a decimal comma, so ``zinc=2,8, nickel=0,5`` reads as written.

    >>> parse_pairs("zinc=2,8, nickel=0.5; copper=1")
    {'zinc': 2.8, 'nickel': 0.5, 'copper': 1.0}
    """
    out: dict[str, float] = {}
    for part in _entries(text):
        name, value = (x.strip() for x in part.split("=", 1))
        if not name:
            raise ValueError(f"{part!r}: a name is missing before '='")
        try:
            out[name] = read_number(value)
        except ValueError as err:
            raise ValueError(f"{name}: {err}" if "could be" in str(err)
                             else f"{name}: {value!r} is not a number") from None
    return out


def _entries(text: str) -> list[str]:
    """``name=value`` entries of a line; a piece without ``=`` after a comma
    is the decimal part of the entry before it."""
    entries: list[str] = []
    for chunk in text.split(";"):
        for piece in chunk.split(","):
            piece = piece.strip()
            if not piece:
                continue
            if "=" not in piece and entries and piece.isdigit() and "," not in entries[-1]:
                entries[-1] += "," + piece
            elif "=" not in piece:
                raise ValueError(f"{piece!r}: write name=value, e.g. sulfate=1.8")
            else:
                entries.append(piece)
    return entries
