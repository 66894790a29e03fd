"""The printable sheet as a one-page PDF, drawn with matplotlib's PDF backend.

Why this path: matplotlib is already the project's figure library, its PDF
backend is pure Python with the DejaVu fonts it ships (embedded as TrueType,
so the text can be searched and copied), it needs no browser, no system
library and no network, and it gives the same bytes on every platform we
run on. A layout engine for long documents would be more than one page
needs. The page is A4 or US Letter; the text shrinks (down to 6 pt) until
everything fits on the one page, and a sheet that still would not fit is
refused rather than cut.
"""

from __future__ import annotations

import io
import textwrap
from dataclasses import dataclass, field

from ..errors import InputError
from .print_sheet import PrintSheet

__all__ = ["print_pdf", "PAGE_SIZES"]

#: Page sizes in inches (ISO 216 A4; ANSI Letter).
PAGE_SIZES = {"a4": (8.27, 11.69), "letter": (8.5, 11.0)}

_MARGIN = 0.6          # inches on every side
_EM = 0.56             # DejaVu Sans: mean glyph width over the point size (measured)


@dataclass
class _Layout:
    """Draw operations down one page; ``y`` runs from the top (inches)."""

    width: float
    size: float                          #: body text size [pt]
    y: float = 0.0
    ops: list = field(default_factory=list)

    @property
    def line(self) -> float:
        return self.size * 1.3 / 72.0

    def chars(self, width: float, size: float | None = None) -> int:
        return max(20, int(width * 72.0 / ((size or self.size) * _EM)))

    def text(self, s: str, *, x: float = 0.0, width: float | None = None, bold=False,
             scale: float = 1.0, colour: str = "black", prefix: str = "") -> None:
        size = self.size * scale
        lines = textwrap.wrap(s, self.chars((width or self.width) - x, size),
                              initial_indent=prefix, subsequent_indent=" " * len(prefix)) or [""]
        for ln in lines:
            self.ops.append(("text", x, self.y, ln, size, bold, colour))
            self.y += size * 1.3 / 72.0

    def gap(self, lines: float = 0.5) -> None:
        self.y += self.line * lines

    def heading(self, s: str) -> None:
        self.gap(0.4)
        self.text(s.upper(), bold=True, scale=1.05)
        self.ops.append(("rule", self.y - self.line * 0.15))

    def rows(self, rows, label_width: float = 1.6) -> None:
        for label, value in rows:
            top = self.y
            self.ops.append(("text", 0.0, top, label, self.size, False, "0.35"))
            self.text(value, x=label_width)

    def boxes(self, steps) -> None:
        """The record table: each step's text, then boxes to write in."""
        box_w, text_w = 1.05, self.width - 2 * 1.05 - 0.1
        for step in steps:
            top = self.y
            self.text(step.text, width=text_w)
            height = max(self.y - top, self.line * 2.2)
            for i, head in enumerate(step.boxes):
                x = text_w + 0.1 + i * box_w
                self.ops.append(("box", x, top, box_w - 0.08, height - 0.04, head,
                                 self.size * 0.75))
            self.y = top + height + 0.04


def _layout(sheet: PrintSheet, width: float, size: float) -> _Layout:
    lay = _Layout(width, size)
    lay.text(f"DOSE SHEET  {sheet.title}", bold=True, scale=1.35)
    if sheet.where:
        lay.text(sheet.where, scale=1.1)
    if sheet.made:
        lay.text(f"planned {sheet.made}", colour="0.35")
    lay.gap()
    lay.text(sheet.headline, bold=True, scale=1.15)
    for breach in sheet.breaches:
        lay.text(f"PERMIT BREACH: {breach}", bold=True, colour="darkred")
    sections = (("Measured", sheet.measured, lambda: lay.rows(sheet.measured)),
                ("Dose", sheet.dose, lambda: lay.rows(sheet.dose)),
                ("Record what was done", sheet.steps, lambda: lay.boxes(sheet.steps)),
                ("Trim table: pH read, then add", sheet.trim,
                 lambda: lay.rows(sheet.trim, 1.2)),
                ("Warnings", sheet.warnings,
                 lambda: [lay.text(w, prefix="! ") for w in sheet.warnings]),
                ("Cautions", sheet.cautions,
                 lambda: [lay.text(c, prefix="- ") for c in sheet.cautions]))
    for title, content, draw in sections:
        if content:
            lay.heading(title)
            draw()
    lay.gap(1.2)
    third = width / len(sheet.signatures)
    for i, name in enumerate(sheet.signatures):
        lay.ops.append(("sign", i * third, lay.y + lay.line * 1.6, third - 0.25, name,
                        size * 0.85))
    lay.y += lay.line * 2.6
    return lay


def _fitting(sheet: PrintSheet, width: float, height: float) -> _Layout:
    """The layout at the largest text size (9 pt down to 6 pt) that fits the page."""
    size = 9.0
    while True:
        lay = _layout(sheet, width, size)
        if lay.y <= height:
            return lay
        if size <= 6.0:
            raise InputError("sheet", "this plan's sheet does not fit on one page even in "
                             "6 pt text; print the full sheet (dosing plan) instead")
        size = max(6.0, size - 0.5)


def print_pdf(sheet: PrintSheet, paper: str = "a4") -> bytes:
    """The sheet as the bytes of a one-page PDF on ``paper`` ("a4" or "letter")."""
    from matplotlib.backends.backend_pdf import FigureCanvasPdf
    from matplotlib.figure import Figure
    from matplotlib.patches import Rectangle
    if paper not in PAGE_SIZES:
        raise InputError("paper", f"{paper!r}; allowed: {', '.join(PAGE_SIZES)}")
    w, h = PAGE_SIZES[paper]
    lay = _fitting(sheet, w - 2 * _MARGIN, h - 2 * _MARGIN)
    fig = Figure(figsize=(w, h))
    FigureCanvasPdf(fig)

    def at(x: float, y: float) -> tuple[float, float]:      # layout inches to figure fractions
        return (_MARGIN + x) / w, 1.0 - (_MARGIN + y) / h
    for op in lay.ops:
        kind = op[0]
        if kind == "text":
            _, x, y, s, size, bold, colour = op
            fig.text(*at(x, y), s, fontsize=size, va="top", color=colour,
                     fontweight="bold" if bold else "normal", family="DejaVu Sans")
        elif kind == "rule":
            fig.add_artist(Rectangle(at(0, op[1]), (w - 2 * _MARGIN) / w, 0.6 / 72 / h,
                                     transform=fig.transFigure, color="0.5", lw=0))
        elif kind == "box":
            _, x, y, bw, bh, head, size = op
            fig.add_artist(Rectangle(at(x, y + bh), bw / w, bh / h, transform=fig.transFigure,
                                     fill=False, lw=0.8, ec="black"))
            fig.text(*at(x + 0.04, y + 0.03), head, fontsize=size, va="top", color="0.4")
        elif kind == "sign":
            _, x, y, lw, name, size = op
            fig.add_artist(Rectangle(at(x, y), lw / w, 0.5 / 72 / h,
                                     transform=fig.transFigure, color="black", lw=0))
            fig.text(*at(x, y + 0.04), name, fontsize=size, va="top", color="0.3")
    import matplotlib
    buf = io.BytesIO()
    # TrueType embedded (fonttype 42), so the sheet's text can be searched and copied.
    with matplotlib.rc_context({"pdf.fonttype": 42}):
        fig.savefig(buf, format="pdf", metadata={"Title": f"Dose sheet: {sheet.title}",
                                                 "Creator": "neutral-dosing"})
    return buf.getvalue()
