"""Text helpers every plain-text rendering shares: wrapping and label tables."""

from __future__ import annotations

import contextlib
import io
import sys
import textwrap
from typing import Iterator

__all__ = ["wrap", "table", "hanging", "printable", "printable_stdout"]


def wrap(text: str, width: int, indent: str) -> list[str]:
    """``text`` wrapped to ``width``, the first line after ``indent``, the rest under it."""
    return textwrap.wrap(text, width=width, initial_indent=indent,
                         subsequent_indent=" " * len(indent))


def table(out: list[str], rows: list[tuple[str, str]], width: int) -> None:
    """Append (label, value) rows, values wrapped under their column."""
    label_w = max(len(r[0]) for r in rows)
    for label, value in rows:
        first, *rest = wrap(value, width - label_w - 4, "") or [""]
        out.append(f"  {label:<{label_w}}  {first}")
        out.extend(" " * (label_w + 4) + r.strip() for r in rest)


def hanging(label: str, text: str, width: int, indent: int = 16) -> list[str]:
    """A label and its text, the text wrapped under itself."""
    return textwrap.wrap(f"{label:<{indent}}{text}", width, subsequent_indent=" " * indent,
                         break_on_hyphens=False)


# Control characters a terminal would obey (ESC, BEL, NUL, a carriage return
# that overwrites the line, the C1 set): stored and passed on as given, but
# shown escaped. Newline and tab are layout and stay.
_CONTROL = {c: f"\\x{c:02x}" for c in (*range(0x00, 0x09), *range(0x0b, 0x20),
                                        *range(0x7f, 0xa0))}


def printable(text: str) -> str:
    """``text`` with every control character a terminal acts on shown as ``\\xNN``."""
    return text.translate(_CONTROL)


class _Printable(io.TextIOBase):
    """A text stream that escapes control characters on the way to ``inner``."""

    def __init__(self, inner):
        self._inner = inner

    def write(self, text: str) -> int:
        self._inner.write(printable(text))
        return len(text)

    def flush(self) -> None:
        self._inner.flush()

    def isatty(self) -> bool:
        return self._inner.isatty()


@contextlib.contextmanager
def printable_stdout() -> Iterator[None]:
    """Within the block, what is printed to standard output shows control
    characters escaped (text an operator typed, a scenario's title) instead
    of letting the terminal obey them."""
    saved = sys.stdout
    sys.stdout = _Printable(saved)
    try:
        yield
    finally:
        sys.stdout = saved

