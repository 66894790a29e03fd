"""Solids a dose makes, the sludge they form, and metals left in solution.

Pure functions over the engine's speciation of the dosed water:

* :func:`solids_after` - each solid formed (metal hydroxides from the
  charge balance; gypsum, which takes no part in the charge balance above
  pH 4, worked out afterwards from its supersaturation).
* :func:`metals_after_mg_l` - dissolved metals after the dose [mg/L].
* :func:`sludge_of` - dry solids and the wet cake they make.
* :func:`dissolved_vs_ph` and :func:`cap_window` - dissolved metal against
  pH (the dosed water's own totals, ligands and ion pairs included), and
  the pH range over which every capped metal meets its permit cap.

Sludge conventions (common practice for sludge estimates): metal solids are
reported as Me(OH)z, gypsum as CaSO4·2H2O, undissolved lime as Ca(OH)2.
The wet cake of a filter press typically holds 20-35 % dry solids at a bulk
density near 1.2 kg/L (common practice); 25 % and 1.2 kg/L are the defaults.

Calcite precipitates inside the charge balance (it releases acid) when
the plan has it precipitate (see :func:`dosing.planning.plan.plan_dose`); it is
reported as CaCO3.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Mapping

import numpy as np

from ..chem.activity import DAVIES, ActivityModel
from ..chem import METAL_COLUMNS, Mixture, Speciation, speciate, system_index
from .hazards import gypsum_si
from .findings import Finding, Q, note
from ..chem.metals import HARDNESS, METALS, METAL_IDS
from ..chem.phases import PHASES
from ..chem.species import MOLAR_MASS

__all__ = ["Solid", "Sludge", "ideal_activity_finding", "CapWindow", "METAL_PERMIT_KEYS", "CAKE_SOLIDS_FRACTION",
           "CAKE_DENSITY_KG_L", "solids_after", "metals_after_mg_l", "metals_present_mol_l",
           "sludge_of", "DissolvedCurves", "dissolved_vs_ph", "cap_window"]

#: Dry-solids fraction of a typical filter-press cake [-] (common practice).
CAKE_SOLIDS_FRACTION = 0.25
#: Bulk density of that cake [kg/L] (common practice).
CAKE_DENSITY_KG_L = 1.2
#: Permit keys on dissolved metals [mg/L as the element].
METAL_PERMIT_KEYS = tuple(f"{m}_mg_l" for m in METAL_IDS if m not in HARDNESS)
#: The solid phases by id (CO2 from air is not one: it is no sludge).
_PHASES = {p.id: p for p in PHASES}
#: A solid below this is not reported [mol/L] (far below what a balance weighs).
_SOLID_FLOOR_MOL_L = 1e-9


@dataclass(frozen=True)
class Solid:
    """One solid in the dosed water, per litre of water."""

    id: str                 #: ``iron_iii_hydroxide``, ``gypsum`` ...
    name: str               #: plain name for the sheet
    formula: str            #: formula the mass is reported as
    mmol_per_l: float       #: [mmol/L]
    mg_per_l: float         #: [mg/L] as ``formula``


@dataclass(frozen=True)
class Sludge:
    """Dry solids and the wet cake they make, per batch or per hour."""

    dry_kg: float                 #: [kg] per batch or per hour
    cake_kg: float                #: wet cake mass [kg]
    cake_m3: float                #: wet cake volume [m3]
    solids_fraction: float        #: dry solids in the cake [-]
    cake_density_kg_l: float      #: [kg/L]


@dataclass(frozen=True)
class CapWindow:
    """Where the capped metals meet their caps, beside the pH window."""

    caps_mg_l: Mapping[str, float]        #: metal id -> cap [mg/L]
    ph_range: tuple[float, float] | None  #: pH range meeting every cap, or None
    overlap: tuple[float, float] | None   #: that range inside the discharge window
    met_at_aim: bool                      #: every cap met at the aim


def solids_after(sp: Speciation, temperature_c: float, activity: ActivityModel
                 ) -> tuple[Solid, ...]:
    """Solids in the first water of ``sp`` (the dosed water) [per L of water]."""
    if sp.phase_ids:
        return _phases_of(sp)
    out: list[Solid] = []
    for j, metal in zip(METAL_COLUMNS, METALS):
        mol = float(sp.solids_mol_l[0, j])
        if mol > _SOLID_FLOOR_MOL_L:
            name = (f"{metal.solid} (undissolved lime)" if metal.id == "calcium"
                    else f"{metal.name} hydroxide")
            out.append(Solid(f"{metal.id}_hydroxide", name, metal.solid, mol * 1000,
                             mol * metal.solid_molar_mass_g_mol * 1000))
    calcite = float(sp.calcite_mol_l[0])
    if calcite > _SOLID_FLOOR_MOL_L:
        out.append(Solid("calcite", "calcite", "CaCO3", calcite * 1000,
                         calcite * MOLAR_MASS["CaCO3"] * 1000))
    gyp = _gypsum_mol_l(sp, temperature_c, activity)
    if gyp > _SOLID_FLOOR_MOL_L:
        out.append(Solid("gypsum", "gypsum", "CaSO4·2H2O", gyp * 1000,
                         gyp * MOLAR_MASS["CaSO4·2H2O"] * 1000))
    return tuple(out)


def _phases_of(sp: Speciation) -> tuple[Solid, ...]:
    """The solids of the coupled core's equilibrium, in catalogue order."""
    out = []
    for pid, mol in zip(sp.phase_ids, sp.phase_mol_l[0]):
        if pid in _PHASES and mol > _SOLID_FLOOR_MOL_L:
            p = _PHASES[pid]
            out.append(Solid(p.id, p.name, p.formula, float(mol) * 1000,
                             float(mol) * p.molar_mass_g_mol * 1000))
    return tuple(out)


def _gypsum_mol_l(sp: Speciation, temperature_c: float, activity: ActivityModel) -> float:
    """Gypsum that crystallises until saturation [mol/L]; 0 when undersaturated.

    Solves (a - x)(b - x) = Ksp / gamma2^2 for the free Ca2+ (a) and SO4 2-
    (b) of the dosed water, activity coefficients held at their value
    before crystallisation.
    """
    si = gypsum_si(sp)
    if not si > 0:
        return 0.0
    ca = float(sp.concentration(system_index("calcium"), 0)[0])
    so4 = float(sp.concentration(system_index("sulfate"), 1)[0])
    k = ca * so4 / 10.0 ** si          # Ksp over gamma^2, in concentrations
    return 0.5 * ((ca + so4) - math.sqrt((ca - so4) ** 2 + 4.0 * k))


def metals_present_mol_l(sp: Speciation) -> dict[str, float]:
    """Total of each metal in the first water of ``sp``, dissolved or not [mol/L]."""
    tot = sp.totals_mol_l[0, METAL_COLUMNS] + sp.solids_mol_l[0, METAL_COLUMNS]
    return {mid: float(t) for mid, t in zip(METAL_IDS, tot) if t > 0}


def metals_after_mg_l(sp: Speciation) -> dict[str, float]:
    """Dissolved total of each metal present in the dosed water [mg/L]."""
    present = metals_present_mol_l(sp)
    return {metal.id: float(sp.totals_mol_l[0, col]) * metal.molar_mass_g_mol * 1000
            for metal, col in zip(METALS, METAL_COLUMNS) if metal.id in present}


def sludge_of(solids: tuple[Solid, ...], litres: float, *,
              solids_fraction: float = CAKE_SOLIDS_FRACTION,
              cake_density_kg_l: float = CAKE_DENSITY_KG_L) -> Sludge:
    """Dry solids [kg] and wet cake for ``litres`` of dosed water."""
    dry = sum(s.mg_per_l for s in solids) * litres / 1e6
    cake = dry / solids_fraction
    return Sludge(dry, cake, cake / cake_density_kg_l / 1000.0, solids_fraction,
                  cake_density_kg_l)


@dataclass(frozen=True)
class DissolvedCurves:
    """Dissolved total of each metal of a dosed water against pH, with its
    solids present (what the cap window and the metals figure read)."""

    ph: np.ndarray                        #: (k,) the pH grid [pH]
    mg_l: Mapping[str, np.ndarray]        #: metal id -> (k,) dissolved [mg/L]


#: pH grid of the curves; 0.01 pH steps from 0 to 14 [pH].
_CAP_GRID = np.round(np.arange(0.0, 14.0 + 1e-9, 0.01), 2)


def dissolved_vs_ph(dosed: Mixture, ionic_strength: float,
                    ph: np.ndarray = _CAP_GRID) -> DissolvedCurves:
    """Dissolved total of each metal of the dosed water ``dosed`` (one row)
    against pH [mg/L]: the water's own totals (ligands, ion pairs, carbonate
    and its other solids included) speciated at each pH, the ionic strength
    held at ``ionic_strength`` [mol/L] (that of the dosed water). The dose
    that would reach each pH is not added: the curve says what these totals
    leave dissolved there.
    """
    ph = np.asarray(ph, dtype=float)
    mix = replace(dosed.repeat(ph.size), strong_ionic_strength=np.full(ph.size, ionic_strength))
    sp = speciate(mix, ph, max_iter=0)
    return DissolvedCurves(ph, {m.id: sp.totals_mol_l[:, col] * m.molar_mass_g_mol * 1000
                                for m, col in zip(METALS, METAL_COLUMNS)
                                if dosed.totals_mol_l[0, col] > 0})


def cap_window(curves: DissolvedCurves, caps_mg_l: Mapping[str, float],
               window: tuple[float, float], aim: float) -> CapWindow:
    """The pH range over which every capped metal meets its cap.

    Where several separate ranges qualify, the one holding the aim, else the
    one nearest the window, is given. Whether the caps are met at the aim is
    read at the grid point nearest it.
    """
    grid = curves.ph
    meets = np.ones(grid.size, dtype=bool)
    for mid, cap in caps_mg_l.items():
        meets &= curves.mg_l[mid] <= cap
    met = bool(meets[int(np.argmin(np.abs(grid - aim)))])
    runs = _runs(meets)
    if not runs:
        return CapWindow(dict(caps_mg_l), None, None, met)
    lo_w, hi_w = window

    def distance(run):
        a, b = grid[run[0]], grid[run[1]]
        return 0.0 if a <= aim <= b else min(abs(a - hi_w), abs(b - lo_w), abs(a - lo_w))

    best = min(runs, key=distance)
    lo, hi = float(grid[best[0]]), float(grid[best[1]])
    overlap = (max(lo, lo_w), min(hi, hi_w)) if max(lo, lo_w) <= min(hi, hi_w) else None
    return CapWindow(dict(caps_mg_l), (lo, hi), overlap, met)


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """(first, last) index of each run of True in ``mask``."""
    edges = np.diff(np.concatenate([[0], mask.astype(int), [0]]))
    starts = np.flatnonzero(edges == 1)
    ends = np.flatnonzero(edges == -1) - 1
    return list(zip(starts.tolist(), ends.tolist()))


#: A solid whose amount moves by more than this share between ideal and
#: Davies activity is one the activity model decides [-].
_SOLID_MODEL_SHARE = 0.25


def ideal_activity_finding(dosed: Mixture, ph: float, solids: tuple[Solid, ...],
                           temperature_c: float) -> Finding | None:
    """With ideal activity, a warning where Davies activity at the same pH
    would form other solids (or amounts far apart): at that ionic strength
    the activity model decides what precipitates. None otherwise."""
    if not dosed.activity.ideal:
        return None
    real = speciate(replace(dosed, activity=DAVIES), np.array([ph]))
    other = {x.id: x for x in solids_after(real, temperature_c, DAVIES)}
    mine = {x.id: x for x in solids}
    diff = {sid: (mine[sid].mg_per_l if sid in mine else 0.0,
                  other[sid].mg_per_l if sid in other else 0.0)
            for sid in set(mine) | set(other)}
    moved = {sid: ab for sid, ab in diff.items()
             if abs(ab[0] - ab[1]) > _SOLID_MODEL_SHARE * max(ab) and max(ab) > 1.0}
    if not moved:
        return None
    sid = max(moved, key=lambda k: abs(moved[k][0] - moved[k][1]))
    a, b = moved[sid]
    formula = (mine.get(sid) or other[sid]).formula
    return note("ideal-changes-solids", "ideal activity decides the solids here: at an "
                "ionic strength of {ionic} the Davies equation gives {solid} {davies_mg_l} "
                "against {ideal_mg_l} with ideal activity, at the same pH. Plan with "
                "[model] activity = \"auto\" (the default) unless a measurement says "
                "otherwise", "warning", {"solid": formula},
                ionic=Q(float(real.ionic_strength[0]), "mol/L"), davies_mg_l=Q(b, "mg/L"),
                ideal_mg_l=Q(a, "mg/L"))

