"""What a plan says beside its numbers: its warnings and its metal-cap checks, as findings.

:func:`plan_warnings` is the one place a plan's warnings are decided: a
permit breach first (in every record of the plan), then what the inference
of the water noted, a narrow window, an ionic strength past the activity
model's range, the reagent left undissolved, the metal caps against the
window, CO2 exchange with air for an open tank, and calcite. Each is a
:class:`~dosing.planning.findings.Finding`; the report layer words it.
"""

from __future__ import annotations

from typing import Mapping

from ..chem.activity import DAVIES_I_LIMIT
from ..chem.metals import label
from .basis import Target
from .effluent import STILL_WATER_KL_M_H
from .findings import Finding, Q, breaches, note

__all__ = ["permit_breaches", "plan_warnings", "metal_checks", "METERING_ERROR", "NARROW_BAND"]

#: Relative metering error used for the sensitivity check (common practice:
#: a well-kept metering pump holds its rate within a few per cent).
METERING_ERROR = 0.05
#: The whole window spanning less than this fraction of the dose is called
#: narrow (common practice).
NARROW_BAND = 0.10


def permit_breaches(plan) -> tuple[Finding, ...]:
    """The permit checks the plan fails (ions and metals)."""
    return breaches(plan.checks)


def plan_warnings(plan, notes: tuple[Finding, ...]) -> tuple[Finding, ...]:
    """The warnings that go with the numbers of a plan (one place for them)."""
    # A plan that breaks the permit says so first, in every record of it.
    warnings: list[Finding] = [b.wrapped("PERMIT BREACH: ", id=f"breach-{b.id}")
                               for b in permit_breaches(plan)]
    warnings += list(plan.water.notes) + list(notes)
    warnings += _window_words(plan)
    warnings += _ionic_words(plan)
    warnings += _undissolved_words(plan)
    warnings += _volume_words(plan)
    if plan.cap_window is not None:
        warnings.extend(_cap_words(plan.cap_window, plan.target))
    if plan.air is not None and plan.dose_needed:
        warnings.append(_air_words(plan))
    if plan.calcite is not None:
        warnings.append(_calcite_words(plan))
    return tuple(warnings)


#: Product volume per volume of water past which the dose's own volume is
#: worth saying [-] (common practice: a few per cent of a tank's freeboard).
PRODUCT_VOLUME_WARN = 0.05


def _volume_words(plan) -> list[Finding]:
    """A warning when the product's own volume is a material part of the water's."""
    share = plan.dose_mol_l * (plan.reagent.litres_product_per_mol or 0.0)
    if share <= PRODUCT_VOLUME_WARN:
        return []
    return [note("product-volume", "the product adds {share:.0%} to the volume of the "
                 "water (planned with that dilution): check the tank or line holds it, "
                 "or use a stronger product", "warning", share=Q(share, "%"))]


def _window_words(plan) -> list[Finding]:
    """A window narrower than the metering error, or than a tenth of the dose."""
    if not plan.dose_needed:
        return []
    target, (near, far) = plan.target, plan.band_mol_l
    lo, hi = sorted((plan.ph_low_dose, plan.ph_high_dose))
    q = {"error": Q(METERING_ERROR, "%"), "aim": Q(target.ph_aim, "pH"),
         "ph_low": Q(lo, "pH"), "ph_high": Q(hi, "pH"), "ph_min": Q(target.ph_min, "pH"),
         "ph_max": Q(target.ph_max, "pH")}
    phrase = ("a {error} dosing error moves the pH from {aim:.2f} to between {ph_low:.2f} "
              "and {ph_high:.2f}")
    if not (target.contains(lo) and target.contains(hi)):
        return [Finding("narrow-window", "warning", "narrow window: " + phrase
                        + ", outside the window {ph_min:g} to {ph_max:g}. Dose in stages "
                        "and measure before the last part", q)]
    if far is not None and (far - near) < NARROW_BAND * plan.dose_mol_l:
        q["share"] = Q((far - near) / plan.dose_mol_l, "%")
        return [Finding("narrow-band", "warning", "narrow window in dose terms: the whole "
                        "window spans {share} of the dose; " + phrase, q)]
    return []


def _ionic_words(plan) -> list[Finding]:
    """An ionic strength after dosing past what the activity model is trusted for."""
    model = plan.water.activity
    limit = model.limit_mol_l if not model.ideal else DAVIES_I_LIMIT
    if plan.ionic_strength_end <= limit:
        return []
    what = (f"the {model.label} equation's range" if not model.ideal else
            "where an ideal solution is a fair model (activity matters there)")
    return [note("ionic-strength", "ionic strength after dosing {ionic:.2fnum} mol/L is "
                 "beyond " + what + ": confirm with a bench titration",
                 ionic=Q(plan.ionic_strength_end, "mol/L"))]


def _undissolved_words(plan) -> list[Finding]:
    """The reagent's own hydroxide left as solid (lime or magnesia past saturation)."""
    return [note("undissolved", "{solid_mg_l} of the {formula} dosed stays undissolved at "
                 "pH {ph_end:.2f}: the water is saturated with it; mix well, allow reaction "
                 "time and re-measure before adding more", "warning",
                 {"formula": s.formula}, solid_mg_l=Q(s.mg_per_l, "mg/L"),
                 ph_end=Q(plan.ph_end, "pH"))
            for s in plan.solids if s.id.removesuffix("_hydroxide") in plan.reagent.compound.adds]


def _calcite_words(plan) -> Finding:
    """What a plan with calcite precipitating assumed, and the pH before it forms."""
    c = plan.calcite
    why = ("" if c.si_without is None else
           " (kept dissolved it would leave the water at saturation index "
           "{si_without:+.1f}, where it comes out within the hour)")
    outside = "" if plan.target.contains(c.ph_if_dissolved) else ", outside the window"
    return note("calcite-precipitates", "calcite precipitates: {calcite_mmol_l} of CaCO3 "
                "goes to the sludge" + why + ", and the dose includes the acid it releases "
                "(Ca2+ + HCO3- -> CaCO3 + H+). Until it has formed (minutes to hours; faster "
                "on old sludge) this dose gives pH {ph_if_dissolved:.2f}" + outside + ": let "
                "it settle and measure before adding more",
                calcite_mmol_l=Q(c.mol_l * 1000, "mmol/L"), si_without=Q(c.si_without),
                ph_if_dissolved=Q(c.ph_if_dissolved, "pH"))


def _air_words(plan) -> Finding:
    """What an open tank's plan assumed about CO2, and the other case's figures."""
    a, t = plan.air, plan.target
    ratio = None if a.other_dose_mol_l is None else a.other_dose_mol_l / plan.dose_mol_l
    q = {"hours": Q(a.hours, "h"), "depth": Q(a.depth_m, "m"), "fraction": Q(a.fraction, "%"),
         "tau_days": Q(a.depth_m / STILL_WATER_KL_M_H / 24.0, "days"),
         "ph_other": Q(a.ph_other, "pH"), "ratio": Q(ratio, "", digits=2),
         "other_mmol_l": Q(None if a.other_dose_mol_l is None else a.other_dose_mol_l * 1000,
                           "mmol/L")}
    source = "gas transfer 2.1 cm/h, Cole & Caraco 1998; wind and mixing make it faster"
    how = ("in {hours:g} a still tank {depth:g} deep gets about {fraction} of the way to "
           "CO2 equilibrium with air (" + source + ")" if a.hours > 0 else
           "CO2 exchanges with air over days (a still tank {depth:g} deep: time constant "
           "about {tau_days:.2g}; " + source + "); set model.hours_in_air for a water that "
           "stands")
    when = "within {hours:g} of dosing" if a.hours > 0 else "soon after dosing"
    outside = "" if t.contains(a.ph_other) else ", outside the window"
    if a.at_equilibrium:
        other = ("" if a.other_dose_mol_l is None else
                 "; dosed and read within hours this water needs {other_mmol_l} instead")
        words = ("open to air: the dose is planned for CO2 equilibrium with air: " + how
                 + ". Right after dosing, before the CO2 exchanges, the pH goes to about "
                 "{ph_other:.2f}" + outside + other)
    elif ratio is not None and 0.9 <= ratio <= 1.1 and not outside:
        q["ratio"] = Q(ratio, "%")
        words = ("open to air: the dose is planned for the pH " + when + ", with the "
                 "carbonate as sampled; standing for days changes little (the pH drifts to "
                 "about {ph_other:.2f}, and holding the aim would take {ratio} of this dose)")
    else:
        other = ("" if ratio is None else
                 "; holding the aim then needs {other_mmol_l}, {ratio:.2g} times this dose")
        words = ("open to air: the dose is planned for the pH " + when + ", with the "
                 "carbonate as sampled: " + how + ". Standing for days the water exchanges "
                 "CO2 and the pH drifts to about {ph_other:.2f}" + outside + other
                 + ": re-measure after a day and trim; never dose the long-term figure at once")
    return Finding("open-to-air", "warning", words, q)


def _cap_words(cw, target: Target) -> list[Finding]:
    """Warnings about the metal caps against the discharge window."""
    names = {"metals": ", ".join(cw.caps_mg_l)}
    if cw.ph_range is None:
        return [note("caps-unmet", "no pH meets every metal cap ({metals}) by hydroxide "
                     "precipitation alone: the plant needs another step (sulfide, "
                     "coagulation, ion exchange); the permit and a licensed engineer decide",
                     "warning", names)]
    q = {"lo": Q(cw.ph_range[0], "pH"), "hi": Q(cw.ph_range[1], "pH"),
         "ph_min": Q(target.ph_min, "pH"), "ph_max": Q(target.ph_max, "pH"),
         "aim": Q(target.ph_aim, "pH")}
    if cw.overlap is None:
        return [Finding("caps-outside-window", "warning",
                        "the metal caps ({metals}) are met only between pH {lo:.2f} and "
                        "{hi:.2f}, which does not overlap the discharge window {ph_min:g} to "
                        "{ph_max:g}: precipitate at that pH, separate the sludge, then adjust "
                        "the pH into the window", q, names)]
    if not cw.met_at_aim:
        q.update(lo=Q(cw.overlap[0], "pH"), hi=Q(cw.overlap[1], "pH"))
        return [Finding("caps-miss-aim", "warning",
                        "the aim pH {aim:g} misses a metal cap; the caps ({metals}) are met "
                        "between pH {lo:.2f} and {hi:.2f} inside the window: move the aim "
                        "there", q, names)]
    return []


def metal_checks(metals_after: Mapping[str, float], caps: Mapping[str, float],
                 target: Target) -> tuple[Finding, ...]:
    """One permit check per capped metal, at the aim."""
    out = []
    for metal, cap in caps.items():
        value = metals_after[metal]
        over = value > cap
        out.append(Finding(
            f"permit-{metal}_mg_l", "danger" if over else "info",
            "permit cap {metal} {cap_mg_l:g}: {value_mg_l} dissolved at pH {aim:g}"
            + (" - EXCEEDS THE CAP" if over else " - within the cap"),
            {"value_mg_l": Q(value, "mg/L"), "cap_mg_l": Q(cap, "mg/L"),
             "aim": Q(target.ph_aim, "pH")}, {"metal": label(metal)}))
    return tuple(out)
