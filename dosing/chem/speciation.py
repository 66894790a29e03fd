"""Speciation at a given pH: fractions, solids, the charge balance and its slope.

Every function here works on numpy arrays of *n* waters at once; the scalar
API elsewhere wraps these with n = 1, so there is one implementation of the
chemistry.

The model
---------
A water is described by a :class:`Mixture`:

* the total of each weak-acid system of :data:`dosing.chem.species.SYSTEMS`
  ``T_j`` [mol/L];
* the strong-ion balance ``S`` [eq/L]: strong cations (Na+, K+, Ca2+ ...)
  minus strong anions (Cl-, NO3- ...), in equivalents;
* the ionic strength carried by those strong ions [mol/L], for the Davies
  correction;
* the temperature, and optionally a fixed dissolved CO2 (a tank open to air).

At a given activity of H+ (``a_H = 10^-pH``), every species fraction is fixed,
and the charge balance

.. math::
    R(pH) = S + [H^+] - [OH^-] + \\sum_j T_j\\,\\bar z_j(pH) = 0

is linear in every total, in ``S`` and in a reagent dose. Here ``z̄_j`` is the
mean charge of system *j*. This gives direct solutions for the strong-ion
balance from a measured pH (:func:`strong_balance_at_ph`) and for the dose
that reaches a target pH (:func:`dose_to_ph`); only the ionic strength needs
a short fixed-point iteration. The forward problem, the pH of a given
mixture (:func:`solve_ph`), is a safeguarded Newton iteration on pH over the
whole array, with a bracket that shrinks every step; R is strictly
decreasing in pH so the root is unique.

For one monoprotic acid HA with total C and sodium salt at Na, R = 0 reads
``Na + [H+] - Kw/[H+] - C·Ka/(Ka + [H+]) = 0``: the textbook general
equation is the special case of one system.

Activity
--------
pH is the activity pH. Each ion's activity coefficient comes from the
mixture's activity model (:mod:`dosing.chem.activity`) at the ionic strength
of the solution itself; the ideal model makes every coefficient 1.
Concentrations are mol/L, taken equal to mol/kg (dilute water).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import NamedTuple

import numpy as np

from .activity import ActivityModel
from .coupled import Tableau, coupled_balance, tableau_for
from .columns import (CALCIUM, CARBONATE, LN10, MAXSTEP, METAL_COLUMNS, N_SYSTEMS,
                      SOLID_Z, Z)
from .fractions import fractions
from .medium import I_CEILING, ActivityAt, eps_forms, per_water, species_wise
from .mixture import Mixture
from .water import calcite_pksp

__all__ = ["Speciation", "speciate", "charge_residual", "Rows", "restrict", "SpeciesAt",
           "ActivityAt", "species_at", "capped_mask", "Balance", "balance", "rows_state",
           "I_CEILING", "eps_forms"]



@dataclass(frozen=True)
class Speciation:
    """State of n waters at a given pH (arrays)."""

    ph: np.ndarray                  #: (n,) activity pH [-]
    h_mol_l: np.ndarray             #: (n,) [H+] [mol/L]
    oh_mol_l: np.ndarray            #: (n,) [OH-] [mol/L]
    alpha: np.ndarray               #: (n, m, 4) fraction of each form [-]
    mean_charge: np.ndarray         #: (n, m) mean charge per mole of total [-]
    totals_mol_l: np.ndarray        #: (n, m) totals in effect (open CO2 applied)
    ionic_strength: np.ndarray      #: (n,) [mol/L]
    charge_residual_eq_l: np.ndarray  #: (n,) charge balance residual [eq/L]
    buffer_intensity_eq_l: np.ndarray  #: (n,) β = dC_base/dpH [eq/(L pH)]
    solids_mol_l: np.ndarray        #: (n, m) hydroxide precipitated [mol/L]
    calcite_mol_l: np.ndarray       #: (n,) calcite precipitated [mol/L]
    free_mol_l: np.ndarray | None = None    #: (n, m) uncomplexed totals; None: = totals
    phase_ids: tuple[str, ...] = ()         #: solids of the coupled core, in order
    phase_mol_l: np.ndarray | None = None   #: (n, np) amount of each [mol/L]
    complex_ids: tuple[str, ...] = ()       #: complexes and ion pairs, in order
    complex_mol_l: np.ndarray | None = None  #: (n, ns) [mol/L]
    log_gamma: np.ndarray | None = None     #: (n, m, 5) log10 γ of each form (mol/L scale)
    log_gamma_h: np.ndarray | None = None   #: (n,) log10 γ of H+

    def activity_of(self, system: int, form: int) -> np.ndarray:
        """(n,) activity of one form of one system (uncomplexed) [-]."""
        return self.concentration(system, form) * 10.0 ** self.log_gamma[:, system, form]

    @property
    def free(self) -> np.ndarray:
        """(n, m) uncomplexed totals of each column (the fractions apply to these)."""
        return self.totals_mol_l if self.free_mol_l is None else self.free_mol_l

    def concentration(self, system: int, form: int) -> np.ndarray:
        """(n,) concentration of one form of one system [mol/L] (uncomplexed)."""
        return self.free[:, system] * self.alpha[:, system, form]


def _state(r: "Rows", ph, ionic_strength) -> tuple[SpeciesAt, Balance]:
    """Species of all systems and their charge balance at ``ph``."""
    sp = species_at(r, 10.0 ** -ph, ionic_strength)
    return sp, balance(r, sp)


def speciate(mix: Mixture, ph, *, max_iter: int = 60, solids: bool = True) -> Speciation:
    """Speciation of every water at the given activity pH.

    The ionic strength is found self-consistently (Davies) or is only
    reported (ideal). With ``solids`` (the default) each metal is capped at
    its hydroxide's solubility and the rest is reported as precipitated;
    ``solids=False`` keeps every metal dissolved (the water as sampled).
    Only the systems present are speciated: a column with no total in any
    water reads as all in its top form, with no effect on anything.
    """
    ph = np.broadcast_to(np.asarray(ph, dtype=float), (mix.n,)).copy()
    r = restrict(mix, cap=solids)
    if r.tab is not None:
        return _speciate_coupled(mix, r, ph, max_iter)
    ionic = mix.strong_ionic_strength.copy()
    for _ in range(max_iter):
        new_i = _state(r, ph, ionic)[1].ionic
        done = np.all(np.abs(new_i - ionic) <= 1e-13 + 1e-10 * new_i)
        ionic = new_i
        if done or mix.activity.ideal:
            break
    sp, b = _state(r, ph, ionic)
    alpha, q, h, oh = sp.alpha, sp.q, sp.h, sp.oh
    totals, resid, beta, calcite = b.totals, b.residual, b.beta, b.calcite
    full_alpha = np.zeros((mix.n, N_SYSTEMS, MAXSTEP + 1))
    full_alpha[:, :, 0] = 1.0
    full_alpha[:, r.cols] = alpha
    full_q = np.repeat(Z[None, :, 0], mix.n, axis=0)
    full_q[:, r.cols] = q
    full_totals = np.zeros((mix.n, N_SYSTEMS))
    full_totals[:, r.cols] = totals
    precipitated = np.zeros_like(full_totals)
    precipitated[:, METAL_COLUMNS] = np.maximum(
        mix.totals_mol_l[:, METAL_COLUMNS] - full_totals[:, METAL_COLUMNS], 0.0)
    # Calcium in calcite is not lime left undissolved.
    precipitated[:, CALCIUM] = np.maximum(precipitated[:, CALCIUM] - calcite, 0.0)
    lg, lg_h = _full_log_gamma(r, sp, ionic, mix.n)
    return Speciation(ph, h, oh, full_alpha, full_q, full_totals, ionic, resid, beta,
                      precipitated, calcite, log_gamma=lg, log_gamma_h=lg_h)


def _speciate_coupled(mix: Mixture, r: Rows, ph, max_iter: int) -> Speciation:
    """:func:`speciate` of waters whose components couple (:mod:`.coupled`)."""
    ionic, core = mix.strong_ionic_strength.copy(), None
    for _ in range(max_iter):
        ah = 10.0 ** -ph
        b = coupled_balance(r.tab, r, species_at(r, ah, ionic), ah, ionic, core)
        done = np.all(np.abs(b.ionic - ionic) <= 1e-13 + 1e-10 * b.ionic)
        ionic, core = b.ionic, b.core
        if done or mix.activity.ideal:
            break
    b, beta = _coupled_state(r, ph, ionic, core)
    sp = species_at(r, 10.0 ** -ph, ionic)
    tab, n = r.tab, mix.n
    full = lambda fill: np.full((n, N_SYSTEMS), fill)      # noqa: E731
    alpha = np.zeros((n, N_SYSTEMS, MAXSTEP + 1))
    alpha[:, :, 0] = 1.0
    alpha[:, r.cols] = sp.alpha
    q = np.repeat(Z[None, :, 0], n, axis=0)
    q[:, r.cols] = sp.q
    dissolved, free, solid = full(0.0), full(0.0), full(0.0)
    dissolved[:, r.cols], free[:, r.cols] = b.dissolved, b.free
    x = b.core.x.copy()
    if tab.air >= 0:
        x[:, tab.air] = 0.0                 # carbonate exchanged with air is not a solid
    solid[:, r.cols[tab.cols]] = x @ tab.pnu
    calcite = x[:, tab.calcite] if tab.calcite >= 0 else np.zeros(n)
    lg, lg_h = _full_log_gamma(r, sp, ionic, n)
    return Speciation(ph, sp.h, sp.oh, alpha, q, dissolved, ionic, b.residual, beta, solid,
                      calcite, free, tab.phase_ids, x, tab.ids, b.core.c, lg, lg_h)


def _full_log_gamma(r: "Rows", sp: "SpeciesAt", ionic, n: int):
    """(n, m, 5) log10 γ of every form of every column, and (n,) of H+, at
    the speciation's ionic strength (columns outside the view by charge)."""
    if sp.act is not None:
        st = sp.act.state
        full = r.activity.log_gamma_ion(Z[None], eps_forms(tuple(range(N_SYSTEMS)))[None],
                                        per_water(st, 2))
        full[:, r.cols] = sp.act.lg
        return full, sp.act.lg_h
    f = r.activity.charge_term(np.minimum(ionic, I_CEILING), r.a)
    t = np.zeros(n) if f is None else np.broadcast_to(f, (n,))
    return -(Z * Z)[None] * t[:, None, None], -t


def charge_residual(mix: Mixture, ph) -> np.ndarray:
    """(n,) charge balance residual at ``ph`` [eq/L], ionic strength consistent."""
    return speciate(mix, ph).charge_residual_eq_l


@dataclass(frozen=True)
class Rows:
    """A solver's view of a Mixture: only the systems present, any row subset."""

    totals: np.ndarray      # (n, mc)
    strong: np.ndarray      # (n,)
    strong_i: np.ndarray    # (n,)
    co2: np.ndarray         # (n,)
    kw: np.ndarray          # (n,)
    k: np.ndarray           # (n, mc, 3)
    a: np.ndarray           # (n,)
    z: np.ndarray           # (mc, 4)
    carb: int               # column of carbonate in the view, or -1
    activity: ActivityModel
    cols: np.ndarray        # (mc,) catalogue columns the view keeps
    log_ks0: np.ndarray     # (n, mc) log *Ks0 of each column's hydroxide, NaN if none
    zs: np.ndarray          # (mc,) charge of the free metal ion, 0 if no solid
    cap: bool               # cap metals at their hydroxide's solubility
    ca: int = -1            # column of calcium in the view when calcite can form, or -1
    log_kc: np.ndarray | None = None   # (n,) log Ksp of calcite, with ``ca``
    tab: Tableau | None = None         # the coupled part (complexes, solids), if any
    core_log_k: tuple | None = None    # (n or 1, ns), (n or 1, np) log K of the tableau

    @property
    def has_solids(self) -> bool:
        return self.cap and bool(np.any(self.zs > 0))

    def take(self, idx) -> "Rows":
        return replace(self, totals=self.totals[idx], strong=self.strong[idx],
                       strong_i=self.strong_i[idx], co2=self.co2[idx], kw=self.kw[idx],
                       k=self.k[idx], a=self.a[idx], log_ks0=self.log_ks0[idx],
                       log_kc=None if self.log_kc is None else self.log_kc[idx],
                       core_log_k=None if self.core_log_k is None else tuple(
                           x if x.shape[0] == 1 else x[idx] for x in self.core_log_k))


def _used(mix: Mixture, extra_cols=()) -> np.ndarray:
    """Columns with a non-zero total (plus ``extra_cols``, and open carbonate)."""
    # The scan of every total is made once per mixture.
    used = mix.memo("nonzero", lambda: mix.totals_mol_l.any(axis=0)).copy()
    used[list(extra_cols)] = True
    if mix.memo("open", lambda: bool(mix.open_to_air.any())):
        used[CARBONATE] = True
    return np.flatnonzero(used)


def restrict(mix: Mixture, extra_cols=(), *, cap: bool = True) -> Rows:
    """Keep only the systems with a non-zero total (plus ``extra_cols``)."""
    cols = _used(mix, extra_cols)
    const = mix.constants(cols)
    carb = int(np.searchsorted(cols, CARBONATE)) if CARBONATE in cols else -1
    ca, log_kc = -1, None
    if cap and mix.calcite and carb >= 0 and CALCIUM in cols:
        ca = int(np.searchsorted(cols, CALCIUM))
        log_kc = -calcite_pksp(mix.temperature_c)
    tab = tableau_for(cols, solids=cap, calcite=mix.calcite) if mix.complexes else None
    core_k = None
    if tab is not None:
        t = mix.temperature_c
        one = t.size > 1 and bool(np.all(t == t[0]))
        core_k = tab.log_k(t[:1] if one else t)
        if mix.shift is not None:
            core_k = tab.shifted(core_k, mix.shift)
    totals = mix.memo(("totals", tuple(int(c) for c in cols)),
                      lambda: mix.totals_mol_l[:, cols])
    return Rows(totals, mix.strong_eq_l, mix.strong_ionic_strength,
                mix.co2_air_mol_l, const.kw, const.k, const.a, Z[cols], carb,
                mix.activity, cols, const.log_ks0, SOLID_Z[cols], cap, ca, log_kc,
                tab, core_k)


class SpeciesAt(NamedTuple):
    """The view's species at one activity of H+ and one ionic strength."""

    alpha: np.ndarray                 #: (n, mc, 5) fraction of each form [-]
    q: np.ndarray                     #: (n, mc) mean charge per mole of total [-]
    m2: np.ndarray | None             #: (n, mc) mean squared charge; None when not asked
    h: np.ndarray                     #: (n,) [H+] [mol/L]
    oh: np.ndarray                    #: (n,) [OH-] [mol/L]
    solubility: np.ndarray | None     #: (n, mc) dissolved total a solid allows, or None
    calcite_product: np.ndarray | None  #: (n,) largest Ca x CO3 totals product, or None
    act: "ActivityAt | None" = None   #: log γ of every form (a species-wise model only)


def species_at(r: Rows, ah, ionic, *, m2: bool = True) -> SpeciesAt:
    """Fractions and charge moments of the view's systems, [H+] and [OH-].

    At activity ``ah`` and ionic strength ``ionic`` (constants mixed by the
    water's activity model). The mean squared charge is left out when
    ``m2`` is false (only the ionic strength needs it). The solubility is
    the dissolved total each column's hydroxide allows, [Me z+]/alpha_0
    with [Me z+] = *Ks0 {H+}^z / gamma_z (NaN for columns without a solid);
    None when the view has none. The calcite product is the largest
    dissolved calcium total times dissolved carbonate total the water holds,
    Ksp / (gamma_Ca gamma_CO3 alpha_Ca alpha_CO3); for a water open to air
    (carbonate held) it enters calcium's solubility instead.
    """
    if not r.activity.charge_only:
        return _species_at_wise(r, ah, ionic, m2)
    z2 = r.z * r.z
    if not r.activity.ideal:
        # Trial pH values far from the root can imply absurd ionic strengths;
        # capping them keeps the trial finite (the answer never sits there).
        # log10 γ_z = -z² t for every species, t once per water: a step from
        # charge z to z - 1 scales its constant by 10^(-t (z² - (z-1)²)).
        t = r.activity.charge_term(np.minimum(ionic, I_CEILING), r.a)
        g1 = 10.0 ** -t
        # Written as planes, one per step, for _alpha.
        kp = np.multiply(np.moveaxis(r.k, -1, 0),
                         np.exp((-LN10 * t)[None, :, None] * (z2[:, :-1] - z2[:, 1:]).T[:, None]),
                         order="C")
    else:
        t, g1 = None, 1.0
        # One row of constants viewed n times (one temperature) stays one row.
        k = r.k[:1] if r.k.shape[0] and r.k.strides[0] == 0 else r.k
        kp = np.ascontiguousarray(np.moveaxis(k, -1, 0))
    alpha = fractions(ah, kp)
    q = np.einsum("nmk,mk->nm", alpha, r.z)
    m2 = np.einsum("nmk,mk->nm", alpha, z2) if m2 else None
    sol = None
    if r.has_solids:
        log_free = r.log_ks0 + r.zs[None, :] * np.log10(ah)[:, None]
        if t is not None:
            log_free = log_free + z2[None, :, 0] * t[:, None]
        with np.errstate(divide="ignore", over="ignore"):
            sol = 10.0 ** np.minimum(log_free, 300.0) / alpha[:, :, 0]
    kcal = None
    if r.ca >= 0:
        log_g = 0.0 if t is None else -(z2[r.ca, 0] + z2[r.carb, 2]) * t
        kcal, sol = _calcite_product(r, alpha, log_g, sol)
    return SpeciesAt(alpha, q, m2, ah / g1, r.kw / (ah * g1), sol, kcal)


def _calcite_product(r: Rows, alpha, log_g, sol):
    """(calcite's conditional product [mol²/L²], the solubilities with
    calcium capped by calcite where air holds the carbonate) of the waters."""
    with np.errstate(divide="ignore", over="ignore"):
        kcal = 10.0 ** np.minimum(r.log_kc - log_g, 300.0) / (
            alpha[:, r.ca, 0] * alpha[:, r.carb, 2])
    opened = np.isfinite(r.co2)
    if opened.any():
        # Carbonate held by air: calcite caps calcium like a hydroxide.
        held = r.co2[opened] / alpha[opened, r.carb, 0]
        sol = sol.copy()
        sol[opened, r.ca] = np.minimum(sol[opened, r.ca], kcal[opened] / held)
    return kcal, sol


def _species_at_wise(r: Rows, ah, ionic, want_m2: bool) -> SpeciesAt:
    """:func:`species_at` for a species-wise model: each form's γ its own."""
    alpha, act = species_wise(r, ah, ionic)
    lg = act.lg
    q = np.einsum("nmk,mk->nm", alpha, r.z)
    m2 = np.einsum("nmk,mk->nm", alpha, r.z * r.z) if want_m2 else None
    sol = None
    if r.has_solids:
        log_free = r.log_ks0 + r.zs[None, :] * np.log10(ah)[:, None] - lg[:, :, 0]
        with np.errstate(divide="ignore", over="ignore"):
            sol = 10.0 ** np.minimum(log_free, 300.0) / alpha[:, :, 0]
    kcal = None
    if r.ca >= 0:
        kcal, sol = _calcite_product(r, alpha, lg[:, r.ca, 0] + lg[:, r.carb, 2], sol)
    return SpeciesAt(alpha, q, m2, ah / 10.0 ** act.lg_h, r.kw / (ah * 10.0 ** act.lg_oh),
                     sol, kcal, act)


def capped_mask(r: Rows, sol, totals) -> np.ndarray | None:
    """(n, mc) True where a metal total exceeds its hydroxide's solubility."""
    if sol is None:
        return None
    with np.errstate(invalid="ignore"):
        return (r.zs[None, :] > 0) & (totals > sol)


class Balance(NamedTuple):
    """The charge balance of a view at one pH."""

    totals: np.ndarray        #: (n, mc) totals in effect (phases applied) [mol/L]
    residual: np.ndarray      #: (n,) charge residual [eq/L]
    beta: np.ndarray          #: (n,) buffer intensity [eq/(L pH)]
    ionic: np.ndarray         #: (n,) ionic strength this state implies [mol/L]
    calcite: np.ndarray       #: (n,) calcite precipitated in closed waters [mol/L]


def balance(r: Rows, sp: SpeciesAt) -> Balance:
    """Totals in effect, charge residual, β, ionic strength and calcite of a view.

    Two kinds of column hold a total fixed by a phase rather than by the
    water: carbonate open to air (CO2* fixed) and a metal whose hydroxide
    is present (free ion fixed by *Ks0). For both the total in effect is
    fixed / alpha_0 and d(T q)/dpH = -ln10 T m2 instead of -ln10 T var.
    Calcite in a closed water removes calcium and carbonate together (see
    :func:`calcite_in_closed`).
    """
    alpha, q, m2, h, oh, sol, kcal = sp[:7]
    var = m2 - q * q
    totals = r.totals
    opened = np.isfinite(r.co2)
    capped = capped_mask(r, sol, totals)
    if (r.carb >= 0 and opened.any()) or (capped is not None and capped.any()) or \
            kcal is not None:
        totals = totals.copy()
        var = var.copy()
    calcite = np.zeros(totals.shape[0])
    if kcal is not None and opened.any():
        # Open to air: calcium above its cap (set in _species) is calcite
        # where calcite, not portlandite, sets that cap.
        held = r.co2[opened] / alpha[opened, r.carb, 0]
        by_calcite = kcal[opened] / held <= sol[opened, r.ca] * (1.0 + 1e-12)
        calcite[opened] = np.where(capped[opened, r.ca] & by_calcite,
                                   totals[opened, r.ca] - sol[opened, r.ca], 0.0)
    if r.carb >= 0 and opened.any():
        totals[opened, r.carb] = r.co2[opened] / alpha[opened, r.carb, 0]
        var[opened, r.carb] = m2[opened, r.carb]
    if capped is not None and capped.any():
        totals[capped] = sol[capped]
        var[capped] = m2[capped]
    extra_beta = 0.0
    if kcal is not None and not opened.all():
        extra_beta = _calcite(r, q, totals, kcal, ~opened, calcite)
    resid = r.strong + h - oh + np.einsum("nm,nm->n", totals, q)
    beta = LN10 * (h + oh + np.einsum("nm,nm->n", totals, var)) + extra_beta
    new_i = 0.5 * (h + oh + np.einsum("nm,nm->n", totals, m2)) + r.strong_i
    return Balance(totals, resid, beta, new_i, calcite)


def _calcite(r: Rows, q, totals, kcal, rows, calcite):
    """Precipitate calcite in the closed waters ``rows`` (in place); its β [eq/(L pH)].

    With dissolved calcium A and carbonate B and the calcite product K' of
    :func:`_species`, the amount X that leaves solution solves
    (A - X)(B - X) = K', X = ((A + B) - sqrt((A - B)^2 + 4K')) / 2, taken
    where A B > K'. As K' moves with pH as 10^(-pH (q_Ca + q_C)), the
    precipitate buffers: dX/dpH = ln10 K' (q_Ca + q_C) / (A + B - 2X), and
    the residual loses (q_Ca + q_C) X.
    """
    a, b, k = totals[:, r.ca], totals[:, r.carb], kcal
    over = rows & (a * b > k) & np.isfinite(k)
    if not over.any():
        return 0.0
    a, b, k = a[over], b[over], k[over]
    x = 0.5 * ((a + b) - np.sqrt((a - b) ** 2 + 4.0 * k))
    x = np.clip(x, 0.0, np.minimum(a, b))
    totals[over, r.ca] = a - x
    totals[over, r.carb] = b - x
    calcite[over] = x
    qs = q[over, r.ca] + q[over, r.carb]
    extra = np.zeros(totals.shape[0])
    extra[over] = qs * qs * LN10 * k / np.maximum(a + b - 2.0 * x, 1e-300)
    return extra


#: pH step of the numerical buffer intensity of a coupled water [pH].
_DPH = 1e-5


def rows_state(r: Rows, ph, ionic, *, beta: bool = True):
    """Residual [eq/L], β [eq/(L pH)] and ionic strength [mol/L] at ``ph``
    (β None when not asked: a coupled water's costs two more equilibria)."""
    if r.tab is not None:
        if not beta:
            ah = 10.0 ** -ph
            b = coupled_balance(r.tab, r, species_at(r, ah, ionic), ah, ionic)
            return b.residual, None, b.ionic
        b, bi = _coupled_state(r, ph, ionic)
        return b.residual, bi, b.ionic
    b = balance(r, species_at(r, 10.0 ** -ph, ionic))
    return b.residual, b.beta, b.ionic


def _coupled_state(r: Rows, ph, ionic, start=None):
    """The coupled balance at ``ph`` and its buffer intensity, β = -dR/dpH at
    fixed totals (a central difference, the second solve started from the first)."""
    ah = 10.0 ** -ph
    b = coupled_balance(r.tab, r, species_at(r, ah, ionic), ah, ionic, start)
    up = coupled_balance(r.tab, r, species_at(r, ah * 10.0 ** -_DPH, ionic),
                         ah * 10.0 ** -_DPH, ionic, b.core)
    down = coupled_balance(r.tab, r, species_at(r, ah * 10.0 ** _DPH, ionic),
                           ah * 10.0 ** _DPH, ionic, b.core)
    return b, -(up.residual - down.residual) / (2.0 * _DPH)
