"""The column layout of the vectorised engine and its constants at any temperature.

Every water is a row; every weak-acid system of :data:`dosing.chem.species.SYSTEMS`
and every metal of :data:`dosing.chem.metals.METALS` is a column of the totals
arrays, in catalogue order. A metal's hydrolysis series is carried as an acid
whose top form is the free ion (stepwise constants *beta_j/*beta_(j-1)), so
the same fraction arithmetic serves both.

:func:`constants_at` gives, for each temperature, Kw (IAPWS R11-07), the Ka
of each step (carbonate from Plummer & Busenberg 1982, the rest by van 't
Hoff from 25 °C), the Debye-Hückel A and each hydroxide's log *Ks0.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .activity import debye_huckel_a
from .metals import METALS, METAL_IDS
from .species import SITE_IDS, SYSTEMS, SYSTEM_IDS
from .water import carbonate_pk, henry_co2, pkw, vant_hoff_pk

__all__ = ["COLUMN_IDS", "N_ACIDS", "N_SYSTEMS", "METAL_COLUMNS", "CARBONATE", "CALCIUM",
           "UNKNOWN", "SITE_COLUMNS", "MAXSTEP", "Z", "SOLID_Z", "LN10", "system_index",
           "co2_in_air_mol_l", "Constants", "constants_at"]

#: Columns of the totals arrays: the weak-acid systems, then the metals.
COLUMN_IDS: tuple[str, ...] = SYSTEM_IDS + METAL_IDS


N_ACIDS = len(SYSTEMS)


N_SYSTEMS = len(COLUMN_IDS)


#: Columns that carry a metal (and its hydroxide solid).
METAL_COLUMNS = np.arange(N_ACIDS, N_SYSTEMS)


MAXSTEP = 4


CARBONATE = SYSTEM_IDS.index("carbonate")


CALCIUM = COLUMN_IDS.index("calcium")


UNKNOWN = SYSTEM_IDS.index("unknown")


#: Columns of the fitted buffer sites (pKa set per mixture, see Mixture.site_pka).
SITE_COLUMNS = np.array([SYSTEM_IDS.index(i) for i in SITE_IDS])


LN10 = float(np.log(10.0))


# Charge of each form (most protonated first), shape (m, 5). A metal's
# hydrolysis series is carried as an acid whose top form is the free ion.
_TOP = [s.top_charge for s in SYSTEMS] + [m.charge for m in METALS]


Z = np.array([[z - k for k in range(MAXSTEP + 1)] for z in _TOP], dtype=float)


_PK25 = np.full((N_SYSTEMS, MAXSTEP), np.inf)


_DH = np.zeros((N_SYSTEMS, MAXSTEP))


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


SOLID_Z = np.zeros(N_SYSTEMS)


for _j, _m in enumerate(METALS, start=N_ACIDS):
    _SOLID_LOGK[_j] = _m.log_ks0
    _SOLID_DH[_j] = _m.enthalpy_ks0_kj_mol or 0.0
    SOLID_Z[_j] = _m.charge


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


LN10 = float(np.log(10.0))
