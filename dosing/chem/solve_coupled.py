"""The pH of waters whose components couple: a bracketed root search, each trial warm-started.

The charge residual R(pH) of a coupled water is strictly decreasing in pH at
a fixed ionic strength, but each evaluation is an equilibrium solve
(:func:`.coupled.equilibrate`) and R has kinks where a solid appears or
vanishes. So each water runs:

* Newton steps with the last slope (first the buffer intensity of the
  uncoupled view, then secants) until a sign change brackets the root;
* then false position with the Illinois change (Dowell & Jarratt 1971):
  the end kept twice in a row has its residual halved, which keeps the
  order above one even across a kink, where plain false position crawls.

The search runs at a fixed ionic strength per water, so its bracket holds.
When it has settled, the ionic strength its answer implies replaces the one
it ran at (by a secant on that fixed point after the first pass) and, if it
moved, the search resumes from there with its last slope.

References
----------
Dowell, M.; Jarratt, P. (1971). A modified regula falsi method for computing
the root of an equation. BIT 11, 168-174 (from memory).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..errors import ModelError
from .coupled import Core, coupled_balance
from .speciation import Rows, balance, species_at

__all__ = ["ph_coupled", "FixedPointSecant"]

_LO, _HI = -1.5, 15.5
#: Largest Newton step before the root is bracketed [pH units].
_REACH = 1.5


def _trial(rows: Rows, ph, ionic, core):
    """Residual [eq/L], new ionic strength and core of the waters at ``ph``."""
    ah = 10.0 ** -ph
    b = coupled_balance(rows.tab, rows, species_at(rows, ah, ionic), ah, ionic, core)
    return b.residual, b.ionic, b.core


def _put(core: Core, idx, part: Core) -> None:
    core.y[idx], core.x[idx], core.active[idx], core.c[idx] = \
        part.y, part.x, part.active, part.c


@dataclass
class _Search:
    """Per-water state of the root search (arrays of n)."""

    a: np.ndarray        #: highest pH known with R > 0 (nan: none yet)
    fa: np.ndarray
    b: np.ndarray        #: lowest pH known with R <= 0 (nan: none yet)
    fb: np.ndarray
    side: np.ndarray     #: end the last trial replaced (+1 a, -1 b, 0 none)
    slope: np.ndarray    #: last dR/dpH seen (< 0)
    last_x: np.ndarray
    last_r: np.ndarray

    @classmethod
    def start(cls, n: int, slope: np.ndarray) -> "_Search":
        nan = np.full(n, np.nan)
        return cls(nan.copy(), nan.copy(), nan.copy(), nan.copy(), np.zeros(n), slope,
                   nan.copy(), nan.copy())

    def reset(self, w) -> None:
        """Forget the bracket of waters ``w`` (their ionic strength moved)."""
        for arr in (self.a, self.fa, self.b, self.fb, self.last_x, self.last_r):
            arr[w] = np.nan
        self.side[w] = 0

    def record(self, w, x, r) -> np.ndarray:
        """Take trial (x, r) of waters ``w``; return their next trial."""
        with np.errstate(divide="ignore", invalid="ignore"):
            sec = (r - self.last_r[w]) / (x - self.last_x[w])
        self.slope[w] = np.where(np.isfinite(sec) & (sec < 0), sec, self.slope[w])
        self.last_x[w], self.last_r[w] = x, r
        pos = r > 0
        new_side = np.where(pos, 1.0, -1.0)
        twice = self.side[w] == new_side
        # Illinois: the end not replaced, kept twice running, has its residual halved.
        self.fb[w] = np.where(pos & twice, 0.5 * self.fb[w], self.fb[w])
        self.fa[w] = np.where(~pos & twice, 0.5 * self.fa[w], self.fa[w])
        self.a[w], self.fa[w] = np.where(pos, x, self.a[w]), np.where(pos, r, self.fa[w])
        self.b[w], self.fb[w] = np.where(pos, self.b[w], x), np.where(pos, self.fb[w], r)
        self.side[w] = new_side
        return self._next(w, x, r)

    def _next(self, w, x, r) -> np.ndarray:
        a, fa, b, fb = self.a[w], self.fa[w], self.b[w], self.fb[w]
        both = np.isfinite(a) & np.isfinite(b)
        with np.errstate(divide="ignore", invalid="ignore"):
            fp = a - fa * (b - a) / (fb - fa)
            newton = x - r / self.slope[w]
        newton = np.clip(np.where(np.isfinite(newton), newton, x), x - _REACH, x + _REACH)
        lo = np.where(np.isfinite(a), a, _LO)
        hi = np.where(np.isfinite(b), b, _HI)
        guess = np.where(both, fp, newton)
        inside = np.isfinite(guess) & (guess > lo) & (guess < hi)
        return np.where(inside, guess, 0.5 * (lo + hi))

    def width(self, w) -> np.ndarray:
        return np.where(np.isfinite(self.a[w]) & np.isfinite(self.b[w]),
                        np.abs(self.b[w] - self.a[w]), np.inf)


def ph_coupled(rows: Rows, ph0: np.ndarray, ionic0: np.ndarray, tol_ph: float = 1e-10,
               max_iter: int = 150) -> np.ndarray:
    """Activity pH of every water of a coupled view (see the module notes).

    Raises
    ------
    ModelError
        If any water fails to converge (the message gives how many).
    """
    n = ph0.size
    ideal = rows.activity.ideal
    x = np.clip(ph0, _LO + 1e-9, _HI - 1e-9)
    ionic = ionic0.copy()
    _, new_i, core = _trial(rows, x, ionic, None)
    if not ideal:
        ionic, core = _settle_ionic(rows, x, ionic, new_i, core, tol_ph)
    search, nxt = _primed(rows, x, ionic, core)
    fixed = FixedPointSecant.start(n)
    live = np.arange(n)
    for _ in range(max_iter):
        sub = rows.take(live)
        xs = nxt[live]
        rs, ni, c = _trial(sub, xs, ionic[live], core.take(live))
        _put(core, live, c)
        step = search.record(live, xs, rs)
        x[live] = xs
        # Settled at this ionic strength: a step below the tolerance, a closed
        # bracket, or a residual at the resolution of the inner solve (mass
        # balances to 1e-11 of each total, H+ and OH- to their rounding).
        floor = 1e-11 * (np.abs(sub.strong) + sub.totals.sum(axis=1)
                         + 10.0 ** -xs + 10.0 ** (xs - 14.0)) + 1e-17
        settled = ((np.abs(step - xs) < tol_ph) | (search.width(live) < tol_ph)
                   | (np.abs(rs) <= floor))
        # The ionic strength is settled to the pH tolerance asked (a relative
        # change of I moves the pH by less than about that much).
        moved = np.zeros(live.size, dtype=bool) if ideal else \
            np.abs(ni - ionic[live]) > 1e-12 + max(1e-9, tol_ph) * ni
        again = settled & moved
        if again.any():
            w = live[again]
            ionic[w] = fixed.next(w, ionic[w], ni[again])
            search.reset(w)
            step[again] = xs[again]
        nxt[live] = step
        live = live[~(settled & ~moved)]
        if not live.size:
            return x
    raise ModelError(f"pH solve did not converge for {live.size} of {n} waters")


#: pH step of the priming secant [pH].
_PRIME_DPH = 1e-3


def _primed(rows: Rows, x, ionic, core) -> tuple["_Search", np.ndarray]:
    """The search primed with two trials at the start (``x`` and ``x`` +
    :data:`_PRIME_DPH`): their secant is the first slope, which sees the
    solids' buffering that the uncoupled view's buffer intensity misses.
    Returns the search and the next trial of every water."""
    n = x.size
    beta = balance(replace(rows, tab=None), species_at(rows, 10.0 ** -x, ionic)).beta
    search = _Search.start(n, -np.maximum(beta, 1e-300))
    every = np.arange(n)
    r0, _, core = _trial(rows, x, ionic, core)
    search.record(every, x, r0)
    x1 = np.minimum(x + _PRIME_DPH, _HI - 1e-9)
    r1, _, _ = _trial(rows, x1, ionic, core)
    return search, search.record(every, x1, r1)


#: Passes of the ionic strength's fixed point at the starting pH.
_START_PASSES = 8


def _settle_ionic(rows: Rows, x, used, implied, core, tol_ph: float):
    """The ionic strength settled at the starting pH ``x`` (near the root, so
    near the root's), by secant steps on its fixed point: a start far off
    (strong ions only, where gypsum or a metal carries the ionic strength)
    would cost a fresh root search for every correction later."""
    secant = FixedPointSecant.start(x.size)
    ionic = used.copy()
    for _ in range(_START_PASSES):
        far = np.abs(implied - ionic) > 1e-12 + max(1e-6, tol_ph) * implied
        if not far.any():
            break
        w = np.flatnonzero(far)
        ionic[w] = secant.next(w, ionic[w], implied[w])
        _, got, part = _trial(rows.take(w), x[w], ionic[w], core.take(w))
        implied = implied.copy()
        implied[w] = got
        _put(core, w, part)
    return implied, core


@dataclass
class FixedPointSecant:
    """Secant acceleration of the ionic strength's fixed point I = g(I)."""

    i_in: np.ndarray
    i_out: np.ndarray

    @classmethod
    def start(cls, n: int) -> "FixedPointSecant":
        return cls(np.full(n, np.nan), np.full(n, np.nan))

    def next(self, w, used: np.ndarray, implied: np.ndarray) -> np.ndarray:
        """The ionic strength to run at next, from the one used and the one implied."""
        with np.errstate(divide="ignore", invalid="ignore"):
            d0 = self.i_out[w] - self.i_in[w]
            d1 = implied - used
            s = used - d1 * (used - self.i_in[w]) / (d1 - d0)
        ok = np.isfinite(s) & (s > 0) & (np.abs(s - implied) <= 2.0 * np.abs(d1))
        self.i_in[w], self.i_out[w] = used, implied
        return np.where(ok, s, implied)
