"""The carbonate total that explains a laboratory alkalinity or acidity (a direct solve).

At a fixed pH every fraction is fixed, so the strong acid a titration takes
from the sample pH to its end point is linear in the carbonate total; only
the ionic strengths at the two ends need a fixed point.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from .activity import ActivityModel
from .columns import CARBONATE, N_SYSTEMS, system_index
from .mixture import Mixture
from .solvers import SETTLE_RTOL, settle
from .coupled import coupled_balance
from .fast import compiled_alkalinity, kernel_constants, simple_rows
from .medium import I_CEILING
from .speciation import Rows, capped_mask, restrict, species_at

__all__ = ["carbonate_for_alkalinity"]

def carbonate_for_alkalinity(totals_mol_l, ph, temperature_c, alk_eq_l,
                             endpoint_ph, *, activity: ActivityModel,
                             extra_ionic_strength=0.0, max_iter: int = 60,
                             unknown_pka=None, ferrous_oxidised: bool = False, shift=None):
    """Carbonate total [mol/L] that explains a titration to ``endpoint_ph``.

    ``alk_eq_l`` is the strong acid [eq/L] taken to titrate the water from
    ``ph`` down to ``endpoint_ph`` (alkalinity, positive) or, when negative,
    minus the strong base taken to titrate it up (acidity). With
    A = S(pH) - S(endpoint):

    A = sum_j T_j (z̄_j(pH_e) - z̄_j(pH)) + w(pH_e) - w(pH),  w = [H+] - [OH-]

    which is linear in the carbonate total. The ionic strength at the end
    point includes the titrant's ions (a monovalent strong acid or base);
    dilution by the titrant is neglected, as in the method's own
    calculation. Metals are dissolved at ``ph`` (a filtered sample) and, at
    the end point, capped at their hydroxide's solubility: the base they
    take to precipitate is part of an acidity. With ``ferrous_oxidised``
    (the hot-peroxide acidity of Standard Methods 2310) ferrous iron ends
    as Fe(OH)3 and counts 2 eq/mol. ``shift`` (a
    :class:`~dosing.chem.mixture.LogKShift`) moves the model's constants per
    water.

    Returns
    -------
    (carbonate_mol_l, coefficient, ionic_strength) : tuple of ndarray
        ``coefficient`` is z̄_c(pH_e) - z̄_c(pH) [-]; where it is not
        positive for alkalinity (negative for acidity) the carbonate cannot
        explain the measurement and the caller should refuse the input.
    """
    job = _AlkalinityJob.build(totals_mol_l, ph, temperature_c, alk_eq_l, endpoint_ph,
                               activity, extra_ionic_strength, unknown_pka, ferrous_oxidised,
                               shift)
    if compiled_alkalinity(job.ph.shape[0]) is not None and simple_rows(job.rows, activity):
        return _compiled(job, activity, max_iter)
    ionic, ionic_e = job.extra.copy(), job.extra.copy()
    c, coef, new_i, new_ie = job.solve(ionic, ionic_e)
    if activity.ideal:
        if job.rows.tab is not None:
            c, new_i = _coupled_carbonate(job, c, coef, new_i, new_ie)
        return c, coef, new_i
    n = job.ph.shape[0]

    # Settle both strengths at once: stack them as one fixed point.
    def fn(x):
        _, _, a_, b_ = job.solve(x[:n], x[n:])
        return np.concatenate([a_, b_])
    both = settle(fn, np.concatenate([ionic, ionic_e]), np.concatenate([new_i, new_ie]),
                   max_iter)
    ok = np.isfinite(both[:n]) & np.isfinite(both[n:])
    c, coef, new_i, _ = job.solve(np.where(ok, both[:n], 0.0), np.where(ok, both[n:], 0.0))
    c, new_i = np.where(ok, c, np.nan), np.where(ok, new_i, np.nan)
    if job.rows.tab is not None:
        c, new_i = _coupled_carbonate(job, c, coef, new_i, both[n:])
    return c, coef, new_i


def _compiled(job: "_AlkalinityJob", activity: ActivityModel, max_iter: int):
    """(carbonate, coefficient, ionic strength) from the compiled loop."""
    rows, n = job.rows, job.ph.shape[0]
    k, kw, a = kernel_constants(rows, n)
    c, coef, ionic = np.empty(n), np.empty(n), np.empty(n)
    f = np.ascontiguousarray
    compiled_alkalinity(n).alkalinity_rows(
        f(job.ph, dtype=float), f(job.ep, dtype=float), f(job.alk, dtype=float),
        f(job.extra, dtype=float), k, f(rows.z, dtype=float), kw, a,
        f(rows.totals, dtype=float), rows.carb, not activity.ideal, I_CEILING, SETTLE_RTOL,
        max_iter, c, coef, ionic)
    return c, coef, ionic


def _coupled_carbonate(job: "_AlkalinityJob", c, coef, ionic, ionic_e, passes: int = 40):
    """The carbonate where carbonate couples (CaCO3°, CaHCO3+ ...): the
    titration balance A(C) = R(end point) - R(sample) is no longer linear in
    C, so the direct answer starts a secant on it, the two ionic strengths
    moved along. Only the waters with carbonate to find are refined, each
    until it settles."""
    sample = restrict(job.bare, extra_cols=[CARBONATE], cap=False)
    end = job.rows
    car = end.carb
    fe2 = job.fe2 if job.ferrous_oxidised else np.zeros(0, dtype=int)
    # A negative answer (the rest of the water already explains more than the
    # measurement) is kept as the direct solve gives it: the caller refuses it.
    good = np.isfinite(c) & (c > 0)
    out_c, out_i = np.where(good, np.nan, c), np.where(good, np.nan, ionic)
    live = np.flatnonzero(good)
    x, ion_s = c[live], ionic[live]
    ion_e = np.where(np.isfinite(ionic_e[live]), ionic_e[live], job.extra[live])
    slope = np.where(np.abs(coef[live]) > 1e-12, coef[live], 1.0)
    prev_x, prev_a, cores = None, None, (None, None)
    # The inner solves hold each mass balance to 1e-11 of its total: the
    # alkalinity is resolved to about that of the totals.
    scale = np.abs(job.alk) + end.totals.sum(axis=1)
    for it in range(passes):
        if not live.size:
            break
        sub = job.take(live)
        a, ion_s, ion_e, cores = _titration_balance(sub, sample.take(live), end.take(live),
                                                    car, fe2, x, ion_s, ion_e, cores)
        miss = sub.alk - a
        tol = 1e-15 + 1e-10 * (scale[live] + x)
        if prev_x is not None:
            with np.errstate(divide="ignore", invalid="ignore"):
                sec = (a - prev_a) / (x - prev_x)
            slope = np.where(np.isfinite(sec) & (np.abs(sec) > 1e-9), sec, slope)
        done = np.abs(miss) <= (100 * tol if it == passes - 1 else tol)
        out_c[live[done]], out_i[live[done]] = x[done], ion_s[done]
        keep = ~done
        prev_x, prev_a, slope = x[keep], a[keep], slope[keep]
        x, ion_s, ion_e = x[keep] + miss[keep] / slope, ion_s[keep], ion_e[keep]
        cores = tuple(None if core is None else core.take(keep) for core in cores)
        live = live[keep]
    return out_c, out_i


def _titration_balance(job, sample, end, car, fe2, x, ion_s, ion_e, cores):
    """(alkalinity the carbonate ``x`` gives [eq/L], the two ionic strengths it
    implies, the two equilibria to start the next trial from)."""
    tot = sample.totals.copy()
    tot[:, car] = x
    v_s = replace(sample, totals=tot)
    ah = 10.0 ** -job.ph
    b_s = coupled_balance(v_s.tab, v_s, species_at(v_s, ah, ion_s), ah, ion_s, cores[0])
    tot_e = end.totals.copy()
    tot_e[:, car] = x
    if fe2.size:
        tot_e[:, fe2] = 0.0
    v_e = replace(end, totals=tot_e)
    ae = 10.0 ** -job.ep
    b_e = coupled_balance(v_e.tab, v_e, species_at(v_e, ae, ion_e), ae, ion_e, cores[1])
    s = -b_s.residual
    # The views' own strong ions (the medium of a species-wise model) are the
    # known ones, counted in ``job.extra`` below.
    new_s = b_s.ionic - v_s.strong_i + 0.5 * np.abs(s) + job.extra
    new_e = b_e.ionic - v_e.strong_i + 0.5 * np.abs(s) + 0.5 * np.abs(job.alk) + job.extra
    if job.rows.activity.ideal:
        new_s, new_e = ion_s, ion_e
    return b_e.residual - b_s.residual, new_s, new_e, (b_s.core, b_e.core)


@dataclass(frozen=True)
class _AlkalinityJob:
    """The fixed parts of :func:`carbonate_for_alkalinity`: the water without
    carbonate, at the sample pH and at the end point."""

    rows: Rows
    ph: np.ndarray          # (n,) sample pH
    ep: np.ndarray          # (n,) end-point pH
    alk: np.ndarray         # (n,) alkalinity (+) or minus acidity [eq/L]
    extra: np.ndarray       # (n,) known strong-ion ionic strength [mol/L]
    fe2: np.ndarray         # column of ferrous iron in the view (empty if none)
    ferrous_oxidised: bool
    bare: Mixture           # the water without carbonate (for a view without solids)

    @classmethod
    def build(cls, totals_mol_l, ph, temperature_c, alk_eq_l, endpoint_ph, activity,
              extra_ionic_strength, unknown_pka, ferrous_oxidised, shift=None
              ) -> "_AlkalinityJob":
        ph = np.atleast_1d(np.asarray(ph, dtype=float))
        tot = np.broadcast_to(np.atleast_2d(np.asarray(totals_mol_l, dtype=float)),
                              (ph.shape[0], N_SYSTEMS)).copy()
        tot[:, CARBONATE] = 0.0
        t = np.broadcast_to(np.asarray(temperature_c, dtype=float), ph.shape)
        # A species-wise model (SIT) takes the known strong ions as the medium.
        medium = 0.0 if activity.charge_only else extra_ionic_strength
        bare = Mixture.build(tot, 0.0, medium, t, np.nan, activity, unknown_pka, shift)
        rows = restrict(bare, extra_cols=[CARBONATE])
        return cls(rows, ph, np.broadcast_to(np.asarray(endpoint_ph, float), ph.shape),
                   np.broadcast_to(np.asarray(alk_eq_l, dtype=float), ph.shape),
                   np.broadcast_to(np.asarray(extra_ionic_strength, float), ph.shape),
                   np.flatnonzero(rows.cols == system_index("iron_ii")), ferrous_oxidised,
                   bare)

    def take(self, idx) -> "_AlkalinityJob":
        """The same job for the waters ``idx`` only (the views and the per-water
        arrays; ``bare`` is left whole: only the refinement's views use rows)."""
        return replace(self, rows=self.rows.take(idx), ph=self.ph[idx], ep=self.ep[idx],
                       alk=self.alk[idx], extra=self.extra[idx])

    def end_totals(self, sol_e):
        """Totals at the end point: metals capped at their hydroxide's
        solubility, ferrous iron gone when it is counted as oxidised."""
        t_e = self.rows.totals.copy()
        if self.ferrous_oxidised and self.fe2.size:
            t_e[:, self.fe2] = 0.0
        capped = capped_mask(self.rows, sol_e, t_e)
        if capped is not None:
            t_e[capped] = sol_e[capped]
        return t_e

    def solve(self, ionic, ionic_e):
        """(carbonate, its coefficient, new ionic strength at the sample and
        at the end point) at the given ionic strengths."""
        rows, car, alk, extra = self.rows, self.rows.carb, self.alk, self.extra
        s0 = species_at(rows, 10.0 ** -self.ph, ionic)
        se = species_at(rows, 10.0 ** -self.ep, ionic_e)
        t_e = self.end_totals(se.solubility)
        known = (t_e * se.q - rows.totals * s0.q).sum(-1) + (se.h - se.oh) - (s0.h - s0.oh)
        coef = se.q[:, car] - s0.q[:, car]
        with np.errstate(divide="ignore", invalid="ignore"):
            c = (alk - known) / coef
        full = rows.totals.copy()
        full[:, car] = np.where(np.isfinite(c), c, 0.0)
        t_e[:, car] = full[:, car]
        s = -(s0.h - s0.oh + (full * s0.q).sum(-1))
        # Strong ions as monovalent; the titrant (HCl or NaOH) adds |A|/2.
        new_i = 0.5 * (s0.h + s0.oh + (full * s0.m2).sum(-1)) + 0.5 * np.abs(s) + extra
        new_ie = (0.5 * (se.h + se.oh + (t_e * se.m2).sum(-1)) + 0.5 * np.abs(s)
                  + 0.5 * np.abs(alk) + extra)
        return c, coef, new_i, new_ie
