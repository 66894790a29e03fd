"""Waters as arrays (:class:`Mixture`) and what a dose adds to them (:class:`ReagentVector`).

A :class:`Mixture` holds n waters: the total of each column [mol/L], the
strong-ion balance [eq/L], the ionic strength of the strong ions [mol/L],
the temperature and, for a tank open to air, the dissolved CO2 the air
holds. :func:`add_dose` gives the mixture after a dose, diluted by the
product's own volume.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from .activity import DEFAULT_MODEL, ActivityModel
from .columns import METAL_COLUMNS, N_SYSTEMS, SITE_COLUMNS, UNKNOWN, Constants, constants_at
from .complexes import COMPLEXES
from .metals import METALS
from .phases import PHASES

__all__ = ["Mixture", "ReagentVector", "add_dose", "LogKShift"]


@dataclass(frozen=True)
class LogKShift:
    """Per-water shifts of the model's constants [log10 units]: the model's
    own uncertainty, sampled with the measurements (arrays with one row per
    water).

    ``first_step`` moves the first stepwise constant of a column (for a
    metal, every hydroxo complex against the free ion); ``complexes`` each
    complex of :data:`~dosing.chem.complexes.COMPLEXES`; ``phases`` each
    solid of :data:`~dosing.chem.phases.PHASES` (the hydroxides first, in
    metal order: their shift is also that of the metal's *Ks0 where no
    coupled core runs).
    """

    first_step: np.ndarray       #: (n, N_SYSTEMS)
    complexes: np.ndarray        #: (n, len(COMPLEXES))
    phases: np.ndarray           #: (n, len(PHASES))

    @classmethod
    def zeros(cls, n: int) -> "LogKShift":
        return cls(np.zeros((n, N_SYSTEMS)), np.zeros((n, len(COMPLEXES))),
                   np.zeros((n, len(PHASES))))

    def take(self, idx) -> "LogKShift":
        return LogKShift(self.first_step[idx], self.complexes[idx], self.phases[idx])

    def ks0(self) -> np.ndarray:
        """(n, N_SYSTEMS) shift of each column's hydroxide log *Ks0."""
        out = np.zeros(self.first_step.shape)
        out[:, METAL_COLUMNS] = self.phases[:, :len(METALS)]
        return out


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
    activity : ActivityModel
        How activity coefficients are found (:mod:`dosing.chem.activity`).
    unknown_pka : ndarray (n,) or None
        pKa of the fitted unidentified acid (column ``unknown``) [-].
    site_pka : ndarray (n, 8) or None
        pKa of each fitted buffer site (columns :data:`SITE_COLUMNS`), NaN
        for a site not used [-].
    shift : LogKShift or None
        Shifts of the model's constants per water (a sample of the model's
        own uncertainty); None: the catalogue's values.
    complexes : bool
        Complexes, ion pairs and the solids that couple components (gypsum,
        carbonates, sulfides; :mod:`dosing.chem.coupled`) are in the model
        (the default); False keeps the one-component model (hydrolysis and
        hydroxides only), the textbook case.
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
    activity: ActivityModel = DEFAULT_MODEL
    unknown_pka: np.ndarray | None = None
    calcite: bool = False
    site_pka: np.ndarray | None = None
    complexes: bool = True
    shift: LogKShift | None = None

    @classmethod
    def build(cls, totals_mol_l, strong_eq_l, strong_ionic_strength,
              temperature_c, co2_air_mol_l=np.nan, activity=DEFAULT_MODEL,
              unknown_pka=None, shift: LogKShift | None = None) -> "Mixture":
        """Broadcast the inputs to n waters and freeze them."""
        if not isinstance(activity, ActivityModel):
            raise TypeError(f"activity must be an ActivityModel, not {activity!r}")
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
                   vec(co2_air_mol_l), activity,
                   None if unknown_pka is None else vec(unknown_pka), shift=shift)

    def memo(self, key, make):
        """``make()``, made once per mixture and key (a mixture's arrays are
        never written after it is built, so what is derived from them holds;
        a taken or replaced mixture starts without)."""
        memo = self.__dict__.get("_memo")
        if memo is None:
            memo = {}
            object.__setattr__(self, "_memo", memo)
        if key not in memo:
            memo[key] = make()
        return memo[key]

    def constants(self, cols=None) -> Constants:
        """Constants at this mixture's temperatures, fitted pKa applied
        (worked out once per mixture and set of columns; read-only).

        ``cols``: only these columns, in that order (see :func:`constants_at`).
        """
        key = ("constants", None if cols is None else tuple(int(c) for c in cols))
        return self.memo(key, lambda: self._constants(cols))

    def _constants(self, cols) -> Constants:
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
        if self.shift is not None:
            sel = slice(None) if cols is None else np.asarray(cols)
            k = const.k.copy() if const.k.strides[0] else np.repeat(const.k[:1], self.n, 0)
            k[:, :, 0] *= 10.0 ** self.shift.first_step[:, sel]
            const = Constants(const.kw, k, const.a,
                              const.log_ks0 + self.shift.ks0()[:, sel])
        return const

    def take(self, idx) -> "Mixture":
        """The waters ``idx`` only."""
        return replace(self, totals_mol_l=self.totals_mol_l[idx],
                       strong_eq_l=self.strong_eq_l[idx],
                       strong_ionic_strength=self.strong_ionic_strength[idx],
                       temperature_c=self.temperature_c[idx],
                       co2_air_mol_l=self.co2_air_mol_l[idx],
                       unknown_pka=None if self.unknown_pka is None else self.unknown_pka[idx],
                       site_pka=None if self.site_pka is None else self.site_pka[idx],
                       shift=None if self.shift is None else self.shift.take(idx))

    def repeat(self, n: int) -> "Mixture":
        """The first water, n times (a curve or a set of targets for one water)."""
        return self.take(np.zeros(n, dtype=int))

    @property
    def n(self) -> int:
        """Number of waters."""
        return self.strong_eq_l.shape[0]

    @property
    def open_to_air(self) -> np.ndarray:
        """(n,) True where dissolved CO2 is held by the air."""
        return np.isfinite(self.co2_air_mol_l)


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
