"""The speciation core for components that couple: complexes, ion pairs and solids.

At a fixed pH every one-component species (the protonation series of an
acid, the hydrolysis of a metal) is a fixed fraction of that component's
*uncomplexed total* U_j (:mod:`.speciation`). What couples components is the
species of :mod:`.complexes` and the solids of :mod:`.phases`. In the
tableau form of Morel & Morgan (1972), with y_j = ln U_j:

    ln c_s = L_s + sum_j n_sj y_j                         (each complex s)
    F_j    = U_j + sum_s n_sj c_s + sum_p n_pj x_p - T_j = 0   (each coupled component)
    G_p    = L_p + sum_j n_pj y_j = 0                     (each solid p present)

where L_s and L_p gather, per water, the constant, the reference form's
fraction, the activity coefficients and the proton term at that pH, and x_p
is the amount of solid p. The equations are solved for every water at once
by a damped Newton iteration (Westall's method); its Jacobian is
[[diag(U) + N' diag(c) N, N_p'], [N_p, 0]]. Solids are chosen by saturation
(an active set): a solid forms where the water is supersaturated with it and
leaves where its amount would be negative, one change at a time, so the phase
rule holds. A water open to air holds its CO2 like a solid that never runs
out (its amount may be negative: what leaves as gas).

The dose to a target pH joins the same Newton system as one more unknown
with the charge balance as its equation (:func:`dose_and_state`): a dose
whose ion complexes or precipitates (lime with sulfate and carbonate)
changes the speciation, which the direct solve cannot express.

References
----------
1. Morel, F.; Morgan, J. (1972). A numerical method for computing
   equilibria in aqueous chemical systems. Environ. Sci. Technol. 6, 58-67.
2. Westall, J. C. (1979). MICROQL: I. A chemical equilibrium program in
   BASIC. Swiss Federal Institute of Technology, EAWAG (from memory).
3. Carrayrou, J.; Mosé, R.; Behra, P. (2002). New efficient algorithm for
   solving thermodynamic chemistry. AIChE J. 48, 894-904 (the positive
   continued fraction start; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import NamedTuple

import numpy as np

from . import sit
from .columns import COLUMN_IDS, LN10, N_ACIDS, Z
from .complexes import COMPLEXES
from .metals import METALS
from .phases import CALCITE, PHASES, Phase
from .species import SYSTEMS
from .water import R_J_MOL_K, calcite_pksp

try:                                    # the compiled per-water loop, if numba is here
    from . import coupled_kernel as _kernel
except ImportError:                     # pragma: no cover - numba is a dependency
    _kernel = None

__all__ = ["Tableau", "tableau_for", "Core", "equilibrate", "equilibrate_reference", "KERNEL",
           "ref_forms", "CoupledBalance", "coupled_balance", "CO2_AIR"]

#: Forms carried per column (most protonated first).
_FORMS = 5
#: Largest change of ln U in one Newton step (a factor of e^4, about 55).
_STEP = 4.0
#: Largest ln c a trial may take (far above any real concentration).
_LN_CAP = 50.0
_STEPS = [s.steps for s in SYSTEMS] + [0] * len(METALS)


def ref_forms() -> np.ndarray:
    """Form index of each column's reference form: the free ion of a metal,
    the fully deprotonated form of an acid."""
    return np.array(_STEPS, dtype=int)


_REF = ref_forms()
_CX_POS = {c.id: i for i, c in enumerate(COMPLEXES)}
_PHASE_POS = {p.id: i for i, p in enumerate(PHASES)}
#: CO2 held by air, as a solid that never runs out: carbonate's uncomplexed
#: total is CO2* / alpha_0 (its log K is set per water, see :func:`_log_terms`).
CO2_AIR = Phase("co2_air", "CO2 from air", "CO2", (("carbonate", 1),), 0, 0.0, None, 44.01,
                0.0, "air at the scenario's pCO2 (Henry's law, dosing.chem.water)")


@dataclass(frozen=True)
class Tableau:
    """The coupled part of a solver's view: which columns couple, and how.

    Column positions are those of the view (:class:`~dosing.chem.speciation.Rows`).
    """

    cols: np.ndarray          #: (kc,) view positions of the coupled columns
    ref: np.ndarray           #: (kc,) reference form of each
    zref2: np.ndarray         #: (kc,) its squared charge
    nu: np.ndarray            #: (ns, kc) complexes
    h: np.ndarray             #: (ns,) protons in each formation
    z: np.ndarray             #: (ns,) charge of each complex
    log_k25: np.ndarray       #: (ns,)
    dh: np.ndarray            #: (ns,) enthalpy [kJ/mol], 0 where unknown
    ids: tuple[str, ...]
    pnu: np.ndarray           #: (np, kc) solids
    ph: np.ndarray            #: (np,) exponent of a_H in each solid's ion activity product
    plog_k25: np.ndarray      #: (np,)
    pdh: np.ndarray           #: (np,)
    phase_ids: tuple[str, ...]
    calcite: int              #: index of calcite among the solids, or -1
    air: int                  #: index of the CO2-from-air phase, or -1
    sparse: tuple             #: (columns, counts) of the complexes, then of the solids (:func:`sparse`)
    eps: np.ndarray           #: (ns,) interaction coefficient of each complex (SIT; by charge)
    cx_index: np.ndarray      #: (ns,) position of each complex in COMPLEXES
    phase_index: np.ndarray   #: (np,) position of each solid in PHASES (-1: CO2 from air)

    @property
    def kc(self) -> int:
        return self.cols.size

    def shifted(self, log_k: tuple[np.ndarray, np.ndarray], shift) -> tuple[np.ndarray,
                                                                           np.ndarray]:
        """``log_k`` (from :meth:`log_k`) with a LogKShift's per-water shifts added."""
        lk, lp = log_k
        lp_shift = np.where(self.phase_index >= 0,
                            shift.phases[:, np.maximum(self.phase_index, 0)], 0.0)
        return lk + shift.complexes[:, self.cx_index], lp + lp_shift

    def log_k(self, temperature_c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(n, ns) and (n, np) log10 K at each temperature (van 't Hoff; calcite
        by Plummer & Busenberg 1982)."""
        inv = (1.0 / (np.asarray(temperature_c, dtype=float) + 273.15) - 1.0 / 298.15)
        f = -1000.0 / (R_J_MOL_K * LN10) * inv[:, None]
        # Both sets move by ln K(T) = ln K(25 °C) - ΔH/R (1/T - 1/298.15) with
        # the enthalpy of the reaction each K describes: a complex's formation,
        # a solid's dissolution (a sign turned here once made brucite, lime and
        # Al(OH)3 more soluble when warm, against the direct solver).
        lk = self.log_k25[None, :] + f * self.dh[None, :]
        lp = self.plog_k25[None, :] + f * self.pdh[None, :]
        if self.calcite >= 0:
            lp[:, self.calcite] = -calcite_pksp(temperature_c)
        return lk, lp


def tableau_for(view_cols: np.ndarray, *, solids: bool, calcite: bool
                ) -> Tableau | None:
    """The tableau of a view's columns, or None when nothing couples them
    (then the direct solvers of :mod:`.speciation` apply unchanged)."""
    return _tableau(tuple(int(c) for c in view_cols), bool(solids), bool(calcite))


@lru_cache(maxsize=256)
def _tableau(view_cols: tuple[int, ...], solids: bool, calcite: bool) -> Tableau | None:
    present = {COLUMN_IDS[c] for c in view_cols}
    cx = [c for c in COMPLEXES if all(p in present for p, _ in c.parts)]
    multi = [p for p in PHASES if len(p.parts) > 1 and p is not CALCITE
             and all(q in present for q, _ in p.parts)] if solids else []
    use_calcite = solids and calcite and {"calcium", "carbonate"} <= present
    if not cx and not multi:
        return None
    coupled = sorted({COLUMN_IDS.index(q) for c in cx for q, _ in c.parts}
                     | {COLUMN_IDS.index(q) for p in multi for q, _ in p.parts}
                     | ({COLUMN_IDS.index("calcium"), COLUMN_IDS.index("carbonate")}
                        if use_calcite else set())
                     | ({c for c in view_cols if c >= N_ACIDS} if solids else set()))
    pos = {c: i for i, c in enumerate(coupled)}
    phases = ([p for p in PHASES[:len(METALS)] if COLUMN_IDS.index(p.parts[0][0]) in pos]
              if solids else [])
    phases += ([CALCITE] if use_calcite else []) + multi
    if COLUMN_IDS.index("carbonate") in pos:
        phases.append(CO2_AIR)
    return _assemble(view_cols, coupled, pos, cx, phases)


def _assemble(view_cols, coupled, pos, cx, phases) -> Tableau:
    """The arrays of a tableau from its complexes and solids."""
    view_pos = {c: i for i, c in enumerate(view_cols)}
    kc = len(coupled)
    ref = _REF[coupled]
    zref = np.array([Z[c, r] for c, r in zip(coupled, ref)])
    nu = np.zeros((len(cx), kc))
    for s, c in enumerate(cx):
        for q, n in c.parts:
            nu[s, pos[COLUMN_IDS.index(q)]] += n
    h = np.array([c.h for c in cx], dtype=float)
    pnu = np.zeros((len(phases), kc))
    for p, ph in enumerate(phases):
        for q, n in ph.parts:
            pnu[p, pos[COLUMN_IDS.index(q)]] += n
    return Tableau(
        cols=np.array([view_pos[c] for c in coupled], dtype=int), ref=ref, zref2=zref * zref,
        nu=nu, h=h, z=nu @ zref + h, log_k25=np.array([c.log_k25 for c in cx]),
        dh=np.array([c.enthalpy_kj_mol or 0.0 for c in cx]), ids=tuple(c.id for c in cx),
        pnu=pnu, ph=np.array([p.h for p in phases], dtype=float),
        plog_k25=np.array([p.log_k25 for p in phases]),
        pdh=np.array([p.enthalpy_kj_mol or 0.0 for p in phases]),
        phase_ids=tuple(p.id for p in phases),
        calcite=next((i for i, p in enumerate(phases) if p is CALCITE), -1),
        air=next((i for i, p in enumerate(phases) if p is CO2_AIR), -1),
        sparse=sparse(nu) + sparse(pnu),
        eps=np.array([sit.estimate(int(round(z))) for z in nu @ zref + h]),
        cx_index=np.array([_CX_POS[c.id] for c in cx], dtype=int),
        phase_index=np.array([_PHASE_POS.get(p.id, -1) for p in phases], dtype=int))


def sparse(m: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(columns, counts) of each row of a stoichiometry matrix, -1 padded:
    the compiled kernel's form of the complexes and solids."""
    width = max(1, int((m != 0).sum(axis=1).max(initial=0)))
    cols = np.full((m.shape[0], width), -1, dtype=np.int64)
    counts = np.zeros((m.shape[0], width))
    for r in range(m.shape[0]):
        nz = np.flatnonzero(m[r])
        cols[r, :nz.size], counts[r, :nz.size] = nz, m[r, nz]
    return cols, counts


@dataclass
class Core:
    """The coupled part of n waters at one pH: its unknowns and what they give."""

    y: np.ndarray            #: (n, kc) ln U of each coupled column (-inf where absent)
    x: np.ndarray            #: (n, np) amount of each solid [mol/L] (0 where absent)
    active: np.ndarray       #: (n, np) solids present
    c: np.ndarray            #: (n, ns) complexes [mol/L]
    iterations: int = 0

    @property
    def u(self) -> np.ndarray:
        return np.exp(self.y)

    def take(self, idx) -> "Core":
        """The waters ``idx`` only."""
        return Core(self.y[idx], self.x[idx], self.active[idx], self.c[idx], self.iterations)


def _solve_step(tab: Tableau, u, c, active, f, g, scale) -> tuple[np.ndarray, np.ndarray]:
    """One Newton step (dy, dx) for every water: the KKT system, rows scaled."""
    n, kc, npx = u.shape[0], tab.kc, tab.pnu.shape[0]
    k = kc + npx
    jac = np.zeros((n, k, k))
    a = np.einsum("ns,sk,sl->nkl", c, tab.nu, tab.nu)
    idx = np.arange(kc)
    a[:, idx, idx] += u
    jac[:, :kc, :kc] = a
    if npx:
        on = active[:, None, :].astype(float)
        jac[:, :kc, kc:] = tab.pnu.T[None, :, :] * on
        jac[:, kc:, :kc] = tab.pnu[None, :, :] * active[:, :, None]
        off = ~active
        jac[:, kc + np.arange(npx), kc + np.arange(npx)] = off.astype(float)
    rhs = np.concatenate([-f, np.where(active, -g, 0.0)], axis=1)
    jac[:, :kc, :] /= scale[:, :, None]
    rhs[:, :kc] /= scale
    step = np.linalg.solve(jac, rhs[..., None])[..., 0]
    return step[:, :kc], step[:, kc:]


#: Totals below this are taken as absent [mol/L]: one ion in about two
#: million litres, far below any measurement, and well above the subnormal
#: floats on which the mass-balance scaling would overflow.
TOTAL_FLOOR = 1e-30


def equilibrate(tab: Tableau, totals: np.ndarray, lk: np.ndarray, lp: np.ndarray,
                core: Core | None = None, *, max_iter: int = 80,
                held: np.ndarray | None = None) -> Core:
    """Solve the coupled equations of every water at one pH (see the module notes).

    ``totals`` (n, kc) are the coupled columns' totals [mol/L]; ``lk`` (n, ns)
    and ``lp`` (n, np) the natural-log terms L_s and L_p at this pH and
    ionic strength. ``core`` starts the iteration (a previous answer); by
    default it starts uncomplexed, with no solid. ``held`` (n, np) marks
    solids that are always present whatever their amount (CO2 from air).

    The waters run one by one in compiled code (:mod:`.coupled_kernel`)
    where numba is installed, else through :func:`equilibrate_reference`;
    the two solve the same equations to the same tolerances (tested).
    """
    # A total below TOTAL_FLOOR is nothing (a subnormal such as 5e-324 mol/L
    # would scale a mass balance by infinity).
    totals = np.where(totals < TOTAL_FLOOR, 0.0, totals)
    if _kernel is None or not KERNEL.on:
        return equilibrate_reference(tab, totals, lk, lp, core, max_iter=max_iter, held=held)
    n, npx = totals.shape[0], tab.pnu.shape[0]
    held = np.zeros((n, npx), dtype=bool) if held is None else np.ascontiguousarray(held)
    if core is None:
        y, x = np.zeros((n, tab.kc)), np.zeros((n, npx))
        active = held.copy()
    else:
        y, x, active = core.y.copy(), core.x.copy(), core.active | held
    c = np.zeros((n, tab.nu.shape[0]))
    steps = _kernel.solve_rows(*tab.sparse, np.ascontiguousarray(totals),
                               np.ascontiguousarray(lk), np.ascontiguousarray(lp), held,
                               y, x, active, c, core is None, max_iter)
    return Core(y, x, active, c, int(steps.max(initial=0)))


class _Switch:
    """Whether :func:`equilibrate` uses the compiled kernel (tests turn it off
    to run the reference)."""

    on: bool = True


KERNEL = _Switch()


def equilibrate_reference(tab: Tableau, totals: np.ndarray, lk: np.ndarray, lp: np.ndarray,
                          core: Core | None = None, *, max_iter: int = 80,
                          held: np.ndarray | None = None) -> Core:
    """:func:`equilibrate` in numpy, every water at once: the reference."""
    n = totals.shape[0]
    live = totals > 0
    npx = tab.pnu.shape[0]
    held = np.zeros((n, npx), dtype=bool) if held is None else held
    if core is None:
        y = np.where(live, np.log(np.where(live, totals, 1.0)), -np.inf)
        core = Core(y, np.zeros((n, npx)), held.copy(), np.zeros((n, tab.nu.shape[0])))
        _warm_start(tab, totals, lk, core)
    else:
        core = Core(np.where(live, np.maximum(core.y, -700.0), -np.inf), core.x.copy(),
                    core.active | held, core.c)
    for _ in range(2 * npx + 2):
        _newton(tab, totals, lk, lp, core, max_iter)
        if not _change_solids(tab, lp, core, held):
            break
    core.c = np.exp(np.minimum(lk + _finite(core.y) @ tab.nu.T, _LN_CAP))
    core.c[np.isinf(core.y) @ (tab.nu.T > 0)] = 0.0
    return core


def _finite(y: np.ndarray) -> np.ndarray:
    """ln U with absent columns at a value that makes their complexes vanish."""
    return np.where(np.isfinite(y), y, -1e4)


def _warm_start(tab: Tableau, totals, lk, core: Core, passes: int = 6) -> None:
    """A few positive-continued-fraction passes (Carrayrou et al. 2002):
    U_j <- U_j (T_j / S_j)^(1/n_j), S_j the dissolved total U gives."""
    top = np.maximum(tab.nu.max(axis=0, initial=1.0), 1.0)
    for _ in range(passes):
        c = np.exp(np.minimum(lk + _finite(core.y) @ tab.nu.T, _LN_CAP))
        s = np.exp(core.y) + c @ tab.nu
        with np.errstate(divide="ignore", invalid="ignore"):
            core.y = np.where(np.isfinite(core.y),
                              core.y + np.log(totals / s) / top, core.y)


def _newton(tab: Tableau, totals, lk, lp, core: Core, max_iter: int) -> None:
    """Newton iterations of every water with its solids as they stand."""
    live = np.isfinite(core.y)
    scale = np.where(live, totals, 1.0)
    rows = np.arange(totals.shape[0])
    todo = np.ones(rows.size, dtype=bool)
    for it in range(max_iter):
        sub = rows[todo]
        y = core.y[sub]
        c = np.exp(np.minimum(lk[sub] + _finite(y) @ tab.nu.T, _LN_CAP))
        u = np.where(live[sub], np.exp(y), 0.0)
        f = np.where(live[sub], u + c @ tab.nu + core.x[sub] @ tab.pnu - totals[sub], 0.0)
        g = lp[sub] + _finite(y) @ tab.pnu.T
        ok = (np.all(np.abs(f) <= 1e-11 * scale[sub] + 1e-30, axis=1)
              & np.all(~core.active[sub] | (np.abs(g) <= 1e-10), axis=1))
        todo_sub = ~ok
        if not todo_sub.any():
            core.iterations = max(core.iterations, it)
            return
        sub, y, c, u, f, g = sub[todo_sub], y[todo_sub], c[todo_sub], u[todo_sub], \
            f[todo_sub], g[todo_sub]
        dy, dx = _solve_step(tab, np.where(live[sub], u, 1.0), c, core.active[sub],
                             np.where(live[sub], f, 0.0), g, scale[sub])
        dy = np.where(live[sub], np.clip(dy, -_STEP, _STEP), 0.0)
        core.y[sub] = y + dy
        core.x[sub] = np.where(core.active[sub], core.x[sub] + dx, 0.0)
        todo = np.zeros(rows.size, dtype=bool)
        todo[sub] = True
    core.iterations = max_iter


def _change_solids(tab: Tableau, lp, core: Core, held) -> bool:
    """Add the most supersaturated solid, or drop the most negative one, in
    every water where one is due; True if any water changed."""
    if not tab.pnu.shape[0]:
        return False
    si = lp + _finite(core.y) @ tab.pnu.T
    neg = core.active & ~held & (core.x < -1e-15)
    over = ~core.active & (si > 1e-9)
    changed = False
    if neg.any():
        k = np.argmin(np.where(neg, core.x, np.inf), axis=1)
        rows = np.flatnonzero(neg.any(axis=1))
        core.active[rows, k[rows]] = False
        core.x[rows, k[rows]] = 0.0
        changed = True
    add = over.any(axis=1) & ~neg.any(axis=1)
    if add.any():
        k = np.argmax(np.where(over, si, -np.inf), axis=1)
        rows = np.flatnonzero(add)
        core.active[rows, k[rows]] = True
        changed = True
    return changed


class CoupledBalance(NamedTuple):
    """The charge balance of a view whose components couple, at one pH."""

    free: np.ndarray          #: (n, mc) uncomplexed totals (what the fractions apply to)
    dissolved: np.ndarray     #: (n, mc) dissolved totals, complexes included
    residual: np.ndarray      #: (n,) [eq/L]
    ionic: np.ndarray         #: (n,) ionic strength this state implies [mol/L]
    core: Core                #: the coupled unknowns, to start the next solve from


def _log_terms(tab: Tableau, view, sp, ah, ionic):
    """L_s (n, ns) and L_p (n, np) in natural logs at this pH and ionic strength,
    and the mask of solids held whatever their amount (CO2 from air)."""
    lah = np.log10(ah)
    aref = sp.alpha[:, tab.cols, tab.ref]
    ln_a = np.log(np.maximum(aref, 1e-300))
    lk10, lp10 = view.core_log_k
    if sp.act is None:
        # Charge-only: log γ_z = -z² t, so a complex gains t (z_s² - Σ n zref²).
        f = view.activity.charge_term(np.minimum(ionic, 20.0), view.a)
        t = np.zeros(ah.shape) if f is None else f
        g_cx = t[:, None] * (tab.z * tab.z - tab.nu @ tab.zref2)
        g_p = -t[:, None] * (tab.pnu @ tab.zref2)
    else:
        st = sp.act.state
        lg_ref = sp.act.lg[:, tab.cols, tab.ref]
        lg_cx = view.activity.log_gamma_ion(tab.z[None], tab.eps[None],
                                            type(st)(*(x[:, None] for x in st)))
        g_cx = lg_ref @ tab.nu.T - lg_cx
        g_p = lg_ref @ tab.pnu.T
    lk = LN10 * (lk10 + tab.h * lah[:, None] + g_cx) + ln_a @ tab.nu.T
    lp = LN10 * (tab.ph * lah[:, None] + g_p - lp10) + ln_a @ tab.pnu.T
    held = np.zeros(lp.shape, dtype=bool)
    if tab.air >= 0:
        opened = np.isfinite(view.co2)
        c = int(np.flatnonzero(tab.pnu[tab.air])[0])
        lp[:, tab.air] = np.where(opened, ln_a[:, c] + np.log(sp.alpha[:, tab.cols[c], 0]
                                                             / aref[:, c])
                                  - np.log(np.where(opened, view.co2, 1.0)), -np.inf)
        held[:, tab.air] = opened
    return lk, lp, held


def coupled_balance(tab: Tableau, view, sp, ah, ionic, start: Core | None = None
                    ) -> CoupledBalance:
    """The charge balance of ``view`` at activity ``ah``: the coupled columns by
    :func:`equilibrate`, the others as the direct path takes them."""
    lk, lp, held = _log_terms(tab, view, sp, ah, ionic)
    totals = view.totals[:, tab.cols]
    core = equilibrate(tab, totals, lk, lp, start, held=held)
    free = view.totals.copy()
    if view.carb >= 0 and tab.air < 0 and np.isfinite(view.co2).any():
        opened = np.isfinite(view.co2)
        free[opened, view.carb] = view.co2[opened] / sp.alpha[opened, view.carb, 0]
    u = np.where(np.isfinite(core.y), np.exp(core.y), 0.0)
    free[:, tab.cols] = u
    dissolved = free.copy()
    dissolved[:, tab.cols] += core.c @ tab.nu
    resid = (view.strong + sp.h - sp.oh + np.einsum("nm,nm->n", free, sp.q)
             + core.c @ tab.z)
    m2 = sp.m2 if sp.m2 is not None else sp.q * sp.q
    ionic = (0.5 * (sp.h + sp.oh + np.einsum("nm,nm->n", free, m2) + core.c @ (tab.z ** 2))
             + view.strong_i)
    return CoupledBalance(free, dissolved, resid, ionic, core)
