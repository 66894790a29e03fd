"""The engine's version, recorded with every plan and shift-log entry (a leaf: imports nothing)."""

__all__ = ["__version__"]

__version__ = "0.1.0"
