"""The dose that brings each water to a target pH: a direct solve at that pH.

Multiplying the charge balance after the dose by the dilution factor makes
it linear in the dose, with every fraction taken at the target; phases that
hold a concentration there (CO2 from air, a hydroxide, calcite) keep it
linear or quadratic. Only the ionic strength of the dosed water needs a
fixed point.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import NamedTuple

import numpy as np

from .dose_coupled import dose_coupled
from .mixture import Mixture, ReagentVector
from .fast import DOSE_KERNEL, compiled, kernel_constants, simple_rows
from .medium import I_CEILING
from .solvers import SETTLE_RTOL, settle
from .speciation import Rows, capped_mask, restrict, species_at

__all__ = ["dose_to_ph", "DoseStep", "DOSE_KERNEL"]


def _compiled(mix: Mixture, rows: Rows, n_r: np.ndarray, reagent: ReagentVector, ah,
              max_iter: int):
    """(dose, slope) of :func:`dose_to_ph` from the compiled loop."""
    n = mix.n
    k, kw, a = kernel_constants(rows, n)
    dose, slope, ionic = np.empty(n), np.empty(n), np.empty(n)
    f = np.ascontiguousarray
    compiled(n).dose_rows(f(ah, dtype=float), k, f(rows.z, dtype=float), kw, a,
                          f(rows.totals, dtype=float), f(mix.strong_eq_l, dtype=float),
                          f(mix.strong_ionic_strength, dtype=float), f(n_r, dtype=float),
                          float(reagent.strong_eq), float(reagent.volume_l),
                          float(reagent.ionic_strength), not mix.activity.ideal, I_CEILING,
                          SETTLE_RTOL, max_iter, dose, slope, ionic)
    return dose, slope


def dose_to_ph(mix: Mixture, reagent: ReagentVector, target_ph,
               *, max_iter: int = 60):
    """Dose [mol/L of water] that brings each water to ``target_ph`` (direct).

    Multiplying the charge balance after the dose by the dilution factor
    (1 + d·v) makes it linear in the dose d:

    d = -(S + Σ T_j z̄_j + w) / (s_r + Σ n_j z̄_j + v·w)

    with all fractions taken at the target pH. A metal whose hydroxide is
    present at the target contributes its solubility there (a concentration
    in the dosed water, like CO2 held by air) instead of its total, so the
    equation stays linear; which metals are capped depends on the dose, so
    that choice is iterated (a few passes at most). The ionic strength of
    the dosed water is iterated to a fixed point for the Davies model.

    Returns
    -------
    (dose_mol_l, slope) : tuple of ndarray
        ``slope`` is the denominator above [eq/mol]: positive for a reagent
        that raises pH at the target, negative for one that lowers it, near
        zero where the reagent has no grip on pH (e.g. CO2 at low pH, lime
        past portlandite saturation). A negative dose means the water is
        already past the target in the reagent's direction. The caller
        decides what is reachable.
    """
    tp = np.broadcast_to(np.asarray(target_ph, dtype=float), (mix.n,)).copy()
    n_full = np.asarray(reagent.totals_mol, dtype=float)
    rows = restrict(mix, extra_cols=np.flatnonzero(n_full))
    if compiled(mix.n) is not None and simple_rows(rows, mix.activity):
        return _compiled(mix, rows, n_full[rows.cols], reagent, 10.0 ** -tp, max_iter)
    job = _DoseJob(mix, rows, n_full[rows.cols], reagent, 10.0 ** -tp)
    s = job.solve(None, max_iter)
    dose, den, sol, capped = s.dose, s.slope, s.solubility, s.capped
    for _ in range(_CAP_PASSES - 1):
        if sol is None:
            break
        now = job.capped_after(dose, sol)
        redo = np.flatnonzero(np.any(now != capped, axis=1))
        if redo.size == 0:
            break
        # Only the waters whose choice changed are solved again.
        capped[redo] = now[redo]
        again = job.take(redo).solve(capped[redo], max_iter)
        dose[redo], den[redo], sol[redo] = again.dose, again.slope, again.solubility
    if rows.tab is not None or not mix.activity.charge_only:
        # Complexes or coupled solids, or a species-wise activity model: the
        # direct dose is the first trial.
        return dose_coupled(rows, n_full[rows.cols], reagent, 10.0 ** -tp, dose, den,
                            s.ionic)
    return dose, den


#: Passes over the choice of capped metals in :func:`dose_to_ph`; one more
#: than the longest chain seen (metal from the reagent itself, e.g. lime).
_CAP_PASSES = 5


class DoseStep(NamedTuple):
    """One pass of the dose solve at a given ionic strength (arrays, one per water)."""

    dose: np.ndarray             #: dose to the target [mol/L of water]
    slope: np.ndarray            #: charge a mole of reagent brings at the target [eq/mol]
    ionic: np.ndarray | None     #: ionic strength of the dosed water [mol/L]; None if ideal
    solubility: np.ndarray | None  #: (n, mc) dissolved total each hydroxide allows [mol/L]
    capped: np.ndarray           #: (n, mc) metals held at that solubility


class Held(NamedTuple):
    """Columns whose concentration a phase holds at the target, and those concentrations."""

    fixed: np.ndarray            #: (n, mc) bool
    mol_l: np.ndarray            #: (n, mc) [mol/L]


@dataclass(frozen=True)
class _DoseJob:
    """The fixed parts of one :func:`dose_to_ph` call."""

    mix: Mixture
    rows: Rows
    n_r: np.ndarray          # (mc,) reagent moles per column
    reagent: ReagentVector
    ah: np.ndarray           # (n,) target activity of H+

    def take(self, idx) -> "_DoseJob":
        """The same job for the waters ``idx`` only."""
        return replace(self, mix=self.mix.take(idx), rows=self.rows.take(idx),
                       ah=self.ah[idx])

    def given(self, dose):
        """Dose as given to the water: a negative or missing dose is none."""
        return np.where(np.isfinite(dose), np.maximum(dose, 0.0), 0.0)

    def diluted(self, g):
        """Dilution factor 1 / (1 + d v) of the dose ``g`` as given [-]."""
        return 1.0 / (1.0 + g * self.reagent.volume_l)

    def capped_after(self, dose, sol):
        """Metals whose diluted total after ``dose`` exceeds their solubility."""
        g = self.given(dose)
        after = self.diluted(g)[:, None] * (self.rows.totals + g[:, None] * self.n_r[None, :])
        return capped_mask(self.rows, sol, after) & (after > 0)

    def at(self, ionic, capped) -> DoseStep:
        """The dose at the ionic strength ``ionic``, with the capped metals given.

        ``capped`` None is the first guess: the metals already above their
        solubility at the target before any dose (most waters keep it).
        """
        sp = species_at(self.rows, self.ah, ionic, m2=not self.mix.activity.ideal)
        if capped is None:
            capped = (np.zeros(self.rows.totals.shape, dtype=bool) if sp.solubility is None
                      else self.capped_after(np.zeros(self.mix.n), sp.solubility))
        held = self._held(sp, capped)
        num, den = self._balance(sp, held)
        with np.errstate(divide="ignore", invalid="ignore"):
            dose = -num / den
        calcite = np.zeros(self.mix.n)
        if sp.calcite_product is not None:
            fixed = np.zeros(self.rows.totals.shape, dtype=bool) if held is None else held.fixed
            dose, calcite = _with_calcite(self, dose, num, den, sp.q, sp.calcite_product, fixed)
        if self.mix.activity.ideal:
            return DoseStep(dose, den, None, sp.solubility, capped)
        return DoseStep(dose, den, self._ionic_after(sp, held, dose, calcite),
                        sp.solubility, capped)

    def _balance(self, sp, held: Held | None):
        """The charge balance after the dose as num + d den = 0 (times 1 + d v)."""
        rows, v = self.rows, self.reagent.volume_l
        w = sp.h - sp.oh
        if held is None:
            # Nothing held by a phase (the common case): sums without temporaries.
            num = self.mix.strong_eq_l + np.einsum("nm,nm->n", rows.totals, sp.q) + w
            return num, self.reagent.strong_eq + sp.q @ self.n_r + v * w
        w = w + np.einsum("nm,nm->n", held.mol_l, sp.q)
        free = np.where(held.fixed, 0.0, rows.totals)
        num = self.mix.strong_eq_l + np.einsum("nm,nm->n", free, sp.q) + w
        den = (self.reagent.strong_eq
               + np.einsum("nm,nm->n", np.where(held.fixed, 0.0, self.n_r[None, :]), sp.q)
               + v * w)
        return num, den

    def _ionic_after(self, sp, held: Held | None, dose, calcite):
        """Ionic strength of the dosed water [mol/L]."""
        rows = self.rows
        g = self.given(dose)
        f = self.diluted(g)
        if held is None and sp.calcite_product is None:
            weak = f * (np.einsum("nm,nm->n", rows.totals, sp.m2) + g * (sp.m2 @ self.n_r))
        else:
            tot_after = f[:, None] * (rows.totals + g[:, None] * self.n_r)
            if held is not None:
                tot_after = np.where(held.fixed, held.mol_l, tot_after)
            if sp.calcite_product is not None:
                tot_after[:, rows.ca] -= f * calcite
                tot_after[:, rows.carb] -= f * calcite
            weak = np.einsum("nm,nm->n", tot_after, sp.m2)
        strong_i = f * (self.mix.strong_ionic_strength + g * self.reagent.ionic_strength)
        return 0.5 * (sp.h + sp.oh + weak) + strong_i

    def _held(self, sp, capped) -> Held | None:
        """Columns whose concentration a phase holds (carbonate open to air, a
        metal at its hydroxide's solubility); None when there are none."""
        rows, mix = self.rows, self.mix
        opened = mix.open_to_air
        open_c = rows.carb >= 0 and bool(opened.any())
        if not open_c and not capped.any():
            return None
        fixed = np.zeros(rows.totals.shape, dtype=bool)
        mol = np.zeros(rows.totals.shape)
        if open_c:
            fixed[opened, rows.carb] = True
            mol[opened, rows.carb] = mix.co2_air_mol_l[opened] / sp.alpha[opened, rows.carb, 0]
        if capped.any():
            fixed |= capped
            mol[capped] = sp.solubility[capped]
        return Held(fixed, mol)

    def solve(self, capped, max_iter) -> DoseStep:
        """The dose with the capped metals given (None: the first guess of
        :meth:`at` at each step), its ionic strength settled."""
        ionic = self.mix.strong_ionic_strength.copy()
        first = self.at(ionic, capped)
        if self.mix.activity.ideal:
            return first

        def step(i):
            s = self.at(i, capped)
            return s.ionic, s.dose, s.slope, s.solubility
        # Each water keeps the dose of the step at which its ionic strength
        # settled (within 1e-10 of it), so no last pass is needed.
        ionic, (dose, den, sol) = settle(step, ionic, first.ionic, max_iter, payload=True)
        # Waters whose ionic strength does not settle (a dose without bound,
        # where the reagent has no grip) get no number.
        return DoseStep(np.where(np.isfinite(ionic), dose, np.nan), den, ionic, sol,
                        first.capped)


def _with_calcite(job: _DoseJob, dose, num, den, q, kcal, fixed):
    """Dose with calcite precipitating in closed waters, and the calcite
    [mol per L of water before dilution].

    With X' calcite per litre before dilution, the charge balance (times
    1 + d v) is num + d den - k X' = 0, k = q_Ca + q_C, so X' is linear
    in d; calcite equilibrium, (Ca + d n_Ca - X')(C + d n_C - X') =
    K' (1 + d v)^2, is then a quadratic in d. Its root with X' >= 0 and
    both dissolved totals >= 0 is taken where the dose without calcite
    leaves the water supersaturated.
    """
    rows, v = job.rows, job.reagent.volume_l
    ca, cb = rows.ca, rows.carb
    live = ~job.mix.open_to_air & ~fixed[:, ca] & ~fixed[:, cb] & np.isfinite(dose)
    g = job.given(dose)
    f = job.diluted(g)
    a0, b0 = rows.totals[:, ca], rows.totals[:, cb]
    a1, b1 = job.n_r[ca], job.n_r[cb]
    over = live & (f * f * (a0 + g * a1) * (b0 + g * b1) > kcal)
    calcite = np.zeros(dose.shape)
    if not over.any():
        return dose, calcite
    k = (q[:, ca] + q[:, cb])[over]
    nu, de, kc = num[over], den[over], kcal[over]
    p0, p1 = a0[over] - nu / k, a1 - de / k
    q0, q1 = b0[over] - nu / k, b1 - de / k
    d = _calcite_root(p1 * q1 - kc * v * v, p0 * q1 + p1 * q0 - 2.0 * kc * v, p0 * q0 - kc,
                      nu, de, k, (p0, p1, q0, q1))
    out = dose.copy()
    out[over] = d
    calcite[over] = np.where(np.isfinite(d), np.maximum((nu + d * de) / k, 0.0), 0.0)
    return out, calcite


def _calcite_root(c2, c1, c0, nu, de, k, lines):
    """The root of c2 d² + c1 d + c0 = 0 that precipitates calcite (X' >= 0)
    and leaves both dissolved totals (p0 + p1 d, q0 + q1 d) >= 0; where both
    qualify, the one precipitating less (the first reached along the dose
    path); NaN where none does."""
    p0, p1, q0, q1 = lines
    with np.errstate(divide="ignore", invalid="ignore"):
        disc = np.sqrt(np.maximum(c1 * c1 - 4.0 * c2 * c0, 0.0))
        linear = np.abs(c2) < 1e-12 * (np.abs(c1) + 1e-300)
        roots = np.stack([np.where(linear, -c0 / c1, (-c1 - disc) / (2.0 * c2)),
                          np.where(linear, -c0 / c1, (-c1 + disc) / (2.0 * c2))])
        x = (nu + roots * de) / k
        ok = (np.isfinite(roots) & (x >= -1e-15) & (p0 + p1 * roots >= -1e-15)
              & (q0 + q1 * roots >= -1e-15))
    x_pick = np.where(ok, x, np.inf).min(axis=0)
    pick = np.where(ok & (x == x_pick), roots, np.nan)
    d = np.nanmin(np.where(np.isfinite(pick), pick, np.inf), axis=0)
    return np.where(np.isfinite(d), d, np.nan)
