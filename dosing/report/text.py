"""Text helpers every plain-text rendering shares: wrapping and label tables."""

from __future__ import annotations

import textwrap

__all__ = ["wrap", "table", "hanging"]


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
