"""Control design for a continuous stream: gain, pump range, accuracy, stages.

A continuous neutraliser is a feedback loop around a titration curve. From a
plan (and its sampled uncertainty) this module works out what the loop must
handle:

* the process gain at the aim: pH change per 1 % change of reagent flow
  (the slope of the titration curve times the dose);
* the reagent rate range the pump must cover: from the lowest flow with the
  5th-percentile dose to the highest flow with the 95th (and the turndown,
  their ratio); ``dosing replay`` gives the same from logged data;
* the metering accuracy the window demands: the nearer window edge's
  distance from the aim over the gain;
* how many stages, and the reagent split between them, when one stage cannot
  deliver that accuracy; residence time and mixing per stage.

Rules, each with its source (all recalled, not read here):

* a metering pump or control valve delivers its rate to about 2 % once
  calibrated (common practice; McMillan 1984, *pH Control*, ISA, discusses
  0.5-2 % reagent valve resolution);
* a stage whose required accuracy is finer than that gets a trim stage after
  it: the first stage takes the bulk, the last stage only a fraction small
  enough that its own 2 % error stays inside the window (Shinskey 1973,
  *pH and pIon Control in Process and Waste Streams*, Wiley: staging with
  the reagent divided so each stage's valve works within its precision);
  more than three stages is not built in practice (common practice);
* residence time per stage: 5-15 min for strong acid or caustic, 15-30 min
  for lime or magnesia slurry, which must dissolve (common practice); the
  agitator turns the tank over in at most a twentieth of the residence time
  so mixing dead time stays small against it (Shinskey 1973, from memory).

Pure: numbers in, numbers out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .findings import Finding, Q

__all__ = ["Stage", "ControlDesign", "control_design", "PUMP_ACCURACY", "MAX_STAGES"]

#: Rate accuracy of a calibrated metering pump or control valve [-] (common practice).
PUMP_ACCURACY = 0.02
#: Most stages built in practice (common practice).
MAX_STAGES = 3
#: Residence time per stage [min] for a fast reagent and for a slurry (common practice).
_RESIDENCE_MIN = {"fast": 10.0, "slurry": 20.0}
#: Tank turnover by the agitator, as a fraction of the residence time (Shinskey 1973).
_TURNOVER_FRACTION = 1.0 / 20.0


@dataclass(frozen=True)
class Stage:
    """One stage of a continuous neutraliser."""

    share: float              #: fraction of the reagent it doses [-]
    residence_min: float      #: residence time of its tank [min]
    volume_m3: float          #: tank volume for that residence at the design flow [m3]
    turnover_min: float       #: most time the agitator may take to turn the tank over [min]


@dataclass(frozen=True)
class ControlDesign:
    """What the loop must handle, and the stages it takes."""

    gain_ph_per_percent: float          #: pH change per 1 % change of reagent rate
    accuracy_needed: float              #: rate accuracy that keeps the window [-]
    rate_low_mol_h: float               #: lowest reagent rate needed [mol/h]
    rate_high_mol_h: float              #: highest [mol/h]
    flow_range_m3_h: tuple[float, float]
    flow_range_given: bool              #: False: the stated flow only
    stages: tuple[Stage, ...]
    note: Finding                       #: plain words on the staging

    @property
    def turndown(self) -> float:
        """Highest over lowest reagent rate [-]."""
        return self.rate_high_mol_h / self.rate_low_mol_h if self.rate_low_mol_h > 0 \
            else math.inf


def control_design(plan, flow_range_m3_h: tuple[float, float] | None = None
                   ) -> ControlDesign | None:
    """The control design of a flow plan with a dose; None otherwise."""
    from .plan import Flow
    if not isinstance(plan.basis, Flow) or not plan.dose_needed or plan.dose_mol_l <= 0:
        return None
    t = plan.target
    gain = abs(plan.slope_ph_per_mmol_l) * plan.dose_mol_l * 1000.0 * 0.01
    room = min(t.ph_aim - t.ph_min, t.ph_max - t.ph_aim)
    accuracy = room / gain * 0.01 if gain > 0 else math.inf
    q = plan.basis.m3_per_h
    lo_q, hi_q = flow_range_m3_h or (q, q)
    unc = plan.uncertainty
    d_lo = unc.p05_mol_l if unc is not None else plan.dose_mol_l
    d_hi = unc.p95_mol_l if unc is not None else plan.dose_mol_l
    slurry = plan.reagent.compound.formula in ("Ca(OH)2", "CaO", "Mg(OH)2", "CaCO3")
    stages, note = _stages(accuracy, q, "slurry" if slurry else "fast")
    return ControlDesign(gain, accuracy, d_lo * lo_q * 1000.0, d_hi * hi_q * 1000.0,
                         (lo_q, hi_q), flow_range_m3_h is not None, stages, note)


def _stages(accuracy: float, flow_m3_h: float, kind: str) -> tuple[tuple[Stage, ...], Finding]:
    """Stages and their reagent split for the accuracy needed."""
    if accuracy >= PUMP_ACCURACY:
        shares = [1.0]
        words = ("one stage: the window allows a {accuracy:.1%} error in the reagent rate, "
                 "within what a calibrated pump delivers ({pump})")
    else:
        # The last stage doses a fraction f whose own error f * 2 % must stay
        # inside the window (with a factor of two in hand); each stage before
        # it takes the bulk.
        f = accuracy / PUMP_ACCURACY / 2.0
        n = 2 if f >= 0.05 else 3
        f = max(f, 0.05 if n == 2 else 0.01)
        shares = [1.0 - f, f] if n == 2 else [1.0 - f - 0.1, 0.1, f]
        words = (f"{n} stages: the window allows only a {{accuracy:.2%}} error in the reagent "
                 "rate, finer than a calibrated pump's {pump}; the last stage doses "
                 "{last} of the reagent so its own error stays inside the window")
        if accuracy / PUMP_ACCURACY < 0.01:
            words += ("; even three stages hardly hold it: widen the window with the "
                      "engineer or use a weaker reagent for the last stage")
    res = _RESIDENCE_MIN[kind]
    stages = tuple(Stage(s, res, flow_m3_h * res / 60.0, res * _TURNOVER_FRACTION)
                   for s in shares)
    return stages, Finding("stages", "info", words,
                           {"accuracy": Q(accuracy, "%"), "pump": Q(PUMP_ACCURACY, "%"),
                            "last": Q(shares[-1], "%")})
