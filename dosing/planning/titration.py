"""Bench titration to full-scale dose, two ways side by side.

:func:`compare` puts the direct scaling of the curve
(:func:`dosing.planning.bench.direct_scaling`, model-free) beside the plan of
the water fitted to it: the simple fit (:mod:`dosing.planning.water_fit`)
while it explains the curve to about three times a meter's noise, otherwise
the buffer spectrum (:mod:`dosing.planning.buffer_fit`). A gap between the
two doses, an aim outside the titrated range and a sample that is not the
scenario's water are said as findings.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from ..errors import InputError
from .basis import Amounts, Target, amounts_for
from .bench import BenchCurve, DirectScaling, direct_scaling
from .effluent import Water
from .findings import Finding, Q, note
from .job import Scenario
from .plan import Plan, plan_dose
from .reagents import GENERAL_CAUTION
from .water_fit import FIT_TRUST_PH, WaterFit, fit_water

__all__ = ["compare", "Comparison", "GAP_WARN", "FIT_MODES", "SIMPLE_FIT_ENOUGH",
           "SAMPLE_PH_WARN"]


#: Direct and model doses further apart than this are worth a warning [-]
#: (common practice).
GAP_WARN = 0.15


def _extrapolation_words(curve: BenchCurve, target: Target, spec) -> list[Finding]:
    """A warning when the aim lies outside the titrated pH range."""
    lo, hi = float(np.min(curve.ph)), float(np.max(curve.ph))
    aim = target.ph_aim
    if lo <= aim <= hi:
        return []
    away = lo - aim if aim < lo else aim - hi
    what = ("the plan extrapolates the fitted buffer sites" if spec is not None
            else "the plan extrapolates the fitted water")
    return [note("extrapolated", "the aim pH {aim:g} lies {away:.1f} pH outside the titrated "
                 "range ({lo:.1f} to {hi:.1f}): {what}; titrate past the aim to check it",
                 "warning", {"what": what}, aim=Q(aim, "pH"), away=Q(away, "pH"),
                 lo=Q(lo, "pH"), hi=Q(hi, "pH"))]


#: The simple fit is kept while it explains the curve this well [pH RMS]
#: (three times a good bench meter's noise, 0.01, common practice).
SIMPLE_FIT_ENOUGH = 0.03


FIT_MODES = ("auto", "simple", "spectrum")

#: Past this pH misfit [RMS] the fitted water does not explain the curve
#: (thirty times a good meter's noise, common practice) and no model dose
#: is given.
MISFIT_NO_DOSE = 0.3


def _choose_fit(curve: BenchCurve, base: Water, unknown_acid: str, mode: str):
    """The simple fit, the buffer spectrum, and which one the plan uses."""
    from .buffer_fit import fit_spectrum
    if mode not in FIT_MODES:
        raise InputError("fit", f"{mode!r}; allowed: " + ", ".join(FIT_MODES))
    simple = fit_water(curve, base, unknown_acid=unknown_acid)
    if mode == "simple":
        return simple, None, "simple"
    spec = fit_spectrum(curve, base)
    use = "spectrum" if mode == "spectrum" or (
        simple.rms_ph > SIMPLE_FIT_ENOUGH and spec.rms_ph < 0.5 * simple.rms_ph) else "simple"
    return simple, spec, use


@dataclass(frozen=True)
class Comparison:
    """Both methods for one bench titration, typed (the report layer renders it)."""

    direct: DirectScaling
    fit: WaterFit
    spectrum: Any                   #: the buffer spectrum, or None (simple fit only)
    used: str                       #: "simple" or "spectrum": the water the plan rests on
    plan: Plan | None               #: the plan from the fitted water; None when the fit
                                    #: cannot explain the curve (no model dose then)
    scenario: Scenario              #: the scenario with the fitted water
    gap: float | None               #: (model - direct) / direct dose
    warnings: tuple[Finding, ...]
    curve: BenchCurve               #: the bench curve as checked
    direct_amounts: Amounts | None  #: the direct dose in product, per batch or hour
    water: Water | None = None      #: the fitted water the model rests on

    @property
    def rms_ph(self) -> float:
        """pH misfit of the fit the model rests on [pH RMS]."""
        return self.spectrum.rms_ph if self.used == "spectrum" else self.fit.rms_ph

    @property
    def trusted(self) -> str:
        """The method to lead with: "model" while the fit the plan rests on
        explains the curve, "direct" when it misses it (see :data:`FIT_TRUST_PH`)."""
        return "model" if self.plan is not None and self.rms_ph <= FIT_TRUST_PH else "direct"

    @property
    def cautions(self) -> tuple[str, ...]:
        """The reagent's safety words and the final word (with or without a model plan)."""
        return tuple(self.scenario.reagent.cautions) + (GENERAL_CAUTION,)


def compare(curve: BenchCurve, scenario: Scenario, *, unknown_acid: str = "auto",
            fit_mode: str = "auto") -> Comparison:
    """Both methods for a scenario's reagent, window and tank.

    The model water is the simple fit (carbonate, strong-ion balance, at most
    one unlisted acid) while it explains the curve to about three times a
    meter's noise; otherwise the buffer spectrum (:mod:`dosing.planning.buffer_fit`).
    ``fit_mode`` forces either.
    """
    target, reagent, basis = scenario.target, scenario.reagent, scenario.basis
    direct = direct_scaling(curve, reagent, target)
    fit, spec, used = _choose_fit(curve, scenario.water, unknown_acid, fit_mode)
    water = spec.water if used == "spectrum" else fit.water
    rms = spec.rms_ph if used == "spectrum" else fit.rms_ph
    plan = (plan_dose(water, reagent, target, basis, permit=scenario.permit)
            if rms <= MISFIT_NO_DOSE else None)
    eff = {"ph": round(water.ph, 3), "temperature_c": water.temperature_c}
    fitted = replace(scenario, water=water, measurements=None,
                     data=dict(scenario.data, effluent=eff))
    warnings = list(curve.notes) + list(direct.notes) + (
        list(fit.warnings) if used == "simple" else [])
    warnings += _extrapolation_words(curve, target, spec if used == "spectrum" else None)
    warnings += _sample_words(curve, scenario.water.ph)
    if plan is None:
        warnings.append(note("fit-cannot-explain", "no model dose: the fitted water misses "
                             "the curve by {rms:.2f} pH (RMS), many times a meter's noise, so "
                             "no water the model knows gives this curve. Check the readings, "
                             "the titrant and the sample volume; titrate again before using "
                             "the direct scaling", "warning", rms=Q(rms, "pH")))
    gap = None
    if plan is not None and direct.dose_mol_l and plan.dose_mol_l:
        gap = (plan.dose_mol_l - direct.dose_mol_l) / direct.dose_mol_l
        if abs(gap) > GAP_WARN:
            warnings.append(note("methods-differ", "the model dose and the direct scaling differ "
                                 "by {gap:+.0%}: check the titrant strength, the sample volume "
                                 "and the water model before dosing; dose in stages",
                                 gap=Q(gap, "%")))
    a = amounts_for(direct.dose_mol_l, reagent, basis) if direct.dose_mol_l is not None \
        else None
    return Comparison(direct, fit, spec, used, plan, fitted, gap, tuple(warnings), curve, a,
                      water)


#: The sample's own pH (no titrant yet) and the scenario's pH differ by more
#: than two meters usually do (common practice: about 0.1-0.2 pH).
SAMPLE_PH_WARN = 0.3


def _sample_words(curve: BenchCurve, scenario_ph: float) -> list[Finding]:
    """A warning when the titrated sample, before any titrant, is not at the
    scenario's pH: another sample, or a meter to recalibrate."""
    if curve.added_ml.size == 0 or curve.added_ml[0] != 0.0:
        return []
    first = float(curve.ph[0])
    if abs(first - scenario_ph) <= SAMPLE_PH_WARN:
        return []
    return [note("sample-ph", "the titrated sample starts at pH {first:.2f} but the "
                 "scenario's water is at pH {scenario_ph:.2f}: another sample, or a meter to "
                 "recalibrate? Check before dosing from this titration", "warning",
                 first=Q(first, "pH"), scenario_ph=Q(scenario_ph, "pH"))]
