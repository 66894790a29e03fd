"""One family of errors for the whole planner.

Every error the engine raises is a :class:`DosingError`. Errors caused by
what a user typed or loaded also inherit :class:`ValueError`, so callers that
only know the standard library still catch them. The message of each error is
written for the person at the keyboard: it names the field, the value and what
is allowed. The command line turns any of them into exit code 2.
"""

from __future__ import annotations

__all__ = [
    "DosingError",
    "InputError",
    "UnreachableError",
    "ModelError",
    "ScenarioError",
    "ShiftLogError",
    "UsageError",
]


class DosingError(Exception):
    """Base class of every error raised by the planner."""


class InputError(DosingError, ValueError):
    """A value given to the engine is missing, out of range or inconsistent.

    Parameters
    ----------
    field : str
        The name of the offending input, as the user knows it (e.g. ``ph``).
    message : str
        What is wrong and what is allowed.
    """

    def __init__(self, field: str, message: str):
        self.field = field
        self.reason = message
        super().__init__(f"{field}: {message}")

    def __reduce__(self):
        # Rebuilt from its fields, so it crosses process boundaries (pickle).
        return (type(self), (self.field, self.reason))


class UnreachableError(DosingError, ValueError):
    """The requested pH cannot be reached with the chosen reagent."""


class ModelError(DosingError, ArithmeticError):
    """The model could not produce a trustworthy number (no convergence)."""


class ScenarioError(DosingError, ValueError):
    """A scenario or data file is unreadable or holds a bad value.

    Parameters
    ----------
    path : str
        The file, as given by the user.
    key : str
        The dotted key inside the file (``effluent.ph``), or ``""``.
    message : str
        What is wrong and what is allowed.
    """

    def __init__(self, path: str, key: str, message: str):
        self.path = path
        self.key = key
        self.reason = message
        where = f"{path}: {key}" if key else f"{path}"
        super().__init__(f"{where}: {message}")

    def __reduce__(self):
        return (type(self), (self.path, self.key, self.reason))


class ShiftLogError(DosingError, ValueError):
    """The log file is unusable, or a request names something not in it."""


class UsageError(DosingError, ValueError):
    """A command-line option has a value the command cannot use.

    Parameters
    ----------
    option : str
        The option as typed (``--chunk-rows``).
    message : str
        What is wrong and what is allowed.
    """

    def __init__(self, option: str, message: str):
        self.option = option
        self.reason = message
        super().__init__(f"{option}: {message}")

    def __reduce__(self):
        return (type(self), (self.option, self.reason))
