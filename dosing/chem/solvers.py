"""The solvers: the pH of a water, and the strong-ion balance that puts a water at a pH.

:func:`solve_ph` is the forward problem, a safeguarded Newton iteration on
pH over the whole array (the charge residual is strictly decreasing in pH,
so the root is unique). :func:`strong_balance_at_ph` is a direct solve at
the measured pH. :func:`settle` is the ionic-strength fixed point (secant
accelerated) that every Davies solve shares.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..errors import ModelError
from .activity import ActivityModel
from .fast import compiled, kernel_constants, simple_rows
from .mixture import Mixture
from .solve_coupled import ph_coupled
from .speciation import I_CEILING, Rows, restrict, rows_state

__all__ = ["solve_ph", "strong_balance_at_ph", "settle", "SETTLE_RTOL"]

def solve_ph(mix: Mixture, *, ph_guess=None, tol_ph: float = 1e-12,
             max_iter: int = 200) -> np.ndarray:
    """Activity pH of every water of ``mix`` (the forward problem).

    Safeguarded Newton on pH in the bracket [-1.5, 15.5]: R(pH) is strictly
    decreasing, so the sign of R moves one end of the bracket each step, and
    a Newton step that leaves the bracket is replaced by bisection. Each
    water stops on its own once converged. With the Davies model the ionic
    strength is updated along the way, then the result is polished at a
    fixed ionic strength until that strength no longer changes.

    Raises
    ------
    ModelError
        If any water fails to converge (the message gives how many).
    """
    rows = restrict(mix)
    ionic = mix.strong_ionic_strength.copy()
    ph = np.full(mix.n, 7.0) if ph_guess is None else np.broadcast_to(
        np.asarray(ph_guess, dtype=float), (mix.n,)).copy()
    if rows.tab is not None:
        return ph_coupled(rows, ph, ionic, max(tol_ph, 1e-10), max_iter)
    ph, ionic = _newton(rows, ph, ionic, tol_ph, max_iter, not mix.activity.ideal)
    if mix.activity.ideal:
        return ph
    # Polish at a fixed ionic strength (full bracket) until it holds still;
    # only the waters not yet consistent are solved again, and the ionic
    # strength moves by secant steps on g(I) = I(pH(I)) - I.
    idx = np.arange(mix.n)
    x_prev = np.full(mix.n, np.nan)
    g_prev = np.full(mix.n, np.nan)
    for _ in range(60):
        sub = rows.take(idx)
        x = ionic[idx]
        p, _ = _newton(sub, ph[idx], x, tol_ph, max_iter, False)
        fx = rows_state(sub, p, x, beta=False)[2]
        g = fx - x
        ok = np.abs(g) <= 1e-13 + 1e-10 * fx
        ph[idx] = p
        with np.errstate(divide="ignore", invalid="ignore"):
            sec = x - g * (x - x_prev[idx]) / (g - g_prev[idx])
        step = np.where(np.isfinite(sec) & (sec >= 0.0), sec, fx)
        ionic[idx] = np.where(ok, fx, step)
        x_prev[idx], g_prev[idx] = x, g
        idx = idx[~ok]
        if idx.size == 0:
            return ph
    raise ModelError(f"ionic strength did not settle while solving pH for "
                     f"{idx.size} of {mix.n} waters")


#: Newton steps before every third step is a bisection (see _newton).
_NEWTON_FREE_STEPS = 24


#: Newton steps during which the ionic strength moves with the pH; after
#: that it is held, and solve_ph's polishing loop settles it.
_JOINT_STEPS = 30


def _newton(rows: Rows, ph, ionic, tol_ph, max_iter, update_ionic):
    n = ph.shape[0]
    ph = np.clip(ph, -1.5 + 1e-9, 15.5 - 1e-9)
    ionic = ionic.copy()
    lo = np.full(n, -1.5)
    hi = np.full(n, 15.5)
    live = np.arange(n)
    for it in range(max_iter):
        sub = rows if live.size == n else rows.take(live)
        resid, beta, new_i = rows_state(sub, ph[live], ionic[live])
        p, l, u = ph[live], lo[live], hi[live]
        # R decreasing in pH: R > 0 means the root lies above p.
        l = np.where(resid > 0, p, l)
        u = np.where(resid <= 0, p, u)
        step = resid / np.maximum(beta, 1e-300)      # Newton: dR/dpH = -beta
        new = p + step
        # Converged: a step below tolerance, or a residual at the rounding
        # level of the largest terms in the balance (1 mol/L salts).
        scale = np.abs(sub.strong) + np.abs(sub.totals).sum(-1) + 10.0 ** -p
        small = (np.abs(step) < tol_ph) | (np.abs(resid) <= 8 * np.finfo(float).eps * scale)
        # The bracket is closed: the root may sit exactly on an end.
        bad = ~small & (~((new >= l) & (new <= u)) | ~np.isfinite(new))
        if it >= _NEWTON_FREE_STEPS and it % 3 == 0:
            # Newton can stall across a kink (a hydroxide starting to form):
            # every third step from here on bisects, so the bracket halves.
            bad = ~small
        new = np.where(bad, 0.5 * (l + u), new)
        done = small | (u - l < tol_ph)
        if update_ionic and it < _JOINT_STEPS:
            # The bracket was found at the old ionic strength: loosen it a
            # little so the moving root stays inside; solve_ph's polish
            # re-solves with a full bracket and settles the strength.
            changed = np.abs(new_i - ionic[live]) > 1e-13 + 1e-10 * new_i
            l = np.where(changed, np.maximum(l - 0.1, -1.5), l)
            u = np.where(changed, np.minimum(u + 0.1, 15.5), u)
            ionic[live] = new_i
        ph[live], lo[live], hi[live] = new, l, u
        live = live[~done]
        if live.size == 0:
            return ph, ionic
    raise ModelError(f"pH solve did not converge for {live.size} of {n} waters")


def strong_balance_at_ph(totals_mol_l, ph, temperature_c, *, activity: ActivityModel,
                         extra_ionic_strength=0.0, co2_air_mol_l=np.nan,
                         max_iter: int = 60, unknown_pka=None,
                         known_strong_eq_l=0.0, solids: bool = False,
                         calcite: bool = False, ionic_guess=None, shift=None):
    """Strong-ion balance S [eq/L] that puts each water at ``ph`` (direct).

    Every metal is taken as dissolved (the water as sampled), unless
    ``solids``: then each metal is capped at its hydroxide's solubility (a
    reading taken in a dosed tank, where the solids have formed; with
    ``calcite`` too, calcite has formed). For the ionic
    strength, ``extra_ionic_strength`` [mol/L] counts the strong ions that
    are known (measured sodium, chloride ... with their charges, or a known
    salt load), ``known_strong_eq_l`` [eq/L] is their net charge, and the
    rest of S, S - known, is taken as monovalent. Where the ionic strength
    does not settle, S is NaN. ``ionic_guess`` [mol/L], if given, starts the
    ionic-strength iteration (fewer steps; the same answer). ``shift`` (a
    :class:`~dosing.chem.mixture.LogKShift`) moves the model's constants
    per water.

    Returns
    -------
    (strong_eq_l, ionic_strength) : tuple of ndarray
    """
    ph = np.atleast_1d(np.asarray(ph, dtype=float))
    mix = Mixture.build(totals_mol_l, np.zeros_like(ph), extra_ionic_strength,
                        temperature_c, co2_air_mol_l, activity, unknown_pka, shift)
    extra = mix.strong_ionic_strength
    known = np.broadcast_to(np.asarray(known_strong_eq_l, dtype=float), ph.shape)
    bare = replace(mix, strong_eq_l=np.zeros(mix.n), strong_ionic_strength=np.zeros(mix.n),
                   calcite=calcite)
    rows = restrict(bare, cap=solids)
    i0 = extra if ionic_guess is None else np.broadcast_to(
        np.asarray(ionic_guess, dtype=float), ph.shape) + 0.0 * extra
    if compiled(ph.shape[0]) is not None and simple_rows(rows, activity):
        return _compiled_strong(rows, ph, i0, extra, known, activity, max_iter)
    # A species-wise model (SIT) needs the strong ions in the water's medium:
    # the view carries the balance found at the last step (the residual is
    # linear in it, so the new balance is the old one minus the residual).
    wise = not activity.charge_only
    last = np.zeros(ph.shape)

    def at(ionic):
        view = replace(rows, strong=last, strong_i=extra + 0.5 * np.abs(last - known)) \
            if wise else rows
        resid, _, i_weak = rows_state(view, ph, ionic, beta=False)
        s = view.strong - resid
        if wise:
            last[:] = np.where(np.isfinite(s), s, 0.0)
            i_weak = i_weak - view.strong_i
        return s, i_weak + extra + 0.5 * np.abs(s - known)

    # A guess near the answer (a replay's rows are close to the scenario's
    # water) saves steps of the fixed point; the answer does not depend on it.
    s, i1 = at(i0)
    if activity.ideal:
        return s, i1
    # Each water keeps S from the step at which its ionic strength settled.
    ionic, (s,) = settle(lambda i: at(i)[::-1], i0, i1, max_iter, payload=True)
    return np.where(np.isfinite(ionic), s, np.nan), ionic


def _compiled_strong(rows, ph, i0, extra, known, activity, max_iter):
    """(S, ionic strength) of :func:`strong_balance_at_ph` from the compiled loop."""
    n = ph.shape[0]
    k, kw, a = kernel_constants(rows, n)
    s, ionic = np.empty(n), np.empty(n)
    f = np.ascontiguousarray
    compiled(n).strong_rows(f(10.0 ** -ph, dtype=float), k, f(rows.z, dtype=float), kw, a,
                            f(rows.totals, dtype=float),
                            f(np.broadcast_to(i0, (n,)), dtype=float),
                            f(np.broadcast_to(extra, (n,)), dtype=float),
                            f(np.broadcast_to(known, (n,)), dtype=float), not activity.ideal,
                            I_CEILING, SETTLE_RTOL, max_iter, s, ionic)
    return s, ionic


#: Relative change of the ionic strength at which :func:`_settle` stops.
#: The secant converges fast, so the ionic strength is then within about
#: 1e-10 of its fixed point; measured on three demos (20,000 waters each,
#: dose and strong balance), doses differ from those at 1e-10 by at most
#: 1.1e-10 relative, far inside the 1e-4 at which outside solvers are
#: checked. It saves one pass of four in the dose solve.
SETTLE_RTOL = 1e-8


def settle(fn, x0, x1, max_iter, *, payload: bool = False):
    """Fixed point x = fn(x) for every element, with secant acceleration.

    Each step takes the secant root of g(x) = fn(x) - x through the last two
    points when it is positive and finite, else the plain fixed-point step.
    Elements that do not settle within ``max_iter`` steps or pass
    :data:`I_CEILING` come back as NaN.

    With ``payload``, ``fn`` returns ``(fx, *arrays)`` (arrays with one row
    per element, or None) and the result is ``(x, arrays)``: each element's
    rows from the step at which it settled (from the first step for those
    that never settle).
    """
    x_prev, g_prev = x0, x1 - x0
    x = x1
    out = np.full_like(x0, np.nan)
    live = np.ones(x0.shape, dtype=bool)
    kept = None
    for _ in range(max_iter):
        fx, *extra = fn(x) if payload else (fn(x),)
        if kept is None:
            kept = [None if e is None else e.copy() for e in extra]
        g = fx - x
        done = live & (np.abs(g) <= 1e-13 + SETTLE_RTOL * np.abs(fx))
        out[done] = fx[done]
        for k, e in zip(kept, extra):
            if k is not None:
                k[done] = e[done]
        live &= ~done & np.isfinite(fx) & (fx < I_CEILING)
        if not live.any():
            break
        with np.errstate(divide="ignore", invalid="ignore"):
            sec = x - g * (x - x_prev) / (g - g_prev)
        step = np.where(np.isfinite(sec) & (sec >= 0.0), sec, fx)
        x_prev, g_prev = x, g
        x = np.where(live, step, x)
    return (out, tuple(kept)) if payload else out
