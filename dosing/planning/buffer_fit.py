"""A buffer spectrum fitted to a bench titration: any curve, many buffers.

Real effluents hold buffers the lab never names. This fit explains a curve
with the strong-ion balance, carbonate, the solutes the scenario names, and
a set of monoprotic sites on a fixed grid of pKa values whose
concentrations are fitted, never negative: the "pK spectrum" of Brassard,
Kramer & Collins (1990, Environ. Sci. Technol. 24, 195), who fitted it by
linear programming. At a fixed pH every site's charge is known, so each
measured point is linear in the unknowns: a weighted non-negative least
squares (scipy's NNLS, Lawson & Hanson 1974) has no local minima. The
weights turn a charge-balance residual into a pH residual (divided by the
buffer intensity at that point), so the fit minimises pH misfit; the
activity coefficients (Davies) and the weights are refined in a few passes.

What comes back: the sites found, merged into buffer regions (pKa,
mmol/L, a bootstrap standard deviation over the points, and a catalogue
system whose pKa lies near, as a question), the misfit, and a
:class:`~dosing.planning.effluent.Water` whose sites are engine columns, so the
fitted water plans any reagent to any aim.

Pure: numbers in, numbers out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from ..chem.activity import debye_huckel_a
from .effluent import Water
from .findings import Finding, Q, note
from ..chem import (CARBONATE, Mixture, add_dose, solve_ph, speciate, system_index)
from ..chem.metals import get_metal
from ..chem.species import SITE_IDS, SYSTEMS
from ..chem.water import carbonate_pk, pkw, vant_hoff_pk

__all__ = ["PK_GRID", "BufferRegion", "SpectrumFit", "fit_spectrum"]

#: pKa grid of the sites [-]: 0.2 apart, from below the usual titrated range
#: to above it.
PK_GRID = np.round(np.arange(2.4, 11.81, 0.2), 2)
#: Sites within this of a carbonate pK are left out: carbonate takes them [pH].
_CARBONATE_GAP = 0.25
#: Sites further apart than this start a new buffer region [pH].
_REGION_GAP = 0.45
#: A catalogue system within this of a region's pKa is named as a guess [pH].
_MATCH = 0.3
#: Refinement passes (activity and weights).
_PASSES = 4


@dataclass(frozen=True)
class BufferRegion:
    """Neighbouring fitted sites taken together."""

    pka: float              #: concentration-weighted mean pKa [-]
    mmol_l: float           #: total [mmol/L]
    sd_mmol_l: float        #: bootstrap standard deviation over the points [mmol/L]
    guess: str              #: a catalogue system whose pKa lies near, or ""

    edge: bool = False      #: at or beyond the titrated range: strong acid or base alike

    def finding(self) -> Finding:
        """'about 1.2 mmol/L (± 0.1) near pKa 7.2: phosphate?'"""
        q = {"total": Q(self.mmol_l, "mmol/L"), "sd": Q(self.sd_mmol_l, "mmol/L"),
             "pka": Q(self.pka, "pH")}
        if self.edge:
            return Finding("region-at-edge", "info", "about {total:.3g} near pKa {pka:.1f}, "
                           "at the edge of the titrated range: not told apart from strong "
                           "acid or base", q)
        return Finding("region", "info", "about {total:.3g} (± {sd:.2gnum}) near pKa {pka:.1f}"
                       + (": {guess}?" if self.guess else ""), q, {"guess": self.guess})


@dataclass(frozen=True)
class SpectrumFit:
    """The fitted water and how well it explains the curve."""

    water: Water
    strong_eq_l: float
    carbonate_mol_l: float
    site_pka: np.ndarray            #: pKa of each grid site kept [-]
    site_mol_l: np.ndarray          #: its total [mol/L]
    regions: tuple[BufferRegion, ...]
    rms_ph: float                   #: pH misfit of the fitted water, forward solved
    residual_ph: np.ndarray
    ph_range: tuple[float, float]   #: titrated pH range


@dataclass(frozen=True)
class _Design:
    """The linear problem at one pass: A x = b (rows weighted), x >= 0."""

    a: np.ndarray
    b: np.ndarray
    grid: np.ndarray


def _site_charge(ah, ka, g1):
    """Mean charge of monoprotic sites HX/X- (n, k) at activity ``ah``."""
    kc = ka[None, :] / g1[:, None]
    return -kc / (kc + ah[:, None])


def _design(curve, base: Water, grid, ionic, weights, with_carbonate: bool) -> _Design:
    """Charge balance of every point, linear in [S+, S-, C, sites...]."""
    t = base.temperature_c
    v, ph = curve.added_ml, curve.ph
    f = curve.sample_ml / (curve.sample_ml + v)            # dilution of the sample
    titrant = curve.titrant.molarity_mol_l * v / (curve.sample_ml + v)
    ah = 10.0 ** -ph
    a = float(debye_huckel_a(t))
    g1 = 10.0 ** base.activity.log_gamma(1, ionic, a) + 0.0 * ph
    kw = 10.0 ** -float(pkw(t))
    h, oh = ah / g1, kw / (ah * g1)
    # Known parts: the base water's named solutes and metals (carbonate
    # excluded: fitted) and what the titrant adds, speciated at each pH.
    known = base.mixture().totals_mol_l[0].copy()
    known[CARBONATE] = 0.0
    r = curve.titrant.vector()
    tot = f[:, None] * known[None, :] + titrant[:, None] * r.totals_mol[None, :]
    mix = Mixture.build(tot, 0.0, ionic, t, math.nan, base.activity, base.unknown_pka)
    sp = speciate(mix, ph, max_iter=1)
    # The charge of everything dissolved but H+ and OH- (complexes included):
    # the residual of a water without strong ions, less its own H+ and OH-.
    known_charge = sp.charge_residual_eq_l - sp.h_mol_l + sp.oh_mol_l
    rhs = -(h - oh + titrant * r.strong_eq + known_charge)
    cols = [f, -f]
    if with_carbonate:
        unit = np.zeros((ph.size, base.mixture().totals_mol_l.shape[1]))
        unit[:, CARBONATE] = f
        spc = speciate(Mixture.build(unit * 1e-12, 0.0, ionic, t, math.nan, base.activity),
                       ph, max_iter=1)
        cols.append(f * spc.mean_charge[:, CARBONATE])
    q_sites = _site_charge(ah, 10.0 ** -grid, g1) * f[:, None]
    a_mat = np.column_stack(cols + [q_sites])
    return _Design(a_mat * weights[:, None], rhs * weights, grid)


def _grid(t: float) -> np.ndarray:
    """The site grid at ``t`` with the carbonate pKs left to carbonate."""
    pk1, pk2 = (float(x) for x in carbonate_pk(t))
    keep = (np.abs(PK_GRID - pk1) > _CARBONATE_GAP) & (np.abs(PK_GRID - pk2) > _CARBONATE_GAP)
    return PK_GRID[keep]


def _solve(design: _Design, ridge: float, rows=None) -> np.ndarray:
    """Non-negative least squares, with a small ridge on the sites for stability."""
    from scipy.optimize import nnls
    a, b = design.a, design.b
    if rows is not None:
        a, b = a[rows], b[rows]
    k = design.grid.size
    n_free = a.shape[1] - k
    reg = np.zeros((k, a.shape[1]))
    reg[:, n_free:] = np.eye(k) * ridge
    x, _ = nnls(np.vstack([a, reg]), np.concatenate([b, np.zeros(k)]), maxiter=50 * a.shape[1])
    return x


def fit_spectrum(curve, base: Water, *, with_carbonate: bool = True, bootstrap: int = 30,
                 seed: int = 1) -> SpectrumFit:
    """Fit the buffer spectrum of the sample to ``curve``.

    ``base`` gives the temperature, activity model and the solutes and
    metals the scenario names (held as given); its carbonate and strong-ion
    balance are replaced by the fit.
    """
    t = base.temperature_c
    grid = _grid(t)
    n = curve.ph.size
    ionic = np.full(n, max(base.ionic_strength, 1e-4))
    weights = np.ones(n)
    x = None
    for _ in range(_PASSES):
        design = _design(curve, base, grid, ionic, weights, with_carbonate)
        ridge = 1e-3 * float(np.median(np.linalg.norm(design.a, axis=0)[2:]) or 1.0)
        x = _solve(design, ridge)
        water = _water(base, x, grid, with_carbonate)
        ionic, beta = _state_along(curve, water)
        weights = 1.0 / np.maximum(beta, 1e-7)
    keep = _keep(x, grid, with_carbonate)
    water = _water(base, x, grid, with_carbonate)
    model_ph = _forward(curve, water)
    resid = model_ph - curve.ph
    regions = _regions(x, grid, with_carbonate, design, ridge, bootstrap, seed, t,
                       base.metals_mol_l)
    s = float(x[0] - x[1])
    c = float(x[2]) if with_carbonate else 0.0
    lo, hi = float(np.min(curve.ph)), float(np.max(curve.ph))
    regions = tuple(replace(r, edge=not (lo + 0.3 <= r.pka <= hi - 0.3)) for r in regions)
    return SpectrumFit(water, s, c, grid[keep], _sites(x, with_carbonate)[keep], regions,
                       float(np.sqrt(np.mean(resid ** 2))), resid, (lo, hi))


def _sites(x, with_carbonate):
    return x[3:] if with_carbonate else x[2:]


def _keep(x, grid, with_carbonate):
    sites = _sites(x, with_carbonate)
    return sites > 1e-9 * max(float(sites.max(initial=0.0)), 1e-12)


def _columns(x, grid, with_carbonate) -> list[tuple[float, float]]:
    """At most eight (pKa, total) sites: the fitted ones, nearest pairs merged."""
    sites = _sites(x, with_carbonate)
    keep = _keep(x, grid, with_carbonate)
    cols = [(float(p), float(c)) for p, c in zip(grid[keep], sites[keep])]
    while len(cols) > len(SITE_IDS):
        gaps = [cols[i + 1][0] - cols[i][0] for i in range(len(cols) - 1)]
        i = int(np.argmin(gaps))
        (p1, c1), (p2, c2) = cols[i], cols[i + 1]
        # Merged at the pKa that keeps their combined mid-point (log-mean of Ka).
        cols[i:i + 2] = [((p1 * c1 + p2 * c2) / (c1 + c2), c1 + c2)]
    return cols


def _water(base: Water, x, grid, with_carbonate) -> Water:
    """The fitted water: base solutes, fitted carbonate, sites and strong balance."""
    s = float(x[0] - x[1])
    totals = {k: v for k, v in base.totals_mol_l.items() if k not in SITE_IDS}
    totals["carbonate"] = float(x[2]) if with_carbonate else 0.0
    cols = _columns(x, grid, with_carbonate)
    for sid, (_, c) in zip(SITE_IDS, cols):
        totals[sid] = c
    w = replace(base, totals_mol_l=totals, strong_eq_l=s,
                strong_ionic_strength=base.strong_ionic_strength_for(s),
                site_pka=tuple(p for p, _ in cols), open_to_air=False,
                notes=(note("fitted", "water fitted to the bench titration (buffer spectrum)",
                            "info"),))
    ph0 = float(solve_ph(w.mixture())[0])
    sp = speciate(w.mixture(), ph0)
    return replace(w, ph=ph0, ionic_strength=float(sp.ionic_strength[0]))


def _dosed(curve, water: Water) -> Mixture:
    mix = water.mixture()
    d = curve.added_ml * curve.titrant.molarity_mol_l / curve.sample_ml
    return add_dose(mix.take(np.zeros(curve.ph.size, dtype=int)), curve.titrant.vector(), d)


def _forward(curve, water: Water) -> np.ndarray:
    """Model pH at each measured volume (forward solves)."""
    return solve_ph(_dosed(curve, water), ph_guess=curve.ph)


def _state_along(curve, water: Water):
    """Ionic strength and buffer intensity of the model at each measured pH."""
    sp = speciate(_dosed(curve, water), curve.ph)
    return sp.ionic_strength, sp.buffer_intensity_eq_l


def _regions(x, grid, with_carbonate, design, ridge, bootstrap, seed, t, metals=None):
    """Buffer regions of the fit, with bootstrap spreads of their totals;
    each named after a metal the scenario gives or a catalogue system near it."""
    sites = _sites(x, with_carbonate)
    keep = _keep(x, grid, with_carbonate)
    idx = np.flatnonzero(keep)
    if idx.size == 0:
        return ()
    groups, cur = [], [idx[0]]
    for i in idx[1:]:
        if grid[i] - grid[cur[-1]] <= _REGION_GAP:
            cur.append(i)
        else:
            groups.append(cur)
            cur = [i]
    groups.append(cur)
    edges = [(grid[g[0]] - _REGION_GAP / 2, grid[g[-1]] + _REGION_GAP / 2) for g in groups]
    rng = np.random.default_rng(seed)
    n = design.a.shape[0]
    boots = np.zeros((bootstrap, len(groups)))
    for b in range(bootstrap):
        xb = _solve(design, ridge, rng.integers(0, n, n))
        sb = _sites(xb, with_carbonate)
        for j, (lo, hi) in enumerate(edges):
            boots[b, j] = sb[(grid >= lo) & (grid <= hi)].sum()
    out = []
    for j, g in enumerate(groups):
        c = sites[g]
        pka = float(np.sum(grid[g] * c) / np.sum(c))
        out.append(BufferRegion(pka, float(c.sum() * 1000),
                                float(np.std(boots[:, j], ddof=1) * 1000) if bootstrap > 1
                                else 0.0, _metal_guess(pka, metals or {}) or _guess(pka, t)))
    return tuple(out)


def _guess(pka: float, t: float) -> str:
    """Up to two catalogue systems with a step within reach of ``pka`` at ``t``."""
    near = []
    for s in SYSTEMS:
        if s.id in SITE_IDS or s.id in ("unknown", "carbonate"):
            continue
        pks = np.atleast_1d(vant_hoff_pk(np.array(s.pka25), np.array(s.enthalpy_kj_mol), t))
        d = float(np.min(np.abs(pks - pka)))
        if d < _MATCH:
            near.append((d, s.id))
    return " or ".join(name for _, name in sorted(near)[:2])


def _metal_guess(pka: float, metals_mol_l) -> str:
    """The metals the scenario gives that would buffer near ``pka``: where
    their hydroxide starts to form at their total (from its *Ks0 at 25 °C:
    log[M] = log *Ks0 - z pH), from 1/z pH below that (ten times the metal
    the lab found: a jar often holds more than a filtered sample) to 2/z
    above (where most of it has come down), or near their first hydrolysis
    step. Up to two, nearest first; "" when none."""
    near = []
    for metal_id, total in metals_mol_l.items():
        if not total > 0:
            continue
        m = get_metal(metal_id)
        onset = (m.log_ks0 - math.log10(total)) / m.charge
        pk1 = m.stepwise_pk()[0]
        if onset - 1.0 / m.charge - _MATCH <= pka <= onset + 2.0 / m.charge + _MATCH:
            near.append((abs(pka - onset), f"{m.name} hydroxide forming"))
        elif abs(pka - pk1) < _MATCH:
            near.append((abs(pka - pk1), f"{m.name} hydrolysis"))
    return " or ".join(name for _, name in sorted(near)[:2])


def _index(system_id: str) -> int:
    return system_index(system_id)
