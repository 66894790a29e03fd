"""The water behind a bench titration, fitted by least squares.

The engine's water (carbonate total and strong-ion balance, optionally one
unidentified monoprotic acid with its pKa) is fitted to the curve, with
standard errors from the Jacobian; the fitted water is then planned like
any other, with any reagent. The fit compares volumes, not pH: at each
measured pH the model's titrant volume comes from the direct fixed-pH solve
(no root finding), which is well-conditioned in buffer regions and fast. The
pH misfit is reported too.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import least_squares

from ..chem import CARBONATE, UNKNOWN, Mixture, add_dose, dose_to_ph, solve_ph, speciate
from ..errors import InputError
from .bench import BenchCurve
from .effluent import Water
from .findings import Finding, Q, note

__all__ = ["FIT_LABELS", "FIT_TRUST_PH", "WaterFit", "fit_water", "model_curve"]

#: Past this pH misfit [RMS] a fitted water is not trusted over the direct
#: scaling of the curve (ten times a good meter's noise, common practice).
FIT_TRUST_PH = 0.1


#: What each fitted value is called on the page, and its unit.
FIT_LABELS = {"carbonate_mmol_l": ("carbonate", "mmol/L"),
              "strong_ion_balance_meq_l": ("strong-ion balance", "meq/L"),
              "unknown_acid_mmol_l": ("unlisted acid", "mmol/L"),
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
    warnings: tuple[Finding, ...]


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


def _fit_warnings(names, x, std, cond, rms, with_u) -> list[Finding]:
    """What the operator should know about a fit: values the curve cannot
    tell apart or does not determine, a poor fit, an unlisted buffer."""
    warnings: list[Finding] = []
    if not math.isfinite(cond) or cond > 1e12:
        warnings.append(note("not-identifiable", "the fitted values are not identifiable "
                             "from this curve (the parameters trade off against each other); "
                             "titrate further past the buffer regions"))
    for name, value, err in zip(names, x, std):
        what, unit = FIT_LABELS[name]
        if err is None:
            warnings.append(note("not-determined", "{what} is not determined by this curve "
                                 "(the pH does not respond to it over the titrated range)",
                                 "warning", {"what": what}))
        elif abs(value) > 1e-9 and err > 0.5 * abs(value) and "pka" not in name:
            warnings.append(note("poorly-determined", "{what} is poorly determined "
                                 "({value:.3gnum} ± {err:.2g})", "warning", {"what": what},
                                 value=Q(float(value), unit), err=Q(float(err), unit)))
    if rms > FIT_TRUST_PH:
        warnings.append(note("poor-fit", "poor fit: the model misses the measured pH by "
                             "{rms:.2f} (RMS); a buffer the listed solutes do not explain, or a "
                             "misread; trust the direct scaling more", rms=Q(rms, "pH")))
    if with_u:
        warnings.append(note("unlisted-buffer", "an unlisted buffer explains the curve: about "
                             "{total:.3g} of a weak acid with pKa {pka:.2f}; identify it if you "
                             "can", total=Q(float(x[2]), "mmol/L"), pka=Q(float(x[3]), "pH")))
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
                   notes=(note("fitted", "water fitted to the bench titration", "info"),))


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


def _ph_resid(x, curve, base, with_u):
    """Model pH at each measured volume (forward solves) minus measured."""
    _, mix = _model_ml(x, curve, base, with_u)
    d = curve.added_ml * curve.titrant.molarity_mol_l / curve.sample_ml
    ph = solve_ph(add_dose(mix, curve.titrant.vector(), d), ph_guess=curve.ph)
    r = ph - curve.ph
    return r, float(np.sqrt(np.mean(r * r)))
