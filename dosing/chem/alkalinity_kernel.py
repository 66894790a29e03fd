"""The carbonate that explains a lab alkalinity, for waters of weak acids
only, compiled (numba).

The equations are those of :func:`dosing.chem.alkalinity.carbonate_for_alkalinity`'s
numpy path, which stays the tested reference: the titration balance from
the sample pH to the end point is linear in the carbonate total once both
ionic strengths are fixed, and the two strengths (sample and end point,
with the titrant's ions) are settled together by
:func:`dosing.chem.solvers.settle`'s own secant path, each on its own, water
by water.

Everything here is pure: arrays in, arrays out.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from .dose_kernel import _column, _powers, charge_index, secant

__all__ = ["alkalinity_rows"]


@njit(cache=True, error_model="numpy", inline="always")
def _side(i, ki, ah, inv, ionic, k, z, kw, a, totals, car, davies, ceiling, power, za):
    """Sums at one pH and ionic strength: (sum T q, sum T m2, q and m2 of
    carbonate, [H+], [OH-])."""
    e = 1.0
    if davies:
        x = max(min(ionic, ceiling), 0.0)
        sx = math.sqrt(x)
        e = _powers(a[ki] * (sx / (1.0 + sx) - 0.3 * x), power)
    tq, tm2, qc, m2c = 0.0, 0.0, 0.0, 0.0
    for j in range(z.shape[0]):
        q, m2 = _column(j, ki, inv, k, z, za, power, davies)
        tq += totals[i, j] * q
        tm2 += totals[i, j] * m2
        if j == car:
            qc, m2c = q, m2
    return tq, tm2, qc, m2c, ah * e, kw[ki] * inv * e


@njit(cache=True, error_model="numpy", inline="always")
def _solve(i, ki, ah0, ahe, xs, xe, alk, extra, k, z, kw, a, totals, car, davies, ceiling,
           p0, pe, za):
    """(carbonate, its coefficient, new ionic strength at the sample and at
    the end point) at the ionic strengths ``xs`` and ``xe``."""
    tq0, tm0, q0c, m0c, h0, oh0 = _side(i, ki, ah0, 1.0 / ah0, xs, k, z, kw, a, totals, car,
                                        davies, ceiling, p0, za)
    tqe, tme, qec, mec, he, ohe = _side(i, ki, ahe, 1.0 / ahe, xe, k, z, kw, a, totals, car,
                                        davies, ceiling, pe, za)
    known = (tqe - tq0) + (he - ohe) - (h0 - oh0)
    coef = qec - q0c
    c = (alk[i] - known) / coef
    cc = c if math.isfinite(c) else 0.0
    s = -(h0 - oh0 + tq0 + cc * q0c)
    new_i = 0.5 * (h0 + oh0 + tm0 + cc * m0c) + 0.5 * abs(s) + extra[i]
    new_e = 0.5 * (he + ohe + tme + cc * mec) + 0.5 * abs(s) + 0.5 * abs(alk[i]) + extra[i]
    return c, coef, new_i, new_e


@njit(cache=True, error_model="numpy", inline="always")
def _rows(ph, ep, alk, extra, k, z, kw, a, totals, car, davies, ceiling, rtol, max_iter,
          c_out, coef_out, i_out):
    one = k.shape[0] == 1
    p0, pe = np.empty(6), np.empty(6)
    za = charge_index(z)
    for i in range(ph.shape[0]):
        ki = 0 if one else i
        ah0, ahe = 10.0 ** -ph[i], 10.0 ** -ep[i]
        c, coef, xs, xe = _solve(i, ki, ah0, ahe, extra[i], extra[i], alk, extra, k, z, kw,
                                 a, totals, car, davies, ceiling, p0, pe, za)
        if not davies:
            c_out[i], coef_out[i], i_out[i] = c, coef, xs
            continue
        # Two fixed points side by side, each with its own secant and its
        # own stop; one that has stopped keeps its last trial.
        ps, pe_, gs_prev, ge_prev = extra[i], extra[i], xs - extra[i], xe - extra[i]
        out_s, out_e, live_s, live_e = math.nan, math.nan, True, True
        for _ in range(max_iter):
            _, _, fs, fe = _solve(i, ki, ah0, ahe, xs, xe, alk, extra, k, z, kw, a, totals,
                                  car, davies, ceiling, p0, pe, za)
            gs, ge = fs - xs, fe - xe
            if live_s and abs(gs) <= 1e-13 + rtol * abs(fs):
                out_s, live_s = fs, False
            elif live_s and not (math.isfinite(fs) and fs < ceiling):
                live_s = False
            if live_e and abs(ge) <= 1e-13 + rtol * abs(fe):
                out_e, live_e = fe, False
            elif live_e and not (math.isfinite(fe) and fe < ceiling):
                live_e = False
            if not (live_s or live_e):
                break
            if live_s:
                xs, ps, gs_prev = secant(xs, ps, gs, gs_prev, fs), xs, gs
            if live_e:
                xe, pe_, ge_prev = secant(xe, pe_, ge, ge_prev, fe), xe, ge
        ok = math.isfinite(out_s) and math.isfinite(out_e)
        c, coef, ni, _ = _solve(i, ki, ah0, ahe, out_s if ok else 0.0, out_e if ok else 0.0,
                                alk, extra, k, z, kw, a, totals, car, davies, ceiling, p0, pe,
                                za)
        c_out[i], coef_out[i] = (c if ok else math.nan), coef
        i_out[i] = ni if ok else math.nan


@njit(cache=True, error_model="numpy")
def _ideal(ph, ep, alk, extra, k, z, kw, a, totals, car, ceiling, rtol, max_iter, c_out,
           coef_out, i_out):
    _rows(ph, ep, alk, extra, k, z, kw, a, totals, car, False, ceiling, rtol, max_iter,
          c_out, coef_out, i_out)


@njit(cache=True, error_model="numpy")
def _davies(ph, ep, alk, extra, k, z, kw, a, totals, car, ceiling, rtol, max_iter, c_out,
            coef_out, i_out):
    _rows(ph, ep, alk, extra, k, z, kw, a, totals, car, True, ceiling, rtol, max_iter,
          c_out, coef_out, i_out)


def alkalinity_rows(ph, ep, alk, extra, k, z, kw, a, totals, car, davies, ceiling, rtol,
                    max_iter, c_out, coef_out, i_out):
    """Carbonate [mol/L], its coefficient [-] and the sample's ionic strength
    [mol/L] of every water (``totals`` without carbonate; ``car`` its column)."""
    run = _davies if davies else _ideal
    run(ph, ep, alk, extra, k, z, kw, a, totals, car, ceiling, rtol, max_iter, c_out,
        coef_out, i_out)
