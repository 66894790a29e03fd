"""The vectorised acid-base core: speciation, charge balance and solvers.

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
pH is the activity pH. With ``davies=True`` each ion's activity coefficient
comes from :func:`dosing.chem.activity.davies_log_gamma` at the ionic strength of
the solution itself; with ``davies=False`` the solution is ideal.
Concentrations are mol/L, taken equal to mol/kg (dilute water).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from .activity import davies_unit, debye_huckel_a
from ..errors import ModelError
from .metals import METALS, METAL_IDS
from .species import SITE_IDS, SYSTEMS, SYSTEM_IDS
from .water import calcite_pksp, carbonate_pk, henry_co2, pkw, vant_hoff_pk

__all__ = [
    "N_SYSTEMS", "N_ACIDS", "COLUMN_IDS", "METAL_COLUMNS", "CARBONATE", "SITE_COLUMNS",
    "system_index", "Mixture", "Speciation",
    "constants_at", "speciate", "charge_residual", "solve_ph",
    "strong_balance_at_ph", "carbonate_for_alkalinity", "dose_to_ph",
    "ReagentVector", "add_dose", "co2_in_air_mol_l",
]

#: Columns of the totals arrays: the weak-acid systems, then the metals.
COLUMN_IDS: tuple[str, ...] = SYSTEM_IDS + METAL_IDS
N_ACIDS = len(SYSTEMS)
N_SYSTEMS = len(COLUMN_IDS)
#: Columns that carry a metal (and its hydroxide solid).
METAL_COLUMNS = np.arange(N_ACIDS, N_SYSTEMS)
_MAXSTEP = 4
CARBONATE = SYSTEM_IDS.index("carbonate")
CALCIUM = COLUMN_IDS.index("calcium")
UNKNOWN = SYSTEM_IDS.index("unknown")
#: Columns of the fitted buffer sites (pKa set per mixture, see Mixture.site_pka).
SITE_COLUMNS = np.array([SYSTEM_IDS.index(i) for i in SITE_IDS])
_LN10 = np.log(10.0)

# Charge of each form (most protonated first), shape (m, 5). A metal's
# hydrolysis series is carried as an acid whose top form is the free ion.
_TOP = [s.top_charge for s in SYSTEMS] + [m.charge for m in METALS]
_Z = np.array([[z - k for k in range(_MAXSTEP + 1)] for z in _TOP], dtype=float)
_PK25 = np.full((N_SYSTEMS, _MAXSTEP), np.inf)
_DH = np.zeros((N_SYSTEMS, _MAXSTEP))
for _j, _s in enumerate(SYSTEMS):
    _PK25[_j, :_s.steps] = _s.pka25
    _DH[_j, :_s.steps] = _s.enthalpy_kj_mol
for _j, _m in enumerate(METALS, start=N_ACIDS):
    _PK25[_j, :_m.steps] = _m.stepwise_pk()
    _DH[_j, :_m.steps] = _m.stepwise_enthalpy()
# Hydroxide solids: log *Ks0 at 25 °C, its enthalpy and the ion's charge;
# NaN (no solid) for the weak acids.
_SOLID_LOGK = np.full(N_SYSTEMS, np.nan)
_SOLID_DH = np.zeros(N_SYSTEMS)
_SOLID_Z = np.zeros(N_SYSTEMS)
for _j, _m in enumerate(METALS, start=N_ACIDS):
    _SOLID_LOGK[_j] = _m.log_ks0
    _SOLID_DH[_j] = _m.enthalpy_ks0_kj_mol or 0.0
    _SOLID_Z[_j] = _m.charge


def system_index(system_id: str) -> int:
    """Column of ``system_id`` (a weak-acid system or a metal) in the totals arrays."""
    return COLUMN_IDS.index(system_id)


def co2_in_air_mol_l(temperature_c, pco2_atm):
    """Dissolved CO2* in equilibrium with a gas at ``pco2_atm`` [mol/L]."""
    return henry_co2(temperature_c) * np.asarray(pco2_atm, dtype=float)


@dataclass(frozen=True)
class Constants:
    """Thermodynamic constants for n temperatures."""

    kw: np.ndarray          #: (n,) ion product of water [-]
    k: np.ndarray           #: (n, m, 4) Ka of each step, 0 where no step [-]
    a: np.ndarray           #: (n,) Debye-Hückel A [(kg/mol)^(1/2)]
    log_ks0: np.ndarray     #: (n, m) log *Ks0 of each column's hydroxide, NaN if none [-]


def constants_at(temperature_c, cols=None) -> Constants:
    """Equilibrium constants at each temperature [°C] (0-60 °C).

    Carbonate uses Plummer & Busenberg (1982); water uses IAPWS R11-07; the
    other systems use van 't Hoff from their 25 °C values. Long arrays are
    computed once per distinct temperature. With ``cols`` the constants
    cover only those columns, in that order (the view of a solver
    restricted to the systems present); by default every column.
    """
    t = np.atleast_1d(np.asarray(temperature_c, dtype=float))
    cols = np.arange(N_SYSTEMS) if cols is None else np.asarray(cols, dtype=int)
    if t.size > 32:
        uniq, inv = np.unique(t, return_inverse=True)
        if uniq.size == 1:
            # One temperature (a replay without a temperature column): views,
            # not n copies; they are read-only, and nothing writes into them.
            c = _constants(uniq, cols)
            n = t.size
            return Constants(kw=np.broadcast_to(c.kw, (n,)),
                             k=np.broadcast_to(c.k, (n,) + c.k.shape[1:]),
                             a=np.broadcast_to(c.a, (n,)),
                             log_ks0=np.broadcast_to(c.log_ks0, (n,) + c.log_ks0.shape[1:]))
        if uniq.size < t.size:
            c = _constants(uniq, cols)
            return Constants(kw=c.kw[inv], k=c.k[inv], a=c.a[inv], log_ks0=c.log_ks0[inv])
    return _constants(t, cols)


def _constants(t: np.ndarray, cols: np.ndarray) -> Constants:
    pk = vant_hoff_pk(_PK25[None, cols, :], _DH[None, cols, :], t[:, None, None])
    carb = np.flatnonzero(cols == CARBONATE)
    if carb.size:
        pk1, pk2 = carbonate_pk(t)
        pk[:, carb[0], 0] = pk1
        pk[:, carb[0], 1] = pk2
    k = 10.0 ** -pk          # a missing step has pK = inf, so K = 0
    # log *Ks0 = -pK, and a pK moves by +dH/(R ln10) (1/T - 1/298.15).
    log_ks0 = np.full((t.size, cols.size), np.nan)
    solid = np.flatnonzero(np.isfinite(_SOLID_LOGK[cols]))
    if solid.size:
        log_ks0[:, solid] = -vant_hoff_pk(-_SOLID_LOGK[None, cols[solid]],
                                          _SOLID_DH[None, cols[solid]], t[:, None])
    return Constants(kw=10.0 ** -pkw(t), k=k, a=debye_huckel_a(t), log_ks0=log_ks0)


@dataclass(frozen=True)
class Mixture:
    """n waters as arrays, ready for the vectorised solvers.

    Attributes
    ----------
    totals_mol_l : ndarray (n, m)
        Total of each weak-acid system, columns in catalogue order [mol/L].
    strong_eq_l : ndarray (n,)
        Strong cations minus strong anions [eq/L].
    strong_ionic_strength : ndarray (n,)
        Ionic strength carried by the strong ions [mol/L].
    temperature_c : ndarray (n,)
        Temperature [°C].
    co2_air_mol_l : ndarray (n,)
        Dissolved CO2* held by contact with air [mol/L]; NaN for a closed
        water, whose carbonate total is then ``totals_mol_l[:, CARBONATE]``.
    davies : bool
        Davies activity correction (True) or ideal solution (False).
    unknown_pka : ndarray (n,) or None
        pKa of the fitted unidentified acid (column ``unknown``) [-].
    site_pka : ndarray (n, 8) or None
        pKa of each fitted buffer site (columns :data:`SITE_COLUMNS`), NaN
        for a site not used [-].
    calcite : bool
        Calcite (CaCO3) precipitates where the water is supersaturated with
        it (equilibrium); False (the default) keeps it dissolved, as a water
        often stays for hours at low supersaturation.
    """

    totals_mol_l: np.ndarray
    strong_eq_l: np.ndarray
    strong_ionic_strength: np.ndarray
    temperature_c: np.ndarray
    co2_air_mol_l: np.ndarray
    davies: bool = True
    unknown_pka: np.ndarray | None = None
    calcite: bool = False
    site_pka: np.ndarray | None = None

    @classmethod
    def build(cls, totals_mol_l, strong_eq_l, strong_ionic_strength,
              temperature_c, co2_air_mol_l=np.nan, davies=True,
              unknown_pka=None) -> "Mixture":
        """Broadcast the inputs to n waters and freeze them."""
        tot = np.atleast_2d(np.asarray(totals_mol_l, dtype=float))
        if tot.shape[1] < N_SYSTEMS:
            # Totals of the weak acids only: no metals.
            tot = np.pad(tot, ((0, 0), (0, N_SYSTEMS - tot.shape[1])))
        s = np.atleast_1d(np.asarray(strong_eq_l, dtype=float))
        n = max(tot.shape[0], s.shape[0])
        def vec(x):
            return np.broadcast_to(np.atleast_1d(np.asarray(x, dtype=float)), (n,)).copy()
        return cls(np.broadcast_to(tot, (n, N_SYSTEMS)).copy(), vec(s),
                   vec(strong_ionic_strength), vec(temperature_c),
                   vec(co2_air_mol_l), bool(davies),
                   None if unknown_pka is None else vec(unknown_pka))

    def constants(self, cols=None) -> Constants:
        """Constants at this mixture's temperatures, fitted pKa applied.

        ``cols``: only these columns, in that order (see :func:`constants_at`).
        """
        const = constants_at(self.temperature_c, cols)
        at = (np.array([UNKNOWN]) if cols is None
              else np.flatnonzero(np.asarray(cols) == UNKNOWN))
        if self.unknown_pka is not None and at.size:
            k = const.k.copy()
            k[:, at[0], 0] = np.where(np.isfinite(self.unknown_pka),
                                      10.0 ** -np.nan_to_num(self.unknown_pka), k[:, at[0], 0])
            const = Constants(const.kw, k, const.a, const.log_ks0)
        if self.site_pka is not None:
            cols_all = np.arange(N_SYSTEMS) if cols is None else np.asarray(cols)
            k = const.k.copy()
            for j, col in enumerate(SITE_COLUMNS):
                at = np.flatnonzero(cols_all == col)
                if at.size:
                    pk = self.site_pka[:, j]
                    k[:, at[0], 0] = np.where(np.isfinite(pk), 10.0 ** -np.nan_to_num(pk),
                                              k[:, at[0], 0])
            const = Constants(const.kw, k, const.a, const.log_ks0)
        return const

    def take(self, idx) -> "Mixture":
        """The waters ``idx`` only."""
        return replace(self, totals_mol_l=self.totals_mol_l[idx],
                       strong_eq_l=self.strong_eq_l[idx],
                       strong_ionic_strength=self.strong_ionic_strength[idx],
                       temperature_c=self.temperature_c[idx],
                       co2_air_mol_l=self.co2_air_mol_l[idx],
                       unknown_pka=None if self.unknown_pka is None else self.unknown_pka[idx],
                       site_pka=None if self.site_pka is None else self.site_pka[idx])

    @property
    def n(self) -> int:
        """Number of waters."""
        return self.strong_eq_l.shape[0]

    @property
    def open_to_air(self) -> np.ndarray:
        """(n,) True where dissolved CO2 is held by the air."""
        return np.isfinite(self.co2_air_mol_l)


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

    def concentration(self, system: int, form: int) -> np.ndarray:
        """(n,) concentration of one form of one system [mol/L]."""
        return self.totals_mol_l[:, system] * self.alpha[:, system, form]


_LN10 = float(np.log(10.0))


def _alpha(ah, kp):
    """Fractions (n, m, s+1) from a_H (n,) and mixed constants as planes
    (s, n, m), one per step (or (s, 1, m): the same constants for every water).

    Built form by form in contiguous (n, m) planes (a stride-4 last axis is
    slow in numpy); the result is a view with the form as its last axis.
    """
    steps = kp.shape[0]
    inv = (1.0 / ah)[:, None]
    planes = np.empty((steps + 1, ah.size, kp.shape[2]))
    planes[0] = 1.0
    for i in range(steps):
        np.multiply(planes[i], kp[i], out=planes[i + 1])
        planes[i + 1] *= inv
    planes /= planes.sum(axis=0)
    return np.moveaxis(planes, 0, -1)


def _state(r: "_Rows", ph, ionic_strength):
    """Species of all systems, residual, β and new ionic strength at ``ph``."""
    alpha, q, m2, h, oh, sol, kcal = _species(r, 10.0 ** -ph, ionic_strength)
    totals, resid, beta, ionic, calcite = _balance(r, alpha, q, m2, h, oh, sol, kcal)
    return alpha, q, totals, h, oh, resid, beta, ionic, calcite


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
    r = _restrict(mix, cap=solids)
    ionic = mix.strong_ionic_strength.copy()
    for _ in range(max_iter):
        alpha, q, totals, h, oh, resid, beta, new_i, calcite = _state(r, ph, ionic)
        done = np.all(np.abs(new_i - ionic) <= 1e-13 + 1e-10 * new_i)
        ionic = new_i
        if done or not mix.davies:
            break
    alpha, q, totals, h, oh, resid, beta, _, calcite = _state(r, ph, ionic)
    full_alpha = np.zeros((mix.n, N_SYSTEMS, _MAXSTEP + 1))
    full_alpha[:, :, 0] = 1.0
    full_alpha[:, r.cols] = alpha
    full_q = np.repeat(_Z[None, :, 0], mix.n, axis=0)
    full_q[:, r.cols] = q
    full_totals = np.zeros((mix.n, N_SYSTEMS))
    full_totals[:, r.cols] = totals
    precipitated = np.zeros_like(full_totals)
    precipitated[:, METAL_COLUMNS] = np.maximum(
        mix.totals_mol_l[:, METAL_COLUMNS] - full_totals[:, METAL_COLUMNS], 0.0)
    # Calcium in calcite is not lime left undissolved.
    precipitated[:, CALCIUM] = np.maximum(precipitated[:, CALCIUM] - calcite, 0.0)
    return Speciation(ph, h, oh, full_alpha, full_q, full_totals, ionic, resid, beta,
                      precipitated, calcite)


def charge_residual(mix: Mixture, ph) -> np.ndarray:
    """(n,) charge balance residual at ``ph`` [eq/L], ionic strength consistent."""
    return speciate(mix, ph).charge_residual_eq_l


@dataclass(frozen=True)
class _Rows:
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
    davies: bool
    cols: np.ndarray        # (mc,) catalogue columns the view keeps
    log_ks0: np.ndarray     # (n, mc) log *Ks0 of each column's hydroxide, NaN if none
    zs: np.ndarray          # (mc,) charge of the free metal ion, 0 if no solid
    cap: bool               # cap metals at their hydroxide's solubility
    ca: int = -1            # column of calcium in the view when calcite can form, or -1
    log_kc: np.ndarray | None = None   # (n,) log Ksp of calcite, with ``ca``

    @property
    def has_solids(self) -> bool:
        return self.cap and bool(np.any(self.zs > 0))

    def take(self, idx) -> "_Rows":
        return replace(self, totals=self.totals[idx], strong=self.strong[idx],
                       strong_i=self.strong_i[idx], co2=self.co2[idx], kw=self.kw[idx],
                       k=self.k[idx], a=self.a[idx], log_ks0=self.log_ks0[idx],
                       log_kc=None if self.log_kc is None else self.log_kc[idx])


def _used(mix: Mixture, extra_cols=()) -> np.ndarray:
    """Columns with a non-zero total (plus ``extra_cols``, and open carbonate)."""
    used = mix.totals_mol_l.any(axis=0)      # non-zero (NaN counts), no temporary
    used[list(extra_cols)] = True
    if mix.open_to_air.any():
        used[CARBONATE] = True
    return np.flatnonzero(used)


def _restrict(mix: Mixture, extra_cols=(), *, cap: bool = True) -> _Rows:
    """Keep only the systems with a non-zero total (plus ``extra_cols``)."""
    cols = _used(mix, extra_cols)
    const = mix.constants(cols)
    carb = int(np.searchsorted(cols, CARBONATE)) if CARBONATE in cols else -1
    ca, log_kc = -1, None
    if cap and mix.calcite and carb >= 0 and CALCIUM in cols:
        ca = int(np.searchsorted(cols, CALCIUM))
        log_kc = -calcite_pksp(mix.temperature_c)
    return _Rows(mix.totals_mol_l[:, cols], mix.strong_eq_l, mix.strong_ionic_strength,
                 mix.co2_air_mol_l, const.kw, const.k, const.a, _Z[cols], carb,
                 mix.davies, cols, const.log_ks0, _SOLID_Z[cols], cap, ca, log_kc)


def _species(r: _Rows, ah, ionic, *, m2: bool = True):
    """Fractions and charge moments of the view's systems, [H+] and [OH-].

    Returns (alpha (n, mc, 5), mean charge (n, mc), mean squared charge
    (n, mc; None when ``m2`` is false: only the ionic strength needs it),
    [H+] (n,), [OH-] (n,), solubility (n, mc) or None, calcite
    product (n,) or None) at activity ``ah`` and ionic strength ``ionic``
    (mixed constants from the Davies equation, or ideal). The solubility is
    the dissolved total each column's hydroxide allows, [Me z+]/alpha_0
    with [Me z+] = *Ks0 {H+}^z / gamma_z (NaN for columns without a solid);
    None when the view has none. The calcite product is the largest
    dissolved calcium total times dissolved carbonate total the water holds,
    Ksp / (gamma_Ca gamma_CO3 alpha_Ca alpha_CO3); for a water open to air
    (carbonate held) it enters calcium's solubility instead.
    """
    z2 = r.z * r.z
    if r.davies:
        # Trial pH values far from the root can imply absurd ionic strengths;
        # capping them keeps the trial finite (the answer never sits there).
        # log10 γ_z = -z² t for every species, t once per water: a step from
        # charge z to z - 1 scales its constant by 10^(-t (z² - (z-1)²)).
        t = davies_unit(np.minimum(ionic, _I_CEILING), r.a)
        g1 = 10.0 ** -t
        # Written as planes, one per step, for _alpha.
        kp = np.multiply(np.moveaxis(r.k, -1, 0),
                         np.exp((-_LN10 * t)[None, :, None] * (z2[:, :-1] - z2[:, 1:]).T[:, None]),
                         order="C")
    else:
        t, g1 = None, 1.0
        # One row of constants viewed n times (one temperature) stays one row.
        k = r.k[:1] if r.k.shape[0] and r.k.strides[0] == 0 else r.k
        kp = np.ascontiguousarray(np.moveaxis(k, -1, 0))
    alpha = _alpha(ah, kp)
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
        with np.errstate(divide="ignore", over="ignore"):
            kcal = 10.0 ** np.minimum(r.log_kc - log_g, 300.0) / (
                alpha[:, r.ca, 0] * alpha[:, r.carb, 2])
        opened = np.isfinite(r.co2)
        if opened.any():
            # Carbonate held by air: calcite caps calcium like a hydroxide.
            held = r.co2[opened] / alpha[opened, r.carb, 0]
            sol = sol.copy()
            sol[opened, r.ca] = np.minimum(sol[opened, r.ca], kcal[opened] / held)
    return alpha, q, m2, ah / g1, r.kw / (ah * g1), sol, kcal


def _capped(r: _Rows, sol, totals) -> np.ndarray | None:
    """(n, mc) True where a metal total exceeds its hydroxide's solubility."""
    if sol is None:
        return None
    with np.errstate(invalid="ignore"):
        return (r.zs[None, :] > 0) & (totals > sol)


def _balance(r: _Rows, alpha, q, m2, h, oh, sol=None, kcal=None):
    """Totals in effect, charge residual, β, ionic strength and calcite of a view.

    Two kinds of column hold a total fixed by a phase rather than by the
    water: carbonate open to air (CO2* fixed) and a metal whose hydroxide
    is present (free ion fixed by *Ks0). For both the total in effect is
    fixed / alpha_0 and d(T q)/dpH = -ln10 T m2 instead of -ln10 T var.
    Calcite in a closed water removes calcium and carbonate together (see
    :func:`_calcite`).
    """
    var = m2 - q * q
    totals = r.totals
    opened = np.isfinite(r.co2)
    capped = _capped(r, sol, totals)
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
    beta = _LN10 * (h + oh + np.einsum("nm,nm->n", totals, var)) + extra_beta
    new_i = 0.5 * (h + oh + np.einsum("nm,nm->n", totals, m2)) + r.strong_i
    return totals, resid, beta, new_i, calcite


def _calcite(r: _Rows, q, totals, kcal, rows, calcite):
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
    extra[over] = qs * qs * _LN10 * k / np.maximum(a + b - 2.0 * x, 1e-300)
    return extra


def _rows_state(r: _Rows, ph, ionic):
    """Residual [eq/L], β [eq/(L pH)] and ionic strength [mol/L] at ``ph``."""
    alpha, q, m2, h, oh, sol, kcal = _species(r, 10.0 ** -ph, ionic)
    return _balance(r, alpha, q, m2, h, oh, sol, kcal)[1:4]


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
    rows = _restrict(mix)
    ionic = mix.strong_ionic_strength.copy()
    ph = np.full(mix.n, 7.0) if ph_guess is None else np.broadcast_to(
        np.asarray(ph_guess, dtype=float), (mix.n,)).copy()
    ph, ionic = _newton(rows, ph, ionic, tol_ph, max_iter, mix.davies)
    if not mix.davies:
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
        fx = _rows_state(sub, p, x)[2]
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


def _newton(rows: _Rows, ph, ionic, tol_ph, max_iter, update_ionic):
    n = ph.shape[0]
    ph = np.clip(ph, -1.5 + 1e-9, 15.5 - 1e-9)
    ionic = ionic.copy()
    lo = np.full(n, -1.5)
    hi = np.full(n, 15.5)
    live = np.arange(n)
    for it in range(max_iter):
        sub = rows if live.size == n else rows.take(live)
        resid, beta, new_i = _rows_state(sub, ph[live], ionic[live])
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


def strong_balance_at_ph(totals_mol_l, ph, temperature_c, *, davies: bool,
                         extra_ionic_strength=0.0, co2_air_mol_l=np.nan,
                         max_iter: int = 60, unknown_pka=None,
                         known_strong_eq_l=0.0, solids: bool = False,
                         calcite: bool = False, ionic_guess=None):
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
    ionic-strength iteration (fewer steps; the same answer).

    Returns
    -------
    (strong_eq_l, ionic_strength) : tuple of ndarray
    """
    ph = np.atleast_1d(np.asarray(ph, dtype=float))
    mix = Mixture.build(totals_mol_l, np.zeros_like(ph), extra_ionic_strength,
                        temperature_c, co2_air_mol_l, davies, unknown_pka)
    extra = mix.strong_ionic_strength
    known = np.broadcast_to(np.asarray(known_strong_eq_l, dtype=float), ph.shape)
    bare = replace(mix, strong_eq_l=np.zeros(mix.n), strong_ionic_strength=np.zeros(mix.n),
                   calcite=calcite)
    rows = _restrict(bare, cap=solids)

    def at(ionic):
        resid, _, i_weak = _rows_state(rows, ph, ionic)
        s = -resid
        return s, i_weak + extra + 0.5 * np.abs(s - known)

    # A guess near the answer (a replay's rows are close to the scenario's
    # water) saves steps of the fixed point; the answer does not depend on it.
    i0 = extra if ionic_guess is None else np.broadcast_to(
        np.asarray(ionic_guess, dtype=float), ph.shape) + 0.0 * extra
    s, i1 = at(i0)
    if not davies:
        return s, i1
    # Each water keeps S from the step at which its ionic strength settled.
    ionic, (s,) = _settle(lambda i: at(i)[::-1], i0, i1, max_iter, payload=True)
    return np.where(np.isfinite(ionic), s, np.nan), ionic


def carbonate_for_alkalinity(totals_mol_l, ph, temperature_c, alk_eq_l,
                             endpoint_ph, *, davies: bool,
                             extra_ionic_strength=0.0, max_iter: int = 60,
                             unknown_pka=None, ferrous_oxidised: bool = False):
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
    as Fe(OH)3 and counts 2 eq/mol.

    Returns
    -------
    (carbonate_mol_l, coefficient, ionic_strength) : tuple of ndarray
        ``coefficient`` is z̄_c(pH_e) - z̄_c(pH) [-]; where it is not
        positive for alkalinity (negative for acidity) the carbonate cannot
        explain the measurement and the caller should refuse the input.
    """
    job = _AlkalinityJob.build(totals_mol_l, ph, temperature_c, alk_eq_l, endpoint_ph,
                               davies, extra_ionic_strength, unknown_pka, ferrous_oxidised)
    ionic, ionic_e = job.extra.copy(), job.extra.copy()
    c, coef, new_i, new_ie = job.solve(ionic, ionic_e)
    if not davies:
        return c, coef, new_i
    n = job.ph.shape[0]

    # Settle both strengths at once: stack them as one fixed point.
    def fn(x):
        _, _, a_, b_ = job.solve(x[:n], x[n:])
        return np.concatenate([a_, b_])
    both = _settle(fn, np.concatenate([ionic, ionic_e]), np.concatenate([new_i, new_ie]),
                   max_iter)
    ok = np.isfinite(both[:n]) & np.isfinite(both[n:])
    c, coef, new_i, _ = job.solve(np.where(ok, both[:n], 0.0), np.where(ok, both[n:], 0.0))
    return np.where(ok, c, np.nan), coef, np.where(ok, new_i, np.nan)


@dataclass(frozen=True)
class _AlkalinityJob:
    """The fixed parts of :func:`carbonate_for_alkalinity`: the water without
    carbonate, at the sample pH and at the end point."""

    rows: _Rows
    ph: np.ndarray          # (n,) sample pH
    ep: np.ndarray          # (n,) end-point pH
    alk: np.ndarray         # (n,) alkalinity (+) or minus acidity [eq/L]
    extra: np.ndarray       # (n,) known strong-ion ionic strength [mol/L]
    fe2: np.ndarray         # column of ferrous iron in the view (empty if none)
    ferrous_oxidised: bool

    @classmethod
    def build(cls, totals_mol_l, ph, temperature_c, alk_eq_l, endpoint_ph, davies,
              extra_ionic_strength, unknown_pka, ferrous_oxidised) -> "_AlkalinityJob":
        ph = np.atleast_1d(np.asarray(ph, dtype=float))
        tot = np.broadcast_to(np.atleast_2d(np.asarray(totals_mol_l, dtype=float)),
                              (ph.shape[0], N_SYSTEMS)).copy()
        tot[:, CARBONATE] = 0.0
        t = np.broadcast_to(np.asarray(temperature_c, dtype=float), ph.shape)
        bare = Mixture.build(tot, 0.0, 0.0, t, np.nan, davies, unknown_pka)
        rows = _restrict(bare, extra_cols=[CARBONATE])
        return cls(rows, ph, np.broadcast_to(np.asarray(endpoint_ph, float), ph.shape),
                   np.broadcast_to(np.asarray(alk_eq_l, dtype=float), ph.shape),
                   np.broadcast_to(np.asarray(extra_ionic_strength, float), ph.shape),
                   np.flatnonzero(rows.cols == system_index("iron_ii")), ferrous_oxidised)

    def end_totals(self, sol_e):
        """Totals at the end point: metals capped at their hydroxide's
        solubility, ferrous iron gone when it is counted as oxidised."""
        t_e = self.rows.totals.copy()
        if self.ferrous_oxidised and self.fe2.size:
            t_e[:, self.fe2] = 0.0
        capped = _capped(self.rows, sol_e, t_e)
        if capped is not None:
            t_e[capped] = sol_e[capped]
        return t_e

    def solve(self, ionic, ionic_e):
        """(carbonate, its coefficient, new ionic strength at the sample and
        at the end point) at the given ionic strengths."""
        rows, car, alk, extra = self.rows, self.rows.carb, self.alk, self.extra
        _, q, m2, h, oh, _, _ = _species(rows, 10.0 ** -self.ph, ionic)
        _, qe, m2e, he, ohe, sol_e, _ = _species(rows, 10.0 ** -self.ep, ionic_e)
        t_e = self.end_totals(sol_e)
        known = (t_e * qe - rows.totals * q).sum(-1) + (he - ohe) - (h - oh)
        coef = qe[:, car] - q[:, car]
        with np.errstate(divide="ignore", invalid="ignore"):
            c = (alk - known) / coef
        full = rows.totals.copy()
        full[:, car] = np.where(np.isfinite(c), c, 0.0)
        t_e[:, car] = full[:, car]
        s = -(h - oh + (full * q).sum(-1))
        # Strong ions as monovalent; the titrant (HCl or NaOH) adds |A|/2.
        new_i = 0.5 * (h + oh + (full * m2).sum(-1)) + 0.5 * np.abs(s) + extra
        new_ie = (0.5 * (he + ohe + (t_e * m2e).sum(-1)) + 0.5 * np.abs(s)
                  + 0.5 * np.abs(alk) + extra)
        return c, coef, new_i, new_ie


@dataclass(frozen=True)
class ReagentVector:
    """What one mole of a reagent's active compound adds to a water.

    Attributes
    ----------
    totals_mol : ndarray (m,)
        Moles added to each weak-acid total [mol/mol].
    strong_eq : float
        Strong-ion equivalents added (Na+ +1, Ca2+ +2, Cl- -1) [eq/mol].
    ionic_strength : float
        Ionic strength added by those strong ions per litre when 1 mol/L is
        dosed [mol/mol], e.g. 0.5 for Na+ and 2 for Ca2+.
    volume_l : float
        Volume of product that carries one mole [L/mol]; 0 for a solid or a
        gas (the water's volume does not change).
    """

    totals_mol: np.ndarray
    strong_eq: float
    ionic_strength: float
    volume_l: float


def add_dose(mix: Mixture, reagent: ReagentVector, dose_mol_l) -> Mixture:
    """The mixture after dosing ``dose_mol_l`` [mol per L of water] (n,).

    Dilution by the product's own volume is included. Where the water is
    open to air, added carbonate leaves as CO2 and the dissolved CO2 stays
    at its air value.
    """
    d = np.broadcast_to(np.asarray(dose_mol_l, dtype=float), (mix.n,))
    f = 1.0 / (1.0 + d * reagent.volume_l)
    tot = f[:, None] * (mix.totals_mol_l + d[:, None] * reagent.totals_mol[None, :])
    return replace(mix, totals_mol_l=tot,
                   strong_eq_l=f * (mix.strong_eq_l + d * reagent.strong_eq),
                   strong_ionic_strength=f * (mix.strong_ionic_strength
                                              + d * reagent.ionic_strength))


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
    rows = _restrict(mix, extra_cols=np.flatnonzero(n_full))
    job = _DoseJob(mix, rows, n_full[rows.cols], reagent, 10.0 ** -tp)
    dose, den, sol, capped = job.solve(None, max_iter)
    for _ in range(_CAP_PASSES - 1):
        if sol is None:
            break
        now = job.capped_after(dose, sol)
        redo = np.flatnonzero(np.any(now != capped, axis=1))
        if redo.size == 0:
            break
        # Only the waters whose choice changed are solved again.
        capped[redo] = now[redo]
        dose[redo], den[redo], sol[redo], _ = job.take(redo).solve(capped[redo], max_iter)
    return dose, den


#: Passes over the choice of capped metals in :func:`dose_to_ph`; one more
#: than the longest chain seen (metal from the reagent itself, e.g. lime).
_CAP_PASSES = 5


@dataclass(frozen=True)
class _DoseJob:
    """The fixed parts of one :func:`dose_to_ph` call."""

    mix: Mixture
    rows: _Rows
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

    def capped_after(self, dose, sol):
        """Metals whose diluted total after ``dose`` exceeds their solubility."""
        g = self.given(dose)
        f = 1.0 / (1.0 + g * self.reagent.volume_l)
        after = f[:, None] * (self.rows.totals + g[:, None] * self.n_r[None, :])
        return _capped(self.rows, sol, after) & (after > 0)

    def at(self, ionic, capped):
        """Dose, slope, new ionic strength, solubilities and the capped set.

        ``capped`` None is the first guess: the metals already above their
        solubility at the target before any dose (most waters keep it).
        """
        rows, mix, v = self.rows, self.mix, self.reagent.volume_l
        alpha, q, m2, h, oh, sol, kcal = _species(rows, self.ah, ionic, m2=mix.davies)
        if capped is None:
            capped = (np.zeros(rows.totals.shape, dtype=bool) if sol is None
                      else self.capped_after(np.zeros(mix.n), sol))
        w = h - oh
        fixed, held = self._fixed(alpha, sol, capped)
        if fixed is None:
            # Nothing held by a phase (the common case): sums without temporaries.
            num = mix.strong_eq_l + np.einsum("nm,nm->n", rows.totals, q) + w
            den = self.reagent.strong_eq + q @ self.n_r + v * w
        else:
            w = w + np.einsum("nm,nm->n", held, q)
            num = mix.strong_eq_l + np.einsum("nm,nm->n", np.where(fixed, 0.0, rows.totals),
                                              q) + w
            den = (self.reagent.strong_eq
                   + np.einsum("nm,nm->n", np.where(fixed, 0.0, self.n_r[None, :]), q) + v * w)
        with np.errstate(divide="ignore", invalid="ignore"):
            dose = -num / den
        calcite = np.zeros(mix.n)
        if kcal is not None:
            no_fix = np.zeros(rows.totals.shape, dtype=bool) if fixed is None else fixed
            dose, calcite = self._calcite(dose, num, den, q, kcal, no_fix)
        if not mix.davies:
            return dose, den, None, sol, capped
        g = self.given(dose)
        f = 1.0 / (1.0 + g * v)
        if fixed is None and kcal is None:
            weak = f * (np.einsum("nm,nm->n", rows.totals, m2) + g * (m2 @ self.n_r))
        else:
            tot_after = f[:, None] * (rows.totals + g[:, None] * self.n_r)
            if fixed is not None:
                tot_after = np.where(fixed, held, tot_after)
            if kcal is not None:
                tot_after[:, rows.ca] -= f * calcite
                tot_after[:, rows.carb] -= f * calcite
            weak = np.einsum("nm,nm->n", tot_after, m2)
        strong_i = f * (mix.strong_ionic_strength + g * self.reagent.ionic_strength)
        new_i = 0.5 * (h + oh + weak) + strong_i
        return dose, den, new_i, sol, capped

    def _fixed(self, alpha, sol, capped):
        """Columns whose concentration a phase holds (carbonate open to air, a
        metal at its hydroxide's solubility) and those concentrations; (None,
        None) when there are none."""
        rows, mix = self.rows, self.mix
        opened = mix.open_to_air
        open_c = rows.carb >= 0 and bool(opened.any())
        if not open_c and not capped.any():
            return None, None
        fixed = np.zeros(rows.totals.shape, dtype=bool)
        held = np.zeros(rows.totals.shape)
        if open_c:
            fixed[opened, rows.carb] = True
            held[opened, rows.carb] = mix.co2_air_mol_l[opened] / alpha[opened, rows.carb, 0]
        if capped.any():
            fixed |= capped
            held[capped] = sol[capped]
        return fixed, held

    def _calcite(self, dose, num, den, q, kcal, fixed):
        """Dose with calcite precipitating in closed waters, and the calcite
        [mol per L of water before dilution].

        With X' calcite per litre before dilution, the charge balance (times
        1 + d v) is num + d den - k X' = 0, k = q_Ca + q_C, so X' is linear
        in d; calcite equilibrium, (Ca + d n_Ca - X')(C + d n_C - X') =
        K' (1 + d v)^2, is then a quadratic in d. Its root with X' >= 0 and
        both dissolved totals >= 0 is taken where the dose without calcite
        leaves the water supersaturated.
        """
        rows, v = self.rows, self.reagent.volume_l
        ca, cb = rows.ca, rows.carb
        live = ~self.mix.open_to_air & ~fixed[:, ca] & ~fixed[:, cb] & np.isfinite(dose)
        g = self.given(dose)
        f = 1.0 / (1.0 + g * v)
        a0, b0 = rows.totals[:, ca], rows.totals[:, cb]
        a1, b1 = self.n_r[ca], self.n_r[cb]
        over = live & (f * f * (a0 + g * a1) * (b0 + g * b1) > kcal)
        calcite = np.zeros(dose.shape)
        if not over.any():
            return dose, calcite
        k = (q[:, ca] + q[:, cb])[over]
        nu, de, kc = num[over], den[over], kcal[over]
        p0, p1 = a0[over] - nu / k, a1 - de / k
        q0, q1 = b0[over] - nu / k, b1 - de / k
        c2 = p1 * q1 - kc * v * v
        c1 = p0 * q1 + p1 * q0 - 2.0 * kc * v
        c0 = p0 * q0 - kc
        with np.errstate(divide="ignore", invalid="ignore"):
            disc = np.sqrt(np.maximum(c1 * c1 - 4.0 * c2 * c0, 0.0))
            linear = np.abs(c2) < 1e-12 * (np.abs(c1) + 1e-300)
            roots = np.stack([np.where(linear, -c0 / c1, (-c1 - disc) / (2.0 * c2)),
                              np.where(linear, -c0 / c1, (-c1 + disc) / (2.0 * c2))])
            x = (nu + roots * de) / k
            ok = (np.isfinite(roots) & (x >= -1e-15) & (p0 + p1 * roots >= -1e-15)
                  & (q0 + q1 * roots >= -1e-15))
        # Where both roots qualify, the one precipitating less (the first
        # reached along the dose path).
        x_pick = np.where(ok, x, np.inf).min(axis=0)
        pick = np.where(ok & (x == x_pick), roots, np.nan)
        d = np.nanmin(np.where(np.isfinite(pick), pick, np.inf), axis=0)
        d = np.where(np.isfinite(d), d, np.nan)
        out = dose.copy()
        out[over] = d
        calcite[over] = np.where(np.isfinite(d), np.maximum((nu + d * de) / k, 0.0), 0.0)
        return out, calcite

    def solve(self, capped, max_iter):
        """(dose, slope, solubilities, capped set) with the capped metals
        given (None: the first guess of :meth:`at`, then held)."""
        ionic = self.mix.strong_ionic_strength.copy()
        dose, den, new_i, sol, capped = self.at(ionic, capped)
        if not self.mix.davies:
            return dose, den, sol, capped

        def step(i):
            d, slope, i_new, sl, _ = self.at(i, capped)
            return i_new, d, slope, sl
        # Each water keeps the dose of the step at which its ionic strength
        # settled (within 1e-10 of it), so no last pass is needed.
        ionic, (dose, den, sol) = _settle(step, ionic, new_i, max_iter, payload=True)
        # Waters whose ionic strength does not settle (a dose without bound,
        # where the reagent has no grip) get no number.
        return np.where(np.isfinite(ionic), dose, np.nan), den, sol, capped


#: Relative change of the ionic strength at which :func:`_settle` stops.
#: The secant converges fast, so the ionic strength is then within about
#: 1e-10 of its fixed point; measured on three demos (20,000 waters each,
#: dose and strong balance), doses differ from those at 1e-10 by at most
#: 1.1e-10 relative, far inside the 1e-4 at which outside solvers are
#: checked. It saves one pass of four in the dose solve.
_SETTLE_RTOL = 1e-8

#: Ionic strength above which a fixed point is abandoned [mol/L].
_I_CEILING = 20.0


def _settle(fn, x0, x1, max_iter, *, payload: bool = False):
    """Fixed point x = fn(x) for every element, with secant acceleration.

    Each step takes the secant root of g(x) = fn(x) - x through the last two
    points when it is positive and finite, else the plain fixed-point step.
    Elements that do not settle within ``max_iter`` steps or pass
    :data:`_I_CEILING` come back as NaN.

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
        done = live & (np.abs(g) <= 1e-13 + _SETTLE_RTOL * np.abs(fx))
        out[done] = fx[done]
        for k, e in zip(kept, extra):
            if k is not None:
                k[done] = e[done]
        live &= ~done & np.isfinite(fx) & (fx < _I_CEILING)
        if not live.any():
            break
        with np.errstate(divide="ignore", invalid="ignore"):
            sec = x - g * (x - x_prev) / (g - g_prev)
        step = np.where(np.isfinite(sec) & (sec >= 0.0), sec, fx)
        x_prev, g_prev = x, g
        x = np.where(live, step, x)
    return (out, tuple(kept)) if payload else out
