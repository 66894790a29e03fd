"""Writing files safely: the one place the front ends write results.

The engine itself never touches files; the command line and the terminal
workbench call :func:`write_atomic`, which writes through a temporary file
and a rename, so a failed run never leaves half a file behind.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from .errors import ScenarioError

__all__ = ["write_atomic", "atomic_text_writer"]


def write_atomic(path: str | Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file and a rename.

    Raises
    ------
    ScenarioError
        If the folder does not exist or cannot be written.
    """
    p = Path(path)
    folder = p.parent if str(p.parent) else Path(".")
    if not folder.is_dir():
        raise ScenarioError(str(path), "", f"folder {str(folder)!r} does not exist")
    tmp = None
    try:
        fd, tmp = tempfile.mkstemp(dir=folder, prefix=".dosing-", suffix=".tmp")
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, p)
    except OSError as err:
        if tmp and os.path.exists(tmp):
            os.unlink(tmp)
        raise ScenarioError(str(path), "", f"cannot be written ({err.strerror})") from None


class atomic_text_writer:
    """``with atomic_text_writer(path) as fh:`` - the file appears only on success."""

    def __init__(self, path: str | Path):
        self.path = Path(path)
        folder = self.path.parent if str(self.path.parent) else Path(".")
        if not folder.is_dir():
            raise ScenarioError(str(path), "", f"folder {str(folder)!r} does not exist")
        self._folder = folder

    def __enter__(self):
        fd, self._tmp = tempfile.mkstemp(dir=self._folder, prefix=".dosing-", suffix=".tmp")
        self._fh = os.fdopen(fd, "w", encoding="utf-8", newline="")
        return self._fh

    def __exit__(self, exc_type, exc, tb):
        self._fh.close()
        if exc_type is None:
            os.replace(self._tmp, self.path)
        elif os.path.exists(self._tmp):
            os.unlink(self._tmp)
        return False
