"""The printable one-page sheet of a plan: what goes on the paper at the tank.

:func:`print_sheet` reads the same views as every other rendering (a
:class:`~dosing.report.view.PlanView` or a
:class:`~dosing.report.train_view.TrainView`) and keeps what an operator
needs on one A4 or Letter page: the site, tank and time, the measurements,
the dose in kilograms and litres, the steps with empty boxes for what was
given and the pH read, the warnings, the cautions with the final-word line,
and signature lines. The web page's print view and the PDF
(:mod:`dosing.report.print_pdf`) both draw this one object.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..planning.basis import Batch
from ..planning.job import Scenario
from ..planning.plan import Plan
from ..planning.reagents import GENERAL_CAUTION
from ..planning.train_plan import TrainPlan
from .numbers import fmt
from .sheet import amount_text, dose_lines, headline, trim_rows
from .train_sheet import step_headline
from .train_view import TrainView, train_view
from .units import UNIT_SYSTEMS
from .view import PlanView, plan_view
from .words import texts

__all__ = ["PrintSheet", "Step", "print_sheet", "measured_rows"]

#: Dose rows kept on the paper (the rest is the engineer's, on the full sheet).
_KEPT = ("product", "active compound", "in the water", "metering pump", "window band", "pH")

#: Signature lines at the foot of every printed sheet.
SIGNATURES = ("Dosed by", "Date and time", "Checked by")


@dataclass(frozen=True)
class Step:
    """One line of the record table: what to do, and boxes to fill in."""

    text: str                       #: what to do, with the amount in kg and litres
    boxes: tuple[str, ...]          #: headings of the boxes to fill in by hand


@dataclass(frozen=True)
class PrintSheet:
    """Everything on the printed page, as text (units already chosen)."""

    title: str
    where: str                                  #: site / tank
    made: str                                   #: when the plan was made (local time)
    headline: str
    breaches: tuple[str, ...]
    measured: tuple[tuple[str, str], ...]
    dose: tuple[tuple[str, str], ...]
    steps: tuple[Step, ...]
    trim: tuple[tuple[str, str], ...]           #: (pH read, add) of a staged dose
    warnings: tuple[str, ...]
    cautions: tuple[str, ...]                   #: ends with the final-word line
    signatures: tuple[str, ...] = SIGNATURES


def measured_rows(scenario: Scenario, units: str = "metric") -> list[tuple[str, str]]:
    """The measurements the plan was made from, as (label, value) rows."""
    u = UNIT_SYSTEMS[units]
    data = scenario.data
    eff = data.get("effluent", {})
    rows: list[tuple[str, str]] = []
    if isinstance(scenario.basis, Batch):
        rows.append(("tank volume", f"{fmt(scenario.basis.volume_m3 * u.water_volume_per_m3)} "
                     f"{u.water_volume}"))
    elif scenario.basis is not None:
        rows.append(("flow", f"{fmt(scenario.basis.m3_per_h * u.flow_per_m3_h)} {u.flow}"))
    if "ph" in eff:
        rows.append(("pH", f"{eff['ph']:g}"))
    if "temperature_c" in eff:
        t = eff["temperature_c"]
        rows.append(("temperature", f"{t:g} °C" if units != "us" else f"{t * 1.8 + 32:.3g} °F"))
    for key, label in (("alkalinity_mg_l_as_caco3", "alkalinity"),
                       ("acidity_mg_l_as_caco3", "acidity")):
        if key in eff:
            rows.append((label, f"{eff[key]:g} mg/L as CaCO3"))
    for key, label, unit in (("metals_mg_l", "metals", "mg/L"),
                             ("solutes_mg_l", "solutes", "mg/L"),
                             ("solutes_mmol_l", "solutes", "mmol/L")):
        if eff.get(key):
            rows.append((label, ", ".join(f"{k} {v:g}" for k, v in eff[key].items())
                         + f" {unit}"))
    return rows


def _with_final_word(cautions) -> tuple[str, ...]:
    """The cautions, the final-word line last (added if a list lacks it)."""
    rest = [c for c in cautions if c != GENERAL_CAUTION]
    return tuple(rest) + (GENERAL_CAUTION,)


def _plan_steps(v: PlanView, units: str) -> tuple[tuple[Step, ...], tuple[tuple[str, str], ...]]:
    """The record table of a one-dose plan, and its trim table when staged."""
    plan = v.plan
    read = ("pH read", "time")
    if not plan.dose_needed:
        return (Step("No dose: read the pH again before discharge", read),), ()
    if v.flow:
        return (Step(f"Set the pump to {amount_text(v, v.dose, units)}", ("set at", "time")),
                Step("Read the discharge pH once the tank has turned over", read)), ()
    if plan.staging is None:
        return (Step(f"Dose {amount_text(v, v.dose, units)}; mix well", ("given", "time")),
                Step("Read the pH after mixing", read)), ()
    st = plan.staging
    trim = tuple((ph.strip(), add) for ph, add in trim_rows(v, units))
    return (Step(f"1. First dose {amount_text(v, v.first, units)}; mix well",
                 ("given", "time")),
            Step(f"Read the pH (expected {st.ph_first_range[0]:.1f} to "
                 f"{st.ph_first_range[1]:.1f})", read),
            Step("2. Add what the table gives for that pH; mix well", ("given", "time")),
            Step("Read the pH after mixing", read)), trim


def _plan_sheet(v: PlanView, units: str, made: str) -> PrintSheet:
    scenario = v.scenario
    steps, trim = _plan_steps(v, units)
    dose = tuple((label, value) for label, value in dose_lines(v, units)
                 if label.startswith(_KEPT))
    return PrintSheet(
        title=scenario.title, where=_where(scenario), made=made,
        headline=headline(v, units), breaches=tuple(texts(v.breaches, units)),
        measured=tuple(measured_rows(scenario, units)), dose=dose, steps=steps, trim=trim,
        warnings=tuple(texts(v.warnings, units)), cautions=_with_final_word(v.plan.cautions))


def _train_sheet(v: TrainView, units: str, made: str) -> PrintSheet:
    steps = []
    for s in v.steps:
        kind = s.result.spec.kind
        boxes = ("given", "pH read") if kind in ("dose", "oxidise") else ("done", "time")
        steps.append(Step(step_headline(v, s, units), boxes))
    steps.append(Step("Discharge: read the pH before it leaves", ("pH read", "time")))
    return PrintSheet(
        title=v.scenario.title, where=_where(v.scenario), made=made,
        headline=f"TREATMENT TRAIN of {len(v.steps)} steps: discharge at pH "
                 f"{v.train.steps[-1].ph_out:.2f}",
        breaches=(), measured=tuple(measured_rows(v.scenario, units)), dose=(),
        steps=tuple(steps), trim=(), warnings=tuple(texts(v.warnings, units)),
        cautions=_with_final_word(v.train.cautions))


def _where(scenario: Scenario) -> str:
    return " / ".join(x for x in (scenario.site, scenario.tank) if x)


def print_sheet(scenario: Scenario, plan: Plan | None, train: TrainPlan | None = None,
                units: str = "metric", made: str = "") -> PrintSheet:
    """The printed page of a one-dose plan, or of a train when ``train`` is given."""
    if train is not None:
        return _train_sheet(train_view(scenario, train), units, made)
    return _plan_sheet(plan_view(scenario, plan), units, made)
