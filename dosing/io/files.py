"""Writing files safely: the one place the front ends write results.

The engine itself never touches files; the command line and
Tankside (the terminal view) call :func:`write_atomic` or :class:`atomic_text_writer`, which
write through a temporary file and a rename, so a failed run never leaves
half a file behind. Three promises:

* a failure (a read-only folder, a full disk, a file-size limit) is one
  :class:`ScenarioError` naming the file, and the target is left as it was;
* the result gets the mode the user expects: an existing file keeps its
  mode, a new one gets ``0666`` less the umask (as ``open`` would give), so
  exported logs and plots can be shared on a plant PC;
* temporary files carry the writing process's id (``.dosing-PID-*.tmp``);
  those of a process that no longer runs (a killed replay) are removed the
  next time a file is written into the same folder.
"""

from __future__ import annotations

import os
import re
import tempfile
from pathlib import Path

from ..errors import ScenarioError

__all__ = ["write_atomic", "atomic_text_writer"]

_TMP = re.compile(r"^\.dosing-(\d+)-.*\.tmp$")


def write_atomic(path: str | Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file and a rename.

    Raises
    ------
    ScenarioError
        If the folder does not exist or the file cannot be written.
    """
    with _AtomicFile(path, binary=True) as fh:
        fh.write(data)


class atomic_text_writer:
    """``with atomic_text_writer(path) as fh:`` - the file appears only on success."""

    def __init__(self, path: str | Path):
        self._inner = _AtomicFile(path, binary=False)

    def __enter__(self):
        return self._inner.__enter__()

    def __exit__(self, exc_type, exc, tb):
        return self._inner.__exit__(exc_type, exc, tb)


class _AtomicFile:
    """A temporary file beside ``path`` that replaces it on a clean exit."""

    def __init__(self, path: str | Path, *, binary: bool):
        self.path = Path(path)
        self.folder = self.path.parent if str(self.path.parent) else Path(".")
        if not self.folder.is_dir():
            raise ScenarioError(str(path), "", f"folder {str(self.folder)!r} does not exist")
        self.binary = binary
        self._tmp: str | None = None

    def __enter__(self):
        _remove_stale_temporaries(self.folder)
        try:
            fd, self._tmp = tempfile.mkstemp(dir=self.folder, prefix=f".dosing-{os.getpid()}-",
                                             suffix=".tmp")
        except OSError as err:
            raise self._error(err) from None
        self._fh = (os.fdopen(fd, "wb") if self.binary
                    else os.fdopen(fd, "w", encoding="utf-8", newline=""))
        return self._fh

    def __exit__(self, exc_type, exc, tb):
        try:
            self._fh.close()
            if exc_type is None:
                os.chmod(self._tmp, _mode_for(self.path))
                os.replace(self._tmp, self.path)
                self._tmp = None
        except OSError as err:
            if exc_type is None:
                exc_type, exc = OSError, err
        finally:
            if self._tmp and os.path.exists(self._tmp):
                os.unlink(self._tmp)
        if exc_type is not None and issubclass(exc_type, OSError):
            raise self._error(exc) from None
        return False

    def _error(self, err: OSError) -> ScenarioError:
        why = err.strerror or str(err)
        return ScenarioError(str(self.path), "", f"cannot be written ({why}); nothing was "
                             "changed")


def _mode_for(path: Path) -> int:
    """An existing file's mode, or what a new file gets under the umask."""
    try:
        return path.stat().st_mode & 0o7777
    except OSError:
        mask = os.umask(0o022)
        os.umask(mask)
        return 0o666 & ~mask


def _remove_stale_temporaries(folder: Path) -> None:
    """Remove our temporary files whose writing process no longer runs."""
    try:
        names = [e.name for e in os.scandir(folder) if e.name.startswith(".dosing-")]
    except OSError:
        return
    for name in names:
        m = _TMP.match(name)
        if m and not _running(int(m.group(1))):
            try:
                os.unlink(folder / name)
            except OSError:
                pass


def _running(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError, OSError):
        return True          # someone else's process, or cannot tell: leave its file
    return True
