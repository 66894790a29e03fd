"""Bench titration to full-scale dose, two ways side by side.

An operator titrates a sample (``sample_ml`` of effluent) with a titrant of
known strength and reads the pH after each addition. From that curve:

1. **Direct scaling** (model-free): a monotone PCHIP interpolation of the
   titrant volume against pH gives the volume at the aim and at the window
   edges; scaled by tank-to-sample volume and by equivalents of titrant to
   product it gives the dose.
2. **Model fit**: the engine's water (carbonate total and strong-ion
   balance, optionally one unidentified monoprotic acid with its pKa) is
   fitted by least squares to the curve, with uncertainties from the
   Jacobian; the fitted water is then planned like any other, with any
   reagent.

The fit compares volumes, not pH: at each measured pH the model's titrant
volume comes from the direct fixed-pH solve (no root finding), which is
well-conditioned in buffer regions and fast. The pH misfit is reported too.

References
----------
Fritsch, F. N.; Carlson, R. E. (1980). Monotone piecewise cubic
interpolation. SIAM J. Numer. Anal. 17, 238-246 (scipy's PchipInterpolator).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
from scipy.interpolate import PchipInterpolator
from scipy.optimize import least_squares

from .effluent import Water
from ..chem import (CARBONATE, UNKNOWN, Mixture, ReagentVector, add_dose, dose_to_ph,
                          solve_ph, speciate)
from ..errors import InputError, UnreachableError
from .plan import Flow, Plan, Target, amounts_for, plan_dose
from .reagents import COMPOUNDS, Compound, Reagent, get_reagent
from .job import Scenario

__all__ = ["Titrant", "parse_titrant", "BenchCurve", "check_curve", "DirectScaling",
           "direct_scaling", "WaterFit", "fit_water", "compare", "MISREAD_PH", "model_curve",
           "GAP_WARN", "equivalents_per_mol"]

#: A pH step against the titrant's direction larger than this is a misread
#: (smaller ones are meter noise and are flagged) [pH] (common practice).
MISREAD_PH = 0.05
#: Direct and model doses further apart than this are worth a warning [-]
#: (common practice).
GAP_WARN = 0.15
MIN_POINTS = 5


def equivalents_per_mol(compound: Compound) -> float | None:
    """Strong acid or base equivalents one mole delivers [eq/mol].

    None for CO2, whose acid strength depends on the pH.
    """
    if compound.formula == "CO2":
        return None
    if compound.raises_ph:
        return compound.strong_eq
    if "sulfate" in compound.adds:
        return 2.0          # H2SO4: both protons, above about pH 3
    return -compound.strong_eq


@dataclass(frozen=True)
class Titrant:
    """The bench titrant: compound and molarity [mol/L]."""

    compound: Compound
    molarity_mol_l: float
    label: str

    def vector(self) -> ReagentVector:
        return self.compound.vector(1.0 / self.molarity_mol_l)

    @property
    def normality_eq_l(self) -> float:
        return self.molarity_mol_l * equivalents_per_mol(self.compound)


_STRENGTH = re.compile(r"^\s*(?:(?P<n1>[\d.]+)\s*(?P<u1>[MN])\s+(?P<c1>\S+)"
                       r"|(?P<c2>[A-Za-z()0-9]+)\s*[:\s]\s*(?P<n2>[\d.]+)\s*(?P<u2>[MN]?))\s*$")


def parse_titrant(text: str) -> Titrant:
    """A titrant from a catalogue id or a strength: ``0.1 M NaOH``,
    ``0.02 N H2SO4``, ``HCl:0.1`` (molar).
    """
    text = text.strip()
    try:
        r = get_reagent(text)
    except InputError:
        r = None
    if r is not None:
        if r.litres_product_per_mol is None:
            raise InputError("titrant", f"{text} is not a solution; titrate with a "
                             "solution of known strength")
        return Titrant(r.compound, 1.0 / r.litres_product_per_mol, r.name)
    m = _STRENGTH.match(text)
    if not m:
        raise InputError("titrant", f"{text!r}: give a catalogue id or a strength "
                         "such as '0.1 M NaOH', '0.02 N H2SO4' or 'HCl:0.1'")
    comp = m.group("c1") or m.group("c2")
    try:
        value = float(m.group("n1") or m.group("n2"))
    except ValueError:
        raise InputError("titrant", f"{text!r}: the strength is not a number; write it "
                         "as '0.1 M NaOH', '0.02 N H2SO4' or 'HCl:0.1'") from None
    unit = m.group("u1") or m.group("u2") or "M"
    if comp not in COMPOUNDS:
        raise InputError("titrant", f"unknown compound {comp!r}; allowed: "
                         + ", ".join(COMPOUNDS))
    c = COMPOUNDS[comp]
    eq = equivalents_per_mol(c)
    if eq is None:
        raise InputError("titrant", "CO2 is not a titrant; use a strong acid")
    molarity = value / eq if unit == "N" else value
    if not 1e-4 <= molarity <= 20:
        raise InputError("titrant", f"{value:g} {unit} is not a plausible titrant "
                         "strength; allowed: 0.0001 to 20 mol/L")
    return Titrant(c, molarity, f"{molarity:g} M {comp}")


def _refuse_back_titration(q: np.ndarray, rows, titrant: Titrant, source: str) -> None:
    """Refuse a curve whose pH turns and runs back for good: a second titrant.

    ``q`` is the pH signed so that the titrant raises it. Three or more
    readings in a row going back, by more than 0.5 pH in all, is not meter
    noise or one misread.
    """
    top = int(np.argmax(q))
    tail = q[top:]
    if tail.size >= 4 and np.all(np.diff(tail) < 0) and q[top] - tail[-1] > 0.5:
        raise InputError(source, f"the pH turns at row {rows[top]} and runs back "
                         f"{q[top] - tail[-1]:.1f} pH over the last {tail.size - 1} readings "
                         f"while {titrant.label} is added: a back titration with a second "
                         "titrant is not taken. Give each titrant's curve in its own file")


def _misread_suspects(q: np.ndarray, i: int) -> list[int]:
    """Which of points ``i`` and ``i + 1`` breaks the trend of ``q`` (rising).

    A spike up at ``i`` is the misread when leaving it out puts its
    neighbours back in order; a dip at ``i + 1`` likewise. When both (or
    neither) would, both are named.
    """
    fits_without_i = (i == 0 or q[i - 1] <= q[i + 1] + MISREAD_PH)
    fits_without_next = (i + 2 >= q.size or q[i] <= q[i + 2] + MISREAD_PH)
    if fits_without_i and not fits_without_next:
        return [i]
    if fits_without_next and not fits_without_i:
        return [i + 1]
    return [i, i + 1]


@dataclass(frozen=True)
class BenchCurve:
    """A checked bench titration (volumes increasing, pH monotone)."""

    sample_ml: float
    titrant: Titrant
    added_ml: np.ndarray
    ph: np.ndarray
    rows: np.ndarray                 #: file row number of each point
    notes: tuple[str, ...] = field(default=())


def check_curve(sample_ml: float, titrant: Titrant, added_ml, ph, rows=None,
                source: str = "titration") -> BenchCurve:
    """Validate a titration; raises InputError with the row at fault."""
    v = np.asarray(added_ml, dtype=float)
    p = np.asarray(ph, dtype=float)
    rows = np.arange(1, v.size + 1) if rows is None else np.asarray(rows)
    if not (math.isfinite(sample_ml) and 1.0 <= sample_ml <= 1e5):
        raise InputError("sample_ml", f"{sample_ml:g}; allowed: 1 to 100,000 mL")
    bad = ~np.isfinite(v) | ~np.isfinite(p)
    if bad.any():
        raise InputError(source, "rows with a missing or unreadable number: "
                         + ", ".join(str(r) for r in rows[bad][:10])
                         + "; fix or delete them (nothing is guessed)")
    if v.size < MIN_POINTS:
        raise InputError(source, f"{v.size} points; a titration needs at least "
                         f"{MIN_POINTS}")
    if np.any(v < 0) or np.any((p < 0) | (p > 14)):
        raise InputError(source, "volumes must be 0 or more mL and pH 0 to 14")
    dv = np.diff(v)
    if np.any(dv == 0):
        i = int(np.flatnonzero(dv == 0)[0])
        raise InputError(source, f"rows {rows[i]} and {rows[i + 1]} have the same "
                         f"volume {v[i]:g} mL; keep one reading per addition")
    if np.any(dv < 0):
        i = int(np.flatnonzero(dv < 0)[0])
        raise InputError(source, f"volume goes down at row {rows[i + 1]} "
                         f"({v[i]:g} -> {v[i + 1]:g} mL); the titrant added must be "
                         "cumulative")
    if v[-1] > 10 * sample_ml:
        raise InputError(source, f"{v[-1]:g} mL of titrant for a {sample_ml:g} mL "
                         "sample: the volumes look like the wrong unit; give mL")
    direction = 1.0 if titrant.compound.raises_ph else -1.0
    _refuse_back_titration(p * direction, rows, titrant, source)
    dp = np.diff(p) * direction
    notes: list[str] = []
    if np.any(dp < -MISREAD_PH):
        i = int(np.flatnonzero(dp < -MISREAD_PH)[0])
        verb = "falls" if direction > 0 else "rises"
        suspect = " or ".join(str(rows[k]) for k in _misread_suspects(p * direction, i))
        raise InputError(source, f"pH {verb} from {p[i]:g} (row {rows[i]}) to {p[i + 1]:g} "
                         f"(row {rows[i + 1]}) while {titrant.label} is added: row "
                         f"{suspect} looks misread. Fix the reading or drop that row "
                         "(--drop ROW)")
    small = np.flatnonzero(dp < 0)
    if small.size:
        notes.append("pH readings against the trend by up to "
                     f"{MISREAD_PH:g} at rows " + ", ".join(str(rows[i + 1]) for i in small)
                     + ": taken as meter noise and held level for the interpolation")
    if v[0] != 0:
        notes.append(f"the first reading is at {v[0]:g} mL, not 0: the sample's own pH "
                     "is not in the data")
    return BenchCurve(float(sample_ml), titrant, v, p, rows, tuple(notes))


@dataclass(frozen=True)
class DirectScaling:
    """Model-free result of the curve."""

    ml_at_aim: float
    ml_at_edges: tuple[float | None, float | None]   #: at ph_min, ph_max
    eq_per_l: float                    #: titrant equivalents per L of effluent
    dose_mol_l: float | None           #: full-scale reagent, mol active per L
    band_mol_l: tuple[float | None, float | None]
    interpolant: PchipInterpolator     #: volume [mL] as a function of pH
    notes: tuple[str, ...]


def _monotone_ph(curve: BenchCurve) -> np.ndarray:
    direction = 1.0 if curve.titrant.compound.raises_ph else -1.0
    return direction * np.maximum.accumulate(direction * curve.ph)


def direct_scaling(curve: BenchCurve, reagent: Reagent, target: Target) -> DirectScaling:
    """Titrant volume at the aim and window edges, scaled to the reagent."""
    p = _monotone_ph(curve)
    keep = np.concatenate([[True], np.diff(p) != 0])     # PCHIP needs strict order
    x, y = p[keep], curve.added_ml[keep]
    if curve.titrant.compound.raises_ph != reagent.raises_ph:
        raise InputError("titrant", f"the titrant {curve.titrant.label} and the "
                         f"reagent {reagent.name} push the pH opposite ways")
    if x[0] > x[-1]:
        x, y = x[::-1], y[::-1]
    f = PchipInterpolator(x, y, extrapolate=False)
    last = curve.ph[-1]
    lo, hi = float(x[0]), float(x[-1])
    aim = target.ph_aim
    if not lo <= aim <= hi:
        raise UnreachableError(
            f"the titration does not reach the aim pH {aim:g}: it ends at pH {last:g} "
            f"after {curve.added_ml[-1]:g} mL (range pH {lo:g} to {hi:g}); no "
            "extrapolation is made. Extend the titration past the aim")
    notes = []

    def ml(ph):
        if lo <= ph <= hi:
            return float(f(ph))
        notes.append(f"the curve does not reach pH {ph:g}, so that edge of the window "
                     "has no volume")
        return None

    v_aim = ml(aim)
    edges = (ml(target.ph_min), ml(target.ph_max))
    eq_per_l_at = lambda v_ml: (None if v_ml is None else
                                v_ml / 1000.0 * curve.titrant.normality_eq_l
                                / (curve.sample_ml / 1000.0))
    eq_r = equivalents_per_mol(reagent.compound)
    if eq_r is None:
        notes.append(f"{reagent.name} cannot be scaled by equivalents (its strength "
                     "as an acid depends on the pH): use the model dose")
        to_mol = lambda e: None
    else:
        to_mol = lambda e: None if e is None else e / eq_r
    if curve.titrant.compound.formula != reagent.compound.formula:
        notes.append(f"titrant {curve.titrant.compound.formula} and reagent "
                     f"{reagent.compound.formula} differ: direct scaling by equivalents "
                     "ignores the carbonate, sulfate or calcium the product brings")
    band = sorted(m for m in (to_mol(eq_per_l_at(e)) for e in edges) if m is not None)
    band_t = (band[0] if band else None, band[1] if len(band) > 1 else None)
    return DirectScaling(v_aim, edges, eq_per_l_at(v_aim), to_mol(eq_per_l_at(v_aim)),
                         band_t, f, tuple(notes))


#: What each fitted value is called on the page, and its unit.
FIT_LABELS = {"carbonate_mmol_l": ("carbonate", " mmol/L"),
              "strong_ion_balance_meq_l": ("strong-ion balance", " meq/L"),
              "unknown_acid_mmol_l": ("unlisted acid", " mmol/L"),
              "unknown_acid_pka": ("its pKa", "")}


@dataclass(frozen=True)
class WaterFit:
    """Fitted water and how good the fit is."""

    water: Water
    params: dict[str, float]          #: fitted values, mmol/L, meq/L, pKa
    stderr: dict[str, float | None]   #: one standard error of each (None: not determined)
    residual_ml: np.ndarray           #: model minus measured volume [mL]
    residual_ph: np.ndarray           #: model minus measured pH at each volume
    rms_ph: float
    unknown_acid: bool
    warnings: tuple[str, ...]


def _model_ml(params, curve: BenchCurve, base: Water, with_unknown: bool):
    c_mm, s_meq = params[0], params[1]
    tot = base.mixture().totals_mol_l.copy()
    tot[0, CARBONATE] = c_mm / 1000.0
    pka = None
    if with_unknown:
        tot[0, UNKNOWN] = params[2] / 1000.0
        pka = params[3]
    n = curve.ph.size
    mix = Mixture.build(np.repeat(tot, n, 0), s_meq / 1000.0, 0.5 * abs(s_meq) / 1000.0,
                        base.temperature_c, math.nan, base.activity, pka)
    d, _ = dose_to_ph(mix, curve.titrant.vector(), curve.ph)
    return d * curve.sample_ml / curve.titrant.molarity_mol_l, mix


def _fit(curve, base, with_unknown, starts):
    scale = max(curve.added_ml[-1], 1e-6)

    def resid(x):
        ml, _ = _model_ml(x, curve, base, with_unknown)
        r = (ml - curve.added_ml) / scale
        return np.where(np.isfinite(r), r, 10.0)

    lo = [0.0, -2000.0] + ([0.0, 2.0] if with_unknown else [])
    hi = [2000.0, 2000.0] + ([2000.0, 12.0] if with_unknown else [])
    best = None
    for x0 in starts:
        try:
            res = least_squares(resid, x0, bounds=(lo, hi), x_scale="jac", method="trf")
        except ValueError:
            continue
        if best is None or res.cost < best.cost:
            best = res
    return best, scale


def fit_water(curve: BenchCurve, base: Water, *, unknown_acid: str = "auto") -> WaterFit:
    """Fit the carbonate total and strong-ion balance (and optionally an
    unidentified acid) of the sample to the curve.

    ``base`` gives temperature, activity model and the known solutes (its
    carbonate is replaced by the fit). ``unknown_acid``: "auto" (added when
    it halves the pH misfit), "yes" or "no".
    """
    chosen, with_u, (r_ph, rms) = _least_squares_fit(curve, base, unknown_acid)
    x = chosen.x
    names = ["carbonate_mmol_l", "strong_ion_balance_meq_l"] + (
        ["unknown_acid_mmol_l", "unknown_acid_pka"] if with_u else [])
    std, cond = _standard_errors(chosen.jac, 2 * chosen.cost / max(curve.ph.size - len(x), 1))
    warnings = _fit_warnings(names, x, std, cond, rms, with_u)
    ml, mix = _model_ml(x, curve, base, with_u)
    return WaterFit(_fitted_water(base, x, mix, with_u), dict(zip(names, map(float, x))),
                    dict(zip(names, std)), ml - curve.added_ml, r_ph, rms, with_u,
                    tuple(warnings))


def _least_squares_fit(curve: BenchCurve, base: Water, unknown_acid: str):
    """The least-squares fit without an unlisted acid, and with one where
    asked or where it halves the pH misfit: (fit, with_unknown, misfit)."""
    # Starting points: the strong balance that matches the first reading
    # for a few carbonate totals.
    from ..chem import strong_balance_at_ph
    starts = []
    for c in (0.0, 1.0, 5.0, 20.0):
        tot = base.mixture().totals_mol_l.copy()
        tot[0, CARBONATE] = c / 1000.0
        s, _ = strong_balance_at_ph(tot, curve.ph[0], base.temperature_c, activity=base.activity)
        starts.append([c, float(s[0]) * 1000.0])
    plain, _ = _fit(curve, base, False, starts)
    if plain is None:
        raise InputError("titration", "the model could not be fitted to this curve")
    chosen, with_u = plain, False
    misfit = _ph_resid(plain.x, curve, base, False)
    ph_rms_plain = misfit[1]
    if unknown_acid == "yes" or (unknown_acid == "auto" and ph_rms_plain > 0.05):
        u_starts = [[plain.x[0], plain.x[1], 1.0, pk] for pk in (3.5, 5.0, 6.5, 8.0, 9.5)]
        withu, _ = _fit(curve, base, True, u_starts)
        if withu is not None:
            misfit_u = _ph_resid(withu.x, curve, base, True)
            if unknown_acid == "yes" or misfit_u[1] < 0.5 * ph_rms_plain:
                chosen, with_u, misfit = withu, True, misfit_u
    return chosen, with_u, misfit


def _fit_warnings(names, x, std, cond, rms, with_u) -> list[str]:
    """What the operator should know about a fit: values the curve cannot
    tell apart or does not determine, a poor fit, an unlisted buffer."""
    warnings: list[str] = []
    if not math.isfinite(cond) or cond > 1e12:
        warnings.append("the fitted values are not identifiable from this curve (the "
                        "parameters trade off against each other); titrate further "
                        "past the buffer regions")
    for name, value, err in zip(names, x, std):
        if err is None:
            warnings.append(f"{FIT_LABELS[name][0]} is not determined by this curve "
                            "(the pH does not respond to it over the titrated range)")
        elif abs(value) > 1e-9 and err > 0.5 * abs(value) and "pka" not in name:
            warnings.append(f"{FIT_LABELS[name][0]} is poorly determined "
                            f"({value:.3g} ± {err:.2g}{FIT_LABELS[name][1]})")
    if rms > 0.1:
        warnings.append(f"poor fit: the model misses the measured pH by {rms:.2f} "
                        "(RMS); a buffer the listed solutes do not explain, or a "
                        "misread; trust the direct scaling more")
    if with_u:
        warnings.append(f"an unlisted buffer explains the curve: about {x[2]:.3g} mmol/L "
                        f"of a weak acid with pKa {x[3]:.2f}; identify it if you can")
    return warnings


def _fitted_water(base: Water, x, mix: Mixture, with_u: bool) -> Water:
    """The sample as fitted: carbonate, strong-ion balance (and the unlisted
    acid) from ``x``, its pH and ionic strength solved again."""
    totals = dict(base.totals_mol_l)
    totals["carbonate"] = x[0] / 1000.0
    if with_u:
        totals["unknown"] = x[2] / 1000.0
    start = Mixture.build(mix.totals_mol_l[:1], x[1] / 1000.0, 0.5 * abs(x[1]) / 1000.0,
                          base.temperature_c, math.nan, base.activity,
                          x[3] if with_u else None)
    ph0 = float(solve_ph(start)[0])
    sp = speciate(start, ph0)
    return replace(base, ph=ph0, totals_mol_l=totals, strong_eq_l=x[1] / 1000.0,
                   strong_ionic_strength=0.5 * abs(x[1]) / 1000.0,
                   ionic_strength=float(sp.ionic_strength[0]), open_to_air=base.open_to_air,
                   unknown_pka=float(x[3]) if with_u else None,
                   notes=("water fitted to the bench titration",))


def _standard_errors(jac: np.ndarray, s2: float) -> tuple[list[float | None], float]:
    """One standard error per fitted value (None where the curve cannot tell it)
    and the condition number of the normal matrix.

    Linearised least-squares covariance, s2 (J'J)^-1 (e.g. Bard 1974,
    *Nonlinear Parameter Estimation*, ch. 7, from memory). A parameter the
    residuals do not respond to has a zero Jacobian column: its error is
    not a number, so it is reported as not determined, never as infinity.
    """
    jtj = jac.T @ jac
    cond = float(np.linalg.cond(jtj)) if np.all(np.isfinite(jtj)) else math.inf
    norms = np.linalg.norm(jac, axis=0)
    live = norms > 1e-12 * max(float(norms.max(initial=0.0)), 1e-300)
    out: list[float | None] = [None] * jac.shape[1]
    if live.any():
        sub = jtj[np.ix_(live, live)]
        var = np.diag(np.linalg.pinv(sub)) * s2
        for k, v in zip(np.flatnonzero(live), var):
            out[k] = float(math.sqrt(max(v, 0.0))) if math.isfinite(v) else None
    return out, cond


def model_curve(curve: BenchCurve, water: Water, points: int = 300
                ) -> tuple[np.ndarray, np.ndarray]:
    """Titrant volume [mL] and the fitted water's pH along it (forward solves),
    from none to the last volume titrated."""
    v = np.linspace(0.0, float(curve.added_ml[-1]), points)
    mix = water.mixture().take(np.zeros(points, dtype=int))
    ph = solve_ph(add_dose(mix, curve.titrant.vector(),
                           v * curve.titrant.molarity_mol_l / curve.sample_ml))
    return v, ph


def _extrapolation_words(curve: BenchCurve, target: Target, spec) -> list[str]:
    """A warning when the aim lies outside the titrated pH range."""
    lo, hi = float(np.min(curve.ph)), float(np.max(curve.ph))
    aim = target.ph_aim
    if lo <= aim <= hi:
        return []
    away = lo - aim if aim < lo else aim - hi
    what = ("the plan extrapolates the fitted buffer sites" if spec is not None
            else "the plan extrapolates the fitted water")
    return [f"the aim pH {aim:g} lies {away:.1f} pH outside the titrated range ({lo:.1f} "
            f"to {hi:.1f}): {what}; titrate past the aim to check it"]


def _ph_resid(x, curve, base, with_u):
    """Model pH at each measured volume (forward solves) minus measured."""
    _, mix = _model_ml(x, curve, base, with_u)
    d = curve.added_ml * curve.titrant.molarity_mol_l / curve.sample_ml
    ph = solve_ph(add_dose(mix, curve.titrant.vector(), d), ph_guess=curve.ph)
    r = ph - curve.ph
    return r, float(np.sqrt(np.mean(r * r)))


#: The simple fit is kept while it explains the curve this well [pH RMS]
#: (three times a good bench meter's noise, 0.01, common practice).
SIMPLE_FIT_ENOUGH = 0.03
FIT_MODES = ("auto", "simple", "spectrum")


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
    """Both methods for one bench titration: the typed results and, in
    :meth:`to_dict`, the same as plain JSON-ready data."""

    direct: DirectScaling
    fit: WaterFit
    spectrum: Any                   #: the buffer spectrum, or None (simple fit only)
    used: str                       #: "simple" or "spectrum": the water the plan rests on
    plan: Plan                      #: the plan from the fitted water
    scenario: Scenario              #: the scenario with the fitted water
    gap: float | None               #: (model - direct) / direct dose
    warnings: tuple[str, ...]
    data: dict[str, Any]

    def to_dict(self) -> dict[str, Any]:
        """The comparison as plain data (SI units, JSON-ready)."""
        return self.data


def compare(curve: BenchCurve, scenario: Scenario, *, unknown_acid: str = "auto",
            fit_mode: str = "auto") -> Comparison:
    """Both methods for a scenario's reagent, window and tank.

    The model water is the simple fit (carbonate, strong-ion balance, at most
    one unlisted acid) while it explains the curve to about three times a
    meter's noise; otherwise the buffer spectrum (:mod:`dosing.planning.buffer_fit`).
    ``fit_mode`` forces either.
    """
    from ..report.sheet import sheet_dict
    target, reagent, basis = scenario.target, scenario.reagent, scenario.basis
    direct = direct_scaling(curve, reagent, target)
    fit, spec, used = _choose_fit(curve, scenario.water, unknown_acid, fit_mode)
    water = spec.water if used == "spectrum" else fit.water
    plan = plan_dose(water, reagent, target, basis, permit=scenario.permit)
    eff = {"ph": round(water.ph, 3), "temperature_c": water.temperature_c}
    fitted = replace(scenario, water=water, data=dict(scenario.data, effluent=eff))
    warnings = list(curve.notes) + list(direct.notes) + (
        list(fit.warnings) if used == "simple" else [])
    warnings += _extrapolation_words(curve, target, spec if used == "spectrum" else None)
    warnings += _sample_words(curve, scenario.water.ph)
    gap = None
    if direct.dose_mol_l and plan.dose_mol_l:
        gap = (plan.dose_mol_l - direct.dose_mol_l) / direct.dose_mol_l
        if abs(gap) > GAP_WARN:
            warnings.append(f"the model dose and the direct scaling differ by {gap:+.0%}: "
                            "check the titrant strength, the sample volume and the "
                            "water model before dosing; dose in stages")
    a = amounts_for(direct.dose_mol_l, reagent, basis) if direct.dose_mol_l is not None \
        else None
    data = _comparison_dict(curve, direct, a, basis, fit, spec, used, sheet_dict(fitted, plan),
                            gap, warnings, plan)
    return Comparison(direct, fit, spec, used, plan, fitted, gap, tuple(warnings), data)


#: The sample's own pH (no titrant yet) and the scenario's pH differ by more
#: than two meters usually do (common practice: about 0.1-0.2 pH).
SAMPLE_PH_WARN = 0.3


def _sample_words(curve: BenchCurve, scenario_ph: float) -> list[str]:
    """A warning when the titrated sample, before any titrant, is not at the
    scenario's pH: another sample, or a meter to recalibrate."""
    if curve.added_ml.size == 0 or curve.added_ml[0] != 0.0:
        return []
    first = float(curve.ph[0])
    if abs(first - scenario_ph) <= SAMPLE_PH_WARN:
        return []
    return [f"the titrated sample starts at pH {first:.2f} but the scenario's water is at "
            f"pH {scenario_ph:.2f}: another sample, or a meter to recalibrate? Check before "
            "dosing from this titration"]


def _comparison_dict(curve, direct, a, basis, fit, spec, used, plan_dict, gap, warnings,
                     plan) -> dict[str, Any]:
    """The JSON of a :class:`Comparison`."""
    per = "per_h" if isinstance(basis, Flow) else "per_batch"
    return {
        "sample_ml": curve.sample_ml, "titrant": curve.titrant.label,
        "points": int(curve.ph.size),
        "direct": {
            "ml_titrant_at_aim": direct.ml_at_aim,
            "ml_titrant_at_window": list(direct.ml_at_edges),
            "titrant_eq_per_l_effluent": direct.eq_per_l,
            "dose_mmol_per_l": None if direct.dose_mol_l is None else direct.dose_mol_l * 1000,
            f"kg_product_{per}": None if a is None else a.kg_product,
            f"litres_product_{per}": None if a is None else a.litres_product,
            "band_mmol_per_l": [None if b is None else b * 1000 for b in direct.band_mol_l],
        },
        "model": {"fitted": fit.params, "stderr": fit.stderr, "rms_ph": fit.rms_ph,
                  "unknown_acid": fit.unknown_acid,
                  "residual_ml": [float(r) for r in fit.residual_ml],
                  "used": used, "plan": plan_dict},
        "spectrum": None if spec is None else {
            "rms_ph": spec.rms_ph, "strong_ion_balance_meq_l": spec.strong_eq_l * 1000,
            "carbonate_mmol_l": spec.carbonate_mol_l * 1000,
            "titrated_ph_range": list(spec.ph_range),
            "sites": [{"pka": float(p), "mmol_per_l": float(c) * 1000}
                      for p, c in zip(spec.site_pka, spec.site_mol_l)],
            "regions": [{"pka": r.pka, "mmol_per_l": r.mmol_l, "sd_mmol_per_l": r.sd_mmol_l,
                         "guess": r.guess, "at_edge": r.edge, "words": r.words()}
                        for r in spec.regions]},
        "gap_model_vs_direct": gap,
        "warnings": warnings,
        "cautions": list(plan.cautions),
    }
