"""Where a command may write: output paths checked before any work is done.

Three rules, the same for every command that writes a file (``--plot``,
``--csv``, the shift-log export):

* an output is never one of the command's own inputs (the scenario, the
  data, the shift log itself), whatever ``--force`` says: the file it was
  reading would be lost;
* an existing file is replaced only when this program wrote it (a figure
  or a CSV of ours, known by what it starts with), or with ``--force``;
* a symbolic link at the output path is never followed: it is refused, and
  ``--force`` replaces the link itself (the rename in
  :mod:`dosing.io.files`), never the file it points to.

Every refusal is one :class:`~dosing.errors.UsageError` naming the option.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Iterable

from ..errors import UsageError

__all__ = ["check_outputs", "written_by_us", "PNG_SOFTWARE", "LOG_EXPORT_HEAD"]

#: The PNG ``Software`` text every figure of ours carries.
PNG_SOFTWARE = "neutral-dosing"
#: How a shift-log export starts (its header row, quoted as it is written,
#: or bare as a spreadsheet saves it again).
LOG_EXPORT_HEAD = ('"id","kind","utc","operator",', "id,kind,utc,operator,")
_PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


def written_by_us(path: Path) -> bool:
    """Whether the file at ``path`` is one of our outputs: a figure with our
    Software text, a CSV that opens with our cautions (ending with the final
    word) or the shift-log export's header."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(8192)
    except OSError:
        return False
    if head.startswith(_PNG_MAGIC):
        return PNG_SOFTWARE.encode() in head
    text = head.decode("utf-8", "replace")
    if text.startswith(LOG_EXPORT_HEAD):
        return True
    comments = [ln for ln in text.splitlines() if ln.startswith("# ")]
    return bool(comments) and text.startswith("# ") and any(
        "have the final word" in ln for ln in comments)


def _same(a: Path, b: Path) -> bool:
    try:
        return a.resolve() == b.resolve() or (a.exists() and b.exists() and a.samefile(b))
    except OSError:
        return False


def check_outputs(outputs: Iterable[tuple[str, str | None]], inputs: Iterable[str | Path],
                  *, force: bool = False) -> None:
    """Refuse an output path before anything is computed or written.

    ``outputs``: (option, path or None) pairs; ``inputs``: every file the
    command reads (scenario, data, log).
    """
    given = [(opt, Path(p)) for opt, p in outputs if p]
    sources = [Path(p) for p in inputs if p]
    for k, (opt, out) in enumerate(given):
        for src in sources:
            if _same(out, src):
                raise UsageError(opt, f"{out} is one of this command's inputs; it would be "
                                 "lost. Give another file name")
        for other_opt, other in given[k + 1:]:
            if _same(out, other):
                raise UsageError(other_opt, f"{other} is also given to {opt}; give each "
                                 "output its own file")
        if out.is_symlink():
            if not force:
                raise UsageError(opt, f"{out} is a symbolic link (to {os.readlink(out)}); "
                                 "it is not followed. Give the real path, or add --force "
                                 "to replace the link itself (not the file it points to)")
        elif out.exists() and not force:
            if out.is_dir():
                raise UsageError(opt, f"{out} is a folder; give a file name")
            if not written_by_us(out):
                raise UsageError(opt, f"{out} exists and was not written by this program; "
                                 "it is kept. Give another file name, or add --force to "
                                 "replace it")
