"""Findings in words, for a unit system: the one place a finding's numbers become text.

:func:`words` fills a :class:`~dosing.planning.findings.Finding`'s template
with its quantities, each shown as its unit is shown: a pH as a bare number
(the template writes "pH" before it), a fraction as a percentage, a
temperature in °C with °F beside it on a US sheet, a temperature change in
K with its °F, litres of gas with their cubic feet, and any other unit after
its number. Without a format in the template a quantity gets its own
significant digits (:func:`dosing.report.numbers.fmt`).

Examples
--------
>>> from dosing.planning.findings import Finding, Q
>>> f = Finding("heat", "info", "the water ends near {t:.0f}; a rise of about {k}",
...             {"t": Q(46.2, "°C"), "k": Q(0.85, "K", digits=2)})
>>> words(f)
'the water ends near 46 °C; a rise of about 0.85 K'
>>> words(f, "us")
'the water ends near 46 °C (115 °F); a rise of about 0.85 K (1.5 °F)'
>>> words(Finding("co2", "info", "up to {l:,.0f} of CO2 gas", {"l": Q(1200, "L gas")}), "us")
'up to 1,200 L (42.4 ft³) of CO2 gas'
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable

from ..planning.findings import LEVELS, Finding, Q
from .numbers import fmt

__all__ = ["words", "texts", "shown", "sorted_findings", "bias_words", "L_PER_FT3"]

#: Litres in a cubic foot, exact by definition (NIST SP 811).
L_PER_FT3 = 28.316846592
#: Units shown without a unit after the number.
_BARE = ("pH", "%", "")
#: The format a unit gets when the template gives none.
_DEFAULT_SPEC = {"pH": ".2f", "%": ".0%"}


@dataclass(frozen=True)
class _Shown:
    """A quantity as a unit system shows it, for ``str.format``."""

    q: Q
    units: str

    def __format__(self, spec: str) -> str:
        q = self.q
        bare = spec.endswith("num")          # the number alone: the words name the unit
        spec = spec.removesuffix("num") or _DEFAULT_SPEC.get(q.unit, "")
        if q.value is None:
            return "n/a"
        number = (format(q.value, spec) if spec
                  else fmt(q.value, q.digits, floor=q.floor, zero_below=q.zero_below))
        if q.unit in _BARE or bare:
            return number
        text = f"{number} {'L' if q.unit == 'L gas' else q.unit}"
        return text + (_us_beside(q) if self.units == "us" else "")


def _us_beside(q: Q) -> str:
    """What a US sheet adds beside a metric quantity: its °F or cubic feet."""
    if q.unit == "°C":
        return f" ({q.value * 1.8 + 32:.0f} °F)"
    if q.unit == "K":
        return f" ({fmt(q.value * 1.8, 2)} °F)"
    if q.unit == "L gas":
        return f" ({fmt(q.value / L_PER_FT3)} ft³)"
    return ""


def shown(q: Q, units: str = "metric", spec: str = "") -> str:
    """One quantity as text in a unit system."""
    return format(_Shown(q, units), spec)


def words(finding: Finding, units: str = "metric") -> str:
    """The finding's words, its numbers shown for ``units`` ("metric" or "us")."""
    fields = {k: _Shown(q, units) for k, q in finding.quantities.items()}
    return finding.template.format(**fields, **finding.names)


def texts(findings: Iterable[Finding], units: str = "metric") -> list[str]:
    """The words of each finding, in order."""
    return [words(f, units) for f in findings]


def sorted_findings(findings: Iterable[Finding]) -> list[Finding]:
    """Most serious first, the order kept within a level."""
    return sorted(findings, key=lambda f: LEVELS.index(f.level))


def bias_words(b) -> str:
    """A tank's shift-log bias (:class:`dosing.io.shiftlog.Bias`) in one sentence."""
    more = b.mean_ratio - 1.0
    way = "more" if more >= 0 else "less"
    return (f"on {b.tank} the last {b.entries} decisions that landed in the window "
            f"needed {abs(more):.0%} ± {b.sd_ratio:.0%} {way} product than planned"
            + ("; a bench titration is due" if b.due else ""))
