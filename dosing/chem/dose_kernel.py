"""The fixed-pH dose of waters without metals, solids or complexes, compiled (numba).

The equations are those of :func:`dosing.chem.dose.dose_to_ph`'s numpy path
(``_DoseJob.at`` and :func:`dosing.chem.solvers.settle`), which stays the
tested reference: fractions of each weak-acid system at the target, the
charge balance after the dose made linear in the dose by the dilution
factor, and for the Davies model the ionic strength of the dosed water
settled by the same secant-accelerated fixed point, water by water. One
pass over each row, no temporaries: this is what lets a replay whose every
row is a new water, or a sampler of thousands of waters, run at the speed
of the arithmetic.

Everything here is pure: arrays in, arrays out.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

__all__ = ["dose_rows", "strong_rows"]

_LN10 = math.log(10.0)


@njit(cache=True, error_model="numpy", inline="always")
def _powers(t, power):
    """E^(z^2) for |z| = 0..5 into ``power``, E = 10^t; returns E.

    The Davies factors of a form's constants telescope: form f carries
    10^(t z_f^2) / 10^(t z_0^2), so each form is weighted by E^(z_f^2),
    taken from this table by |z_f| (charges are integers, |z| <= 5).
    """
    e = math.exp(_LN10 * t)
    e4 = e * e
    e4 = e4 * e4
    e8 = e4 * e4
    power[0], power[1], power[2] = 1.0, e, e4
    power[3] = e8 * e
    power[4] = e8 * e8
    power[5] = power[4] * power[3]
    return e


@njit(cache=True, error_model="numpy", inline="always")
def _column(j, ki, inv, k, z, za, power, davies):
    """Mean charge and mean squared charge of column ``j`` (forms built one
    from the last: each step's constant times 1/a_H)."""
    forms = z.shape[1]
    z0 = z[j, 0]
    p = power[za[j, 0]] if davies else 1.0
    tot = p
    sq = p * z0
    s2 = p * z0 * z0
    c = 1.0
    for f in range(forms - 1):
        zb = z[j, f + 1]
        c = c * k[ki, j, f] * inv
        p = c * power[za[j, f + 1]] if davies else c
        tot += p
        sq += p * zb
        s2 += p * zb * zb
    r = 1.0 / tot
    return sq * r, s2 * r


@njit(cache=True, error_model="numpy", inline="always")
def _pass(i, ki, ah, inv, ionic, k, z, kw, a, totals, strong, strong_i, n_r, r_strong,
          r_vol, r_ionic, davies, ceiling, power, za):
    """One pass at ionic strength ``ionic``: (dose, slope, ionic strength after),
    the columns summed straight into the charge balance and the ionic strength."""
    e = 1.0
    if davies:
        x = max(min(ionic, ceiling), 0.0)
        sx = math.sqrt(x)
        e = _powers(a[ki] * (sx / (1.0 + sx) - 0.3 * x), power)
    num, den, weak, weak_r = strong[i], r_strong, 0.0, 0.0
    for j in range(z.shape[0]):
        q, m2 = _column(j, ki, inv, k, z, za, power, davies)
        num += totals[i, j] * q
        den += n_r[j] * q
        if davies:
            weak += totals[i, j] * m2
            weak_r += n_r[j] * m2
    h = ah * e
    oh = kw[ki] * inv * e
    w = h - oh
    num += w
    den += r_vol * w
    dose = -num / den
    if not davies:
        return dose, den, 0.0
    g = dose if (math.isfinite(dose) and dose > 0.0) else 0.0
    fd = 1.0 / (1.0 + g * r_vol)
    return dose, den, 0.5 * (h + oh + fd * (weak + g * weak_r)) + fd * (strong_i[i] + g * r_ionic)


@njit(cache=True, error_model="numpy", inline="always")
def charge_index(z):
    """|z| of every form as an index into the table of :func:`_powers`."""
    za = np.empty(z.shape, dtype=np.int64)
    for j in range(z.shape[0]):
        for f in range(z.shape[1]):
            za[j, f] = int(abs(z[j, f]) + 0.5)
    return za


@njit(cache=True, error_model="numpy", inline="always")
def secant(x, x_prev, g, g_prev, fx):
    """The next trial of :func:`dosing.chem.solvers.settle`: the secant root
    of g(x) = f(x) - x when it is finite and not negative, else f(x)."""
    sec = x - g * (x - x_prev) / (g - g_prev) if g != g_prev else math.nan
    return sec if (math.isfinite(sec) and sec >= 0.0) else fx


@njit(cache=True, error_model="numpy", inline="always")
def _strong_pass(i, ki, ah, inv, ionic, k, z, kw, a, totals, extra, known, davies, ceiling,
                 power, za):
    """One pass of the strong-ion balance at the water's own pH and ionic
    strength ``ionic``: (S, 0, ionic strength with that S)."""
    e = 1.0
    if davies:
        x = max(min(ionic, ceiling), 0.0)
        sx = math.sqrt(x)
        e = _powers(a[ki] * (sx / (1.0 + sx) - 0.3 * x), power)
    resid, weak = 0.0, 0.0
    for j in range(z.shape[0]):
        q, m2 = _column(j, ki, inv, k, z, za, power, davies)
        resid += totals[i, j] * q
        weak += totals[i, j] * m2
    h = ah * e
    oh = kw[ki] * inv * e
    sb = -(resid + h - oh)
    return sb, 0.0, 0.5 * (h + oh + weak) + extra[i] + 0.5 * abs(sb - known[i])


@njit(cache=True, error_model="numpy", inline="always")
def _one_pass(kind, i, ki, ah, inv, x, k, z, kw, a, totals, strong, strong_i, n_r, r_strong,
              r_vol, r_ionic, extra, known, davies, ceiling, power, za):
    """The pass of problem ``kind`` (0: the dose, 1: the strong balance)."""
    if kind == 0:
        return _pass(i, ki, ah, inv, x, k, z, kw, a, totals, strong, strong_i, n_r, r_strong,
                     r_vol, r_ionic, davies, ceiling, power, za)
    return _strong_pass(i, ki, ah, inv, x, k, z, kw, a, totals, extra, known, davies, ceiling,
                        power, za)


@njit(cache=True, error_model="numpy", inline="always")
def _rows(kind, ah, k, z, kw, a, totals, start, strong, strong_i, n_r, r_strong, r_vol,
          r_ionic, extra, known, davies, ceiling, rtol, max_iter, v1, v2, ionic_out):
    """Problem ``kind`` for every water: the values of the pass at which its
    ionic strength settled into ``v1`` and ``v2`` (``v1`` NaN if it did not),
    that ionic strength into ``ionic_out``. The fixed point starts from
    ``start`` and is :func:`dosing.chem.solvers.settle`'s own secant path;
    the ideal solution takes one pass (its ionic strength is the pass's)."""
    one = k.shape[0] == 1
    power = np.empty(6)
    za = charge_index(z)
    for i in range(ah.shape[0]):
        ki = 0 if one else i
        inv = 1.0 / ah[i]
        x_prev = start[i]
        d, den, x = _one_pass(kind, i, ki, ah[i], inv, x_prev, k, z, kw, a, totals, strong,
                              strong_i, n_r, r_strong, r_vol, r_ionic, extra, known, davies,
                              ceiling, power, za)
        if not davies:
            v1[i], v2[i], ionic_out[i] = d, den, x
            continue
        g_prev = x - x_prev
        out_d, out_s, out_x = d, den, math.nan     # kept from the first step if unsettled
        first = True
        for _ in range(max_iter):
            d, den, fx = _one_pass(kind, i, ki, ah[i], inv, x, k, z, kw, a, totals, strong,
                                   strong_i, n_r, r_strong, r_vol, r_ionic, extra, known,
                                   davies, ceiling, power, za)
            if first:
                out_d, out_s, first = d, den, False
            g = fx - x
            if abs(g) <= 1e-13 + rtol * abs(fx):
                out_d, out_s, out_x = d, den, fx
                break
            if not (math.isfinite(fx) and fx < ceiling):
                break
            x, x_prev, g_prev = secant(x, x_prev, g, g_prev, fx), x, g
        v1[i] = out_d if math.isfinite(out_x) else math.nan
        v2[i], ionic_out[i] = out_s, out_x


@njit(cache=True, error_model="numpy")
def _ideal_dose(ah, k, z, kw, a, totals, strong, strong_i, n_r, r_strong, r_vol, r_ionic,
                ceiling, rtol, max_iter, dose, slope, ionic_out):
    _rows(0, ah, k, z, kw, a, totals, strong_i, strong, strong_i, n_r, r_strong, r_vol,
          r_ionic, strong, strong, False, ceiling, rtol, max_iter, dose, slope, ionic_out)


@njit(cache=True, error_model="numpy")
def _davies_dose(ah, k, z, kw, a, totals, strong, strong_i, n_r, r_strong, r_vol, r_ionic,
                 ceiling, rtol, max_iter, dose, slope, ionic_out):
    _rows(0, ah, k, z, kw, a, totals, strong_i, strong, strong_i, n_r, r_strong, r_vol,
          r_ionic, strong, strong, True, ceiling, rtol, max_iter, dose, slope, ionic_out)


@njit(cache=True, error_model="numpy")
def _ideal_strong(ah, k, z, kw, a, totals, start, extra, known, ceiling, rtol, max_iter,
                  s_out, spare, ionic_out):
    _rows(1, ah, k, z, kw, a, totals, start, extra, extra, extra, 0.0, 0.0, 0.0, extra, known,
          False, ceiling, rtol, max_iter, s_out, spare, ionic_out)


@njit(cache=True, error_model="numpy")
def _davies_strong(ah, k, z, kw, a, totals, start, extra, known, ceiling, rtol, max_iter,
                   s_out, spare, ionic_out):
    _rows(1, ah, k, z, kw, a, totals, start, extra, extra, extra, 0.0, 0.0, 0.0, extra, known,
          True, ceiling, rtol, max_iter, s_out, spare, ionic_out)


def dose_rows(ah, k, z, kw, a, totals, strong, strong_i, n_r, r_strong, r_vol, r_ionic,
              davies, ceiling, rtol, max_iter, dose, slope, ionic_out):
    """Dose [mol/L] and slope [eq/mol] of every water, written into ``dose``
    and ``slope`` (and the settled ionic strength into ``ionic_out``). The
    constants ``k``, ``kw`` and ``a`` have one row per water, or one row for
    all. The ideal and the Davies loops are compiled apart, each without
    the other's branches."""
    run = _davies_dose if davies else _ideal_dose
    run(ah, k, z, kw, a, totals, strong, strong_i, n_r, r_strong, r_vol, r_ionic, ceiling,
        rtol, max_iter, dose, slope, ionic_out)


def strong_rows(ah, k, z, kw, a, totals, start, extra, known, davies, ceiling, rtol,
                max_iter, s_out, ionic_out):
    """The strong-ion balance S [eq/L] that puts each water at its pH, and
    its ionic strength [mol/L] (``extra``: known strong ions' ionic strength;
    ``known``: their net charge; the rest of S counted as monovalent), as
    :func:`dosing.chem.solvers.strong_balance_at_ph` finds them."""
    run = _davies_strong if davies else _ideal_strong
    run(ah, k, z, kw, a, totals, start, extra, known, ceiling, rtol, max_iter, s_out,
        np.empty_like(s_out), ionic_out)
