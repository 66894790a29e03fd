"""The per-water loop of the coupled speciation, compiled (numba).

The equations and the active-set rule are those of :mod:`.coupled`
(:func:`.coupled.equilibrate_reference` is the numpy version, every water at
once, and the two are tested against each other); this module runs them
water by water in compiled code, where a Newton step on a 10-by-10 system
costs about a microsecond instead of the tens that a batched
``numpy.linalg.solve`` over a shrinking subset costs. Two things make it
cheaper than a literal translation:

* the Newton system holds only the columns present and the solids present
  (an absent solid's row is not carried as an identity row);
* on a cold start, a solid of one component (a hydroxide at a fixed pH)
  that the total alone oversaturates is taken as present from the start,
  with its column at the solubility; the active-set rule drops it again if
  complexes pull the column below it.

Everything here is pure: arrays in, arrays out (in place).
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["solve_rows", "STEP", "LN_CAP", "ABSENT", "F_TOL", "G_TOL"]

#: Largest change of ln U in one Newton step (a factor of e^4, about 55).
STEP = 4.0
#: Largest ln c a trial may take (far above any real concentration).
LN_CAP = 50.0
#: ln U standing for an absent column: its complexes vanish.
ABSENT = -1e4
#: Mass balances to this fraction of each total; solids' log IAP to this.
F_TOL, G_TOL = 1e-11, 1e-10
#: Passes of the positive-continued-fraction start on a cold start.
PCF_PASSES = 6


@njit(cache=True)
def _complexes(sj, sn, lk, y, live, c):
    """c_s = exp(L_s + sum_j n_sj y_j) (absent columns make them vanish).

    ``sj``/``sn`` (ns, P) list each complex's columns and counts, -1 padded."""
    for s in range(sj.shape[0]):
        e = lk[s]
        for t in range(sj.shape[1]):
            j = sj[s, t]
            if j < 0:
                break
            e += sn[s, t] * (y[j] if live[j] else ABSENT)
        c[s] = np.exp(min(e, LN_CAP))


@njit(cache=True)
def _dissolved(sj, sn, y, live, c, out):
    """Dissolved total of each column: U_j + sum_s n_sj c_s."""
    for j in range(out.size):
        out[j] = np.exp(y[j]) if live[j] else 0.0
    for s in range(sj.shape[0]):
        for t in range(sj.shape[1]):
            j = sj[s, t]
            if j < 0:
                break
            out[j] += sn[s, t] * c[s]


@njit(cache=True)
def _warm_start(sj, sn, totals, lk, y, live, fixed, c, s_tot, top):
    """U_j <- U_j (T_j / S_j)^(1/n_j), S_j the dissolved total U gives
    (Carrayrou et al. 2002); columns ``fixed`` by a solid keep their value."""
    for _ in range(PCF_PASSES):
        _complexes(sj, sn, lk, y, live, c)
        _dissolved(sj, sn, y, live, c, s_tot)
        for j in range(y.size):
            if live[j] and not fixed[j]:
                y[j] += np.log(totals[j] / s_tot[j]) / top[j]


@njit(cache=True)
def _lu_solve(a, b, k):
    """Solve the leading k-by-k block a x = b in place (b holds x); partial pivots."""
    for col in range(k):
        piv = col
        big = abs(a[col, col])
        for r in range(col + 1, k):
            if abs(a[r, col]) > big:
                big, piv = abs(a[r, col]), r
        if piv != col:
            for q in range(k):
                a[col, q], a[piv, q] = a[piv, q], a[col, q]
            b[col], b[piv] = b[piv], b[col]
        p = a[col, col]
        if abs(p) < 1e-300:
            p = 1e-300
            a[col, col] = p
        for r in range(col + 1, k):
            m = a[r, col] / p
            if m != 0.0:
                for q in range(col, k):
                    a[r, q] -= m * a[col, q]
                b[r] -= m * b[col]
    for col in range(k - 1, -1, -1):
        acc = b[col]
        for q in range(col + 1, k):
            acc -= a[col, q] * b[q]
        b[col] = acc / a[col, col]


@njit(cache=True)
def _residuals(sj, sn, pj, pn, totals, lp, y, x, live, active, c, f, g):
    """Mass balances f (scaled by the totals) and solids' log IAP g; True if
    every one is within its tolerance. ``pj``/``pn``: the solids' columns
    and counts, as ``sj``/``sn`` are the complexes'."""
    _dissolved(sj, sn, y, live, c, f)
    for p in range(pj.shape[0]):
        acc = lp[p]
        for t in range(pj.shape[1]):
            j = pj[p, t]
            if j < 0:
                break
            acc += pn[p, t] * (y[j] if live[j] else ABSENT)
            if active[p]:
                f[j] += pn[p, t] * x[p]
        g[p] = acc
    ok = True
    for j in range(f.size):
        if live[j]:
            f[j] = (f[j] - totals[j]) / totals[j]
            if abs(f[j]) > F_TOL:
                ok = False
    for p in range(g.size):
        if active[p] and abs(g[p]) > G_TOL:
            ok = False
    return ok


@njit(cache=True)
def _newton_step(sj, sn, pj, pn, totals, y, x, live, active, c, f, g, jac, rhs, pos):
    """One Newton step of the KKT system over the live columns and active
    solids only (rows of the mass balances scaled by their totals)."""
    kc, npx = y.size, x.size
    k = 0
    for j in range(kc):
        pos[j] = k if live[j] else -1
        k += 1 if live[j] else 0
    for p in range(npx):
        pos[kc + p] = k if active[p] else -1
        k += 1 if active[p] else 0
    for r in range(k):
        for q in range(k):
            jac[r, q] = 0.0
    for j in range(kc):
        if pos[j] >= 0:
            jac[pos[j], pos[j]] = np.exp(y[j])
            rhs[pos[j]] = -f[j]
    for s in range(sj.shape[0]):
        if c[s] == 0.0:
            continue
        for a in range(sj.shape[1]):
            ja = sj[s, a]
            if ja < 0:
                break
            if pos[ja] < 0:
                continue
            w = c[s] * sn[s, a]
            for b in range(sj.shape[1]):
                jb = sj[s, b]
                if jb < 0:
                    break
                if pos[jb] >= 0:
                    jac[pos[ja], pos[jb]] += w * sn[s, b]
    for p in range(npx):
        r = pos[kc + p]
        if r < 0:
            continue
        for t in range(pj.shape[1]):
            j = pj[p, t]
            if j < 0:
                break
            if pos[j] >= 0:
                jac[pos[j], r] = pn[p, t]
                jac[r, pos[j]] = pn[p, t]
        rhs[r] = -g[p]
    for j in range(kc):
        r = pos[j]
        if r >= 0:
            inv = 1.0 / totals[j]
            for q in range(k):
                jac[r, q] *= inv
    _lu_solve(jac, rhs, k)
    for j in range(kc):
        if pos[j] >= 0:
            y[j] += min(max(rhs[pos[j]], -STEP), STEP)
    for p in range(npx):
        x[p] = x[p] + rhs[pos[kc + p]] if active[p] else 0.0


@njit(cache=True)
def _change_solid(g, x, active, held):
    """Drop the most negative solid, else add the most supersaturated one;
    True if the set changed."""
    worst, k = -1e-15, -1
    for p in range(x.size):
        if active[p] and not held[p] and x[p] < worst:
            worst, k = x[p], p
    if k >= 0:
        active[k] = False
        x[k] = 0.0
        return True
    best, k = 1e-9, -1
    for p in range(x.size):
        if not active[p] and g[p] > best:
            best, k = g[p], p
    if k >= 0:
        active[k] = True
        return True
    return False


@njit(cache=True)
def _cold_start(sj, sn, pj, pn, totals, lk, lp, y, x, active, live, fixed, c, s_tot, top):
    """ln U at the totals; a one-component solid the total oversaturates is
    taken as present with its column at the solubility; then the
    positive-continued-fraction passes for the other columns."""
    for j in range(y.size):
        fixed[j] = False
        if live[j]:
            y[j] = np.log(totals[j])
    for p in range(x.size):
        j = pj[p, 0]
        if pj.shape[1] > 1 and pj[p, 1] >= 0:
            continue
        if not live[j] or fixed[j] or active[p]:
            continue
        at = -lp[p] / pn[p, 0]
        if y[j] > at:
            y[j], fixed[j], active[p] = at, True, True
            x[p] = 0.0
    _warm_start(sj, sn, totals, lk, y, live, fixed, c, s_tot, top)


@njit(cache=True)
def _one_water(sj, sn, pj, pn, top, totals, lk, lp, held, y, x, active, c, cold, max_iter,
               f, g, jac, rhs, pos, live, fixed):
    """Equilibrate one water in place; (the Newton steps it took, whether it settled)."""
    for j in range(y.size):
        live[j] = totals[j] > 0.0
        if not live[j]:
            y[j] = -np.inf
        elif not cold:
            y[j] = max(y[j], -700.0)
    for p in range(x.size):
        active[p] = active[p] or held[p]
        if not active[p]:
            x[p] = 0.0
    if cold:
        _cold_start(sj, sn, pj, pn, totals, lk, lp, y, x, active, live, fixed, c, f, top)
    steps, ok = 0, False
    for _ in range(2 * x.size + 2):
        for _it in range(max_iter):
            _complexes(sj, sn, lk, y, live, c)
            if _residuals(sj, sn, pj, pn, totals, lp, y, x, live, active, c, f, g):
                break
            _newton_step(sj, sn, pj, pn, totals, y, x, live, active, c, f, g, jac, rhs, pos)
            steps += 1
        _complexes(sj, sn, lk, y, live, c)
        ok = _residuals(sj, sn, pj, pn, totals, lp, y, x, live, active, c, f, g)
        if not _change_solid(g, x, active, held):
            break
        ok = False
    for s in range(sj.shape[0]):
        for t in range(sj.shape[1]):
            j = sj[s, t]
            if j < 0:
                break
            if not live[j]:
                c[s] = 0.0
    return steps, ok


@njit(cache=True)
def solve_rows(sj, sn, pj, pn, totals, lk, lp, held, y, x, active, c, cold, max_iter):
    """Equilibrate every water (row) in place; the Newton steps of each.

    ``sj``, ``sn`` and ``pj``, ``pn`` are the complexes' and solids'
    stoichiometry as :func:`.coupled.sparse` lists them."""
    n, kc = totals.shape
    npx = x.shape[1]
    steps = np.zeros(n, dtype=np.int64)
    f, g = np.empty(kc), np.empty(npx)
    jac, rhs = np.empty((kc + npx, kc + npx)), np.empty(kc + npx)
    pos = np.empty(kc + npx, dtype=np.int64)
    live, fixed = np.empty(kc, dtype=np.bool_), np.empty(kc, dtype=np.bool_)
    top = np.ones(kc)
    for s in range(sj.shape[0]):
        for t in range(sj.shape[1]):
            if sj[s, t] >= 0:
                top[sj[s, t]] = max(top[sj[s, t]], sn[s, t])
    for i in range(n):
        if cold and i > 0 and _near(totals[i - 1], totals[i], y[i - 1]):
            # Start from the row before (rows are often variants of one water:
            # logged rows, samples, a curve): its ln U moved by the change of
            # each total, its solids as they were; a cold start if that fails.
            for j in range(kc):
                y[i, j] = y[i - 1, j] + np.log(totals[i, j] / totals[i - 1, j]) \
                    if totals[i, j] > 0.0 else 0.0
            for p in range(npx):
                active[i, p], x[i, p] = active[i - 1, p], x[i - 1, p]
            steps[i], ok = _one_water(sj, sn, pj, pn, top, totals[i], lk[i], lp[i], held[i],
                                      y[i], x[i], active[i], c[i], False, max_iter, f, g,
                                      jac, rhs, pos, live, fixed)
            if ok:
                continue
            for p in range(npx):
                active[i, p], x[i, p] = False, 0.0
        steps[i], ok = _one_water(sj, sn, pj, pn, top, totals[i], lk[i], lp[i], held[i],
                                  y[i], x[i], active[i], c[i], cold, max_iter, f, g, jac,
                                  rhs, pos, live, fixed)
    return steps


@njit(cache=True)
def _near(before, now, y_before):
    """The row before is a start for this one: the same columns present,
    each total within a factor of 3, and its answer finite."""
    for j in range(now.size):
        if (before[j] > 0.0) != (now[j] > 0.0):
            return False
        if now[j] > 0.0 and (now[j] > 3.0 * before[j] or before[j] > 3.0 * now[j]
                             or not np.isfinite(y_before[j])):
            return False
    return True
