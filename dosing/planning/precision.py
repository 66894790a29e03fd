"""How far the dose moves within the precision of what was measured.

The water behind a plan is inferred from a pH and a laboratory alkalinity
or acidity. Near an end point that inference is ill-conditioned: a couple of
mg/L in the lab value can move the dose several-fold. This module re-infers
the water with each measurement at the edges of its usual precision and
solves the dose again, so the plan can say how much the number rests on
each reading, and recommend a bench titration when it rests too much.

Pure: it takes the :class:`~dosing.planning.measurements.Measurements`
keyword arguments and returns numbers.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .findings import Finding, Q
from .measurements import LAB_PRECISION, LOW_READING_MG_L, Measurements
from .variants import Perturbation, infer_many
from ..chem import dose_to_ph
from .plan import has_grip
from .reagents import Reagent

__all__ = ["PH_PRECISION", "SENSITIVE", "Sensitivity", "lab_field", "lab_sensitivity",
           "precision_warning"]

#: Precision of a pH reading with a meter calibrated that day [pH units]
#: (common practice; Standard Methods 4500-H+ B speaks of about 0.1 for
#: accuracy and better for repeat readings, from memory).
PH_PRECISION = 0.05
#: A dose that moves by more than this fraction within the precision of one
#: reading rests on that reading: say so and recommend a bench titration
#: (common practice).
SENSITIVE = 0.25


@dataclass(frozen=True)
class Sensitivity:
    """The dose with one reading at the low and high edge of its precision."""

    field: str                         #: the measurement (scenario key under [effluent])
    label: str                         #: its name on the page
    value: float                       #: as measured
    plus_minus: float                  #: the precision taken
    unit: str
    dose_low_reading_mol_l: float | None   #: None: that reading is not possible here
    dose_high_reading_mol_l: float | None

    def relative(self, dose_mol_l: float) -> tuple[float | None, float | None]:
        """Each dose as a change from the plan's dose [-]."""
        def rel(d):
            return None if d is None or dose_mol_l <= 0 else d / dose_mol_l - 1.0
        return rel(self.dose_low_reading_mol_l), rel(self.dose_high_reading_mol_l)

    def largest_change(self, dose_mol_l: float) -> float:
        """The larger of the two changes, as a fraction of the dose [-]."""
        return max((abs(r) for r in self.relative(dose_mol_l) if r is not None), default=0.0)


def lab_field(m: Measurements) -> tuple[str, str] | None:
    """The lab measurement given (scenario key, plain name), if any."""
    given = m.lab_value
    if given is None:
        return None
    return given[0], given[0].split("_")[0]


def lab_sensitivity(m: Measurements, reagent: Reagent, aim: float
                    ) -> tuple[Sensitivity, ...]:
    """The dose to ``aim`` with the lab value and the pH each at the edges of
    their precision (one at a time, the other held).

    The lab value's precision is :data:`LAB_PRECISION` of it, and at least
    :data:`LOW_READING_MG_L`; the pH's is :data:`PH_PRECISION`. All the
    variants are inferred and solved at once (:func:`infer_many`); a
    reading no real water can give has no dose (None).
    """
    ph = float(m.ph)
    lab = lab_field(m)
    v = float(m.lab_value[1]) if lab else 0.0
    pm = max(LAB_PRECISION * v, LOW_READING_MG_L)
    phs = [ph, ph, max(ph - PH_PRECISION, 0.0), min(ph + PH_PRECISION, 14.0)]
    labs = [max(v - pm, 0.0), v + pm, v, v]
    n = len(phs)
    ones = np.ones(n)
    mix, ok = infer_many(m, Perturbation(
        np.array(phs), np.full(n, float(m.temperature_c)),
        np.array(labs), ones, ones))
    d, grip = dose_to_ph(mix, reagent.vector(), np.full(n, aim))
    good = ok & has_grip(reagent, d, grip)
    dose = [max(float(x), 0.0) if g else None for x, g in zip(d, good)]
    out = []
    if lab is not None:
        out.append(Sensitivity(lab[0], lab[1], v, pm, "mg/L as CaCO3", dose[0], dose[1]))
    out.append(Sensitivity("ph", "pH", ph, PH_PRECISION, "", dose[2], dose[3]))
    return tuple(out)


def precision_warning(sens: tuple[Sensitivity, ...], dose_mol_l: float) -> Finding | None:
    """A warning naming each reading the dose rests on, or None."""
    if dose_mol_l <= 0:
        return None
    heavy = [x for x in sens if x.largest_change(dose_mol_l) > SENSITIVE]
    if not heavy:
        return None
    parts, q = [], {"planned": Q(dose_mol_l * 1000, "mmol/L", digits=3)}
    for i, x in enumerate(heavy):
        doses = [d * 1000 for d in (x.dose_low_reading_mol_l, x.dose_high_reading_mol_l)
                 if d is not None]
        q[f"pm{i}"] = Q(x.plus_minus, x.unit.split()[0] if x.unit else "")
        q[f"lo{i}"], q[f"hi{i}"] = Q(min(doses), "mmol/L"), Q(max(doses), "mmol/L")
        span = (f"{{lo{i}:.3gnum}} to {{hi{i}:.3g}}" if len(doses) > 1 else f"{{lo{i}:.3g}}")
        unit = " as CaCO3" if "CaCO3" in x.unit else ""
        parts.append(f"{x.label} ±{{pm{i}:.2g}}{unit} gives {span}")
    names = " and ".join(x.label for x in heavy)
    return Finding("dose-rests-on", "warning", "the dose rests on the {names} reading"
                   + ("s" if len(heavy) > 1 else "") + ": within the usual precision, "
                   + "; ".join(parts) + ", against {planned:.3g} planned. A bench titration of "
                   "this water (dosing titration) gives the dose directly; dose in stages "
                   "meanwhile", q, {"names": names})
