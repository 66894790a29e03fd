"""Findings: what the planner has to say, with its numbers kept apart from its words.

A :class:`Finding` is one check, warning or note: a stable id, a level, the
quantities it rests on (each a :class:`Q`, a number with its unit), the
names it mentions (a reagent, a metal), and a template of words with a
placeholder for each. The planning layer decides what to say and with which
numbers; :mod:`dosing.report.words` words it for a unit system (°C with °F
beside it on a US sheet, say), and a page can style each number. No number
is formatted here.

A placeholder is ``{name}`` (the quantity shown as the report shows that
unit) or ``{name:spec}`` with a Python format spec for the number (``.2f``
for a pH read to two decimals, ``,.0f`` for litres of gas); the unit is
added by the report, so a template never writes it after a quantity, except
"pH", which is written before the number. ``{name:num}`` (or ``{name:.2fnum}``)
asks for the number alone, where the words already name the unit.

Examples
--------
>>> f = Finding("heat", "info", "the water ends near {t_after_c:.0f}",
...             {"t_after_c": Q(46.2, "°C")})
>>> f.values
{'t_after_c': 46.2}
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Literal, Mapping

__all__ = ["Level", "LEVELS", "Q", "Finding", "note", "breaches", "error_text"]

#: How serious a finding is, most serious first.
Level = Literal["danger", "warning", "info"]
LEVELS: tuple[str, ...] = ("danger", "warning", "info")


@dataclass(frozen=True)
class Q:
    """A quantity: a number, its unit, and how finely it is worth showing.

    Attributes
    ----------
    value : float or None
        The number, in the unit named (None: no figure).
    unit : str
        "pH", "%" (a fraction shown as a percentage), "°C", "K" (a
        temperature difference), "L gas", "mg/L", "mmol/L", "kg", "h" ... or
        "" for a plain number.
    digits : int
        Significant digits when the template gives no format [-].
    zero_below : float or None
        Magnitudes below this read as 0 (a resolution of the model).
    floor : float or None
        Values below this read as "below" it (a detection limit).
    """

    value: float | None
    unit: str = ""
    digits: int = 3
    zero_below: float | None = None
    floor: float | None = None


@dataclass(frozen=True)
class Finding:
    """One thing the planner says about a plan, a water or a result.

    Attributes
    ----------
    id : str
        Stable id (``heat``, ``permit-zinc_mg_l``, ``narrow-window``).
    level : {"danger", "warning", "info"}
        How serious it is.
    template : str
        The words, with ``{name}`` or ``{name:spec}`` for each quantity and
        name (see the module notes).
    quantities : Mapping[str, Q]
        The numbers, keyed with their unit in the name where it helps
        (``temperature_after_c``).
    names : Mapping[str, str]
        Words put into the template (a reagent's name, a list of metals).
    """

    id: str
    level: Level
    template: str
    quantities: Mapping[str, Q] = field(default_factory=dict)
    names: Mapping[str, str] = field(default_factory=dict)

    @property
    def values(self) -> dict[str, float | None]:
        """The numbers alone, by name (what JSON carries beside the words)."""
        return {k: q.value for k, q in self.quantities.items()}

    def wrapped(self, before: str = "", after: str = "", *, id: str | None = None,
                level: Level | None = None, **quantities: Q) -> "Finding":
        """The same finding inside more words (with their own quantities)."""
        return replace(self, id=id or self.id, level=level or self.level,
                       template=before + self.template + after,
                       quantities={**self.quantities, **quantities})


def note(id: str, template: str, level: Level = "warning", /, names: Mapping[str, str] | None = None,
         **quantities: Q) -> Finding:
    """A finding written in one call: ``note("narrow-window", "...", "warning", aim=Q(...))``."""
    return Finding(id, level, template, quantities, dict(names or {}))


def breaches(findings) -> tuple[Finding, ...]:
    """The permit checks among ``findings`` that are broken (level danger)."""
    return tuple(f for f in findings if f.id.startswith("permit-") and f.level == "danger")


def error_text(finding: Finding) -> str:
    """The finding as the one line of an error message.

    An error is text the shells print as it is, so its numbers are written
    here, plainly: each with its template's format (``g`` when none) and
    its unit (none for pH and fractions). Results never pass through
    here; the report layer words them (:mod:`dosing.report.words`).
    """
    class _Plain:
        def __init__(self, q: Q):
            self.q = q

        def __format__(self, spec: str) -> str:
            bare = spec.endswith("num")
            spec = spec.removesuffix("num") or (".0%" if self.q.unit == "%" else "g")
            text = "n/a" if self.q.value is None else format(self.q.value, spec)
            unit = "L" if self.q.unit == "L gas" else self.q.unit
            return text if bare or unit in ("pH", "%", "") else f"{text} {unit}"
    return finding.template.format(**{k: _Plain(q) for k, q in finding.quantities.items()},
                                   **finding.names)
