"""The effluent, as far as an operator's measurements describe it.

An operator knows a measured pH and temperature, perhaps a laboratory
alkalinity (Standard Methods 2320 B, titration to pH 4.5) or acidity
(Standard Methods 2310 B, titration to pH 8.3), and perhaps some solute
totals. :func:`infer_water` turns that into a :class:`Water`: the carbonate
total that explains the alkalinity or acidity, and the strong-ion balance
that puts the water at its measured pH by charge balance. Both are direct
solves (see :mod:`dosing.chem.equilibrium`).

Assumptions
-----------
* The alkalinity is total alkalinity to the stated end point (default pH
  4.5, the end point Standard Methods 2320 B gives for industrial wastes and
  complex systems) and all of it that the listed solutes do not explain is
  carbonate. Acidity likewise to pH 8.3.
* Strong ions the lab measured (sodium, potassium, chloride, nitrate) count
  in the ionic strength with their charges; the rest of the strong-ion
  balance is taken as monovalent. A known salt load can be added as an
  extra ionic strength.
* Dissolved metals (a filtered sample, mg/L as the element) are dissolved
  at the measured pH; calcium and magnesium given among the ions are the
  same metals. Along a dose they precipitate as hydroxides wherever the
  water is supersaturated (:mod:`dosing.chem.metals`).
* A tank "open to air" has its dissolved CO2 held at equilibrium with air
  (default 420 µatm) while it is dosed; the measured pH and alkalinity
  describe the water as it arrives.

References
----------
1. APHA, AWWA, WEF. Standard Methods for the Examination of Water and
   Wastewater, methods 2320 B (alkalinity) and 2310 B (acidity). End points
   pH 4.5 and 8.3 as summarised by US EPA Region 9 SOP 560 and NEMI.
"""

from __future__ import annotations

import inspect
import math
from dataclasses import dataclass, field, replace
from typing import Any, Mapping

import numpy as np

from ..chem.activity import DAVIES_I_LIMIT
from ..chem.equilibrium import (CARBONATE, METAL_COLUMNS, N_ACIDS, N_SYSTEMS, Mixture,
                          carbonate_for_alkalinity, co2_in_air_mol_l, speciate,
                          strong_balance_at_ph, system_index)
from ..errors import InputError, ModelError
from ..chem.metals import METAL_IDS, get_metal
from ..chem.species import MOLAR_MASS, SOLUTE_IDS, SYSTEM_IDS, get_system
from ..chem.water import check_temperature

__all__ = ["CACO3_MG_PER_MEQ", "ALKALINITY_ENDPOINT_PH", "ACIDITY_ENDPOINT_PH",
           "DEFAULT_PCO2_UATM", "BACKGROUND_IONS", "STRONG_IONS", "Water", "infer_water",
           "totals_vector", "aerate", "air_exchange_fraction", "FULL_EXCHANGE",
           "STILL_WATER_KL_M_H", "DEFAULT_DEPTH_M"]

#: Equivalent weight of CaCO3 [mg/meq]: M(CaCO3)/2 with IUPAC atomic weights.
#: Standard Methods rounds it to 50.0 (its factor 50 000).
CACO3_MG_PER_MEQ = MOLAR_MASS["CaCO3"] / 2.0
#: Total alkalinity end point, Standard Methods 2320 B, industrial waste [pH].
ALKALINITY_ENDPOINT_PH = 4.5
#: Acidity end point, Standard Methods 2310 B (phenolphthalein) [pH].
ACIDITY_ENDPOINT_PH = 8.3
#: Background ions a scenario may give in ``ions_mg_l``, with the formula
#: used for their molar mass. Calcium and magnesium are metals of
#: :mod:`dosing.chem.metals` (they take part in the solids); the rest are strong
#: ions.
BACKGROUND_IONS = {"sodium": "Na", "potassium": "K", "calcium": "Ca",
                   "magnesium": "Mg", "chloride": "Cl", "nitrate": "NO3"}
#: Strong ions (never precipitated, never protonated): their charge [-].
STRONG_IONS = {"sodium": 1, "potassium": 1, "chloride": -1, "nitrate": -1}
#: A laboratory alkalinity or acidity at or below this is taken as "not
#: detected" [mg/L as CaCO3] (common practice: a usual reporting limit).
LOW_READING_MG_L = 2.0
#: Relative precision of a routine alkalinity or acidity titration [-]
#: (common practice: duplicates agree within a few per cent; Standard
#: Methods 2320 quotes single-operator deviations of this order).
LAB_PRECISION = 0.03
#: CO2 in today's outdoor air, about 420 µatm (common practice, 2020s).
DEFAULT_PCO2_UATM = 420.0
#: Largest inorganic carbon a water may be inferred to hold [mol/L]: a
#: saturated sodium carbonate/bicarbonate brine holds about 2 mol/L (CRC
#: Handbook aqueous solubilities, from memory); past that no water can.
MAX_CARBONATE_MOL_L = 2.0
#: Largest carbonate a water open to air is taken to hold without a lab
#: alkalinity [mol/L] (common practice: about 250 mg/L as CaCO3; a tank or
#: pond takes days to weeks to take up more from air).
MAX_AIR_CARBONATE_MOL_L = 5e-3
#: Largest ionic strength accepted for an inferred water [mol/L]: beyond
#: about 5 mol/L even specific-interaction models are stretched (common
#: practice) and Davies is far outside its range.
MAX_IONIC_STRENGTH = 5.0


#: Gas-transfer velocity of CO2 across a still water surface [m/h]: k600 at
#: zero wind, 2.07 cm/h (Cole & Caraco 1998, Limnol. Oceanogr. 43, 647,
#: k600 = 2.07 + 0.215 U10^1.7 cm/h; from memory). Wind, aerators and mixing
#: raise it several-fold, so the exchange time it gives is the slow end.
STILL_WATER_KL_M_H = 0.0207
#: What the dosed water may do with calcite (see :class:`Water`).
CALCITE_MODES = ("auto", "precipitates", "dissolved")
#: Depth of an open tank or pond when none is given [m] (common practice).
DEFAULT_DEPTH_M = 2.0
#: Past this fraction of the way to CO2 equilibrium with air the dose is
#: planned at equilibrium; below it, with the carbonate held as sampled.
FULL_EXCHANGE = 0.95


def air_exchange_fraction(hours: float, depth_m: float) -> float:
    """How far dissolved CO2 gets toward air equilibrium in ``hours`` [-].

    First-order exchange across the surface, 1 - exp(-kL t / depth), with
    the still-water kL (:data:`STILL_WATER_KL_M_H`). At 2 m depth the time
    constant is about 4 days.

    >>> round(air_exchange_fraction(24.0, 2.0), 2), round(air_exchange_fraction(1e4, 2.0), 2)
    (0.22, 1.0)
    """
    return 1.0 - math.exp(-hours * STILL_WATER_KL_M_H / depth_m)


@dataclass(frozen=True)
class Water:
    """An effluent as the engine sees it.

    Attributes
    ----------
    ph : float
        Measured activity pH [-].
    temperature_c : float
        Temperature [°C].
    totals_mol_l : Mapping[str, float]
        Total of each weak-acid system present, carbonate included [mol/L].
    strong_eq_l : float
        Strong cations minus strong anions [eq/L].
    strong_ionic_strength : float
        Ionic strength carried by strong ions [mol/L].
    ionic_strength : float
        Ionic strength of the water [mol/L].
    davies : bool
        Davies activity model (True) or ideal solution.
    open_to_air : bool
        The tank is open to air: a sample without alkalinity is taken as in
        CO2 equilibrium with it, and the dosed water exchanges CO2 with it
        over ``hours_in_air``.
    pco2_atm : float
        CO2 partial pressure of that air [atm].
    alkalinity_eq_l : float
        Total alkalinity to pH 4.5 of the water as modelled [eq/L]; equal to
        the measured value when one was given.
    notes : tuple of str
        What the inference assumed or found worth saying.
    ions_mg_l : Mapping[str, float]
        Measured background strong ions (sodium, chloride ...) [mg/L]; used
        by the ionic strength and the discharge checks.
    unknown_pka : float or None
        pKa of the fitted unidentified acid [-].
    metals_mol_l : Mapping[str, float]
        Total of each dissolved metal as sampled (calcium and magnesium
        included) [mol/L].
    ferrous_oxidised : bool
        Ferrous iron planned as oxidised by aeration before dosing: the tank
        (:meth:`mixture`) holds it as ferric iron.
    known_strong_eq_l : float
        Net charge of the measured strong ions [eq/L].
    known_ionic_strength : float
        Ionic strength of the measured strong ions and any extra salt load
        [mol/L].
    hours_in_air : float
        How long the dosed water stands open to air before the pH that
        counts (the reading, the discharge) [h]; 0 for a tank dosed and read
        in minutes.
    depth_m : float
        Depth of the open water, which sets how fast CO2 exchanges [m].
    site_pka : tuple of float
        pKa of each fitted buffer site (totals ``site_1`` ... in
        ``totals_mol_l``), from a many-buffer titration fit [-].
    calcite : {"auto", "precipitates", "dissolved"}
        Whether the dosed water drops calcite: "auto" lets the plan decide
        from how supersaturated the dose leaves it (see
        :data:`dosing.planning.plan.CALCITE_SI_FAST`).
    """

    ph: float
    temperature_c: float
    totals_mol_l: Mapping[str, float]
    strong_eq_l: float
    strong_ionic_strength: float
    ionic_strength: float
    davies: bool
    open_to_air: bool
    pco2_atm: float
    alkalinity_eq_l: float
    notes: tuple[str, ...] = field(default=())
    ions_mg_l: Mapping[str, float] = field(default_factory=dict)
    unknown_pka: float | None = None
    metals_mol_l: Mapping[str, float] = field(default_factory=dict)
    ferrous_oxidised: bool = False
    known_strong_eq_l: float = 0.0
    known_ionic_strength: float = 0.0
    hours_in_air: float = 0.0
    depth_m: float = DEFAULT_DEPTH_M
    calcite: str = "auto"
    site_pka: tuple[float, ...] = ()

    @property
    def air_fraction(self) -> float:
        """How far the dosed water gets toward CO2 equilibrium with air [-]."""
        if not self.open_to_air:
            return 0.0
        return air_exchange_fraction(self.hours_in_air, self.depth_m)

    @property
    def dosed_at_air_equilibrium(self) -> bool:
        """Whether the dose is planned with dissolved CO2 held by the air."""
        return self.air_fraction >= FULL_EXCHANGE

    def mixture(self, *, air_equilibrium: bool | None = None) -> Mixture:
        """The water as a one-row :class:`Mixture` for dosing.

        With ``air_equilibrium`` (default: :attr:`dosed_at_air_equilibrium`)
        dissolved CO2 is fixed at its air value for the dosed water: a pond
        that stands for days. Otherwise the carbonate total is held as
        sampled: a tank dosed and read before CO2 exchanges (hours to days).
        """
        held = self.dosed_at_air_equilibrium if air_equilibrium is None else air_equilibrium
        co2 = (float(co2_in_air_mol_l(self.temperature_c, self.pco2_atm))
               if held else math.nan)
        vec = totals_vector(self.totals_mol_l, self.metals_mol_l)
        mix = Mixture.build(aerate(vec) if self.ferrous_oxidised else vec,
                            self.strong_eq_l, self.strong_ionic_strength,
                            self.temperature_c, co2, self.davies, self.unknown_pka)
        sites = None
        if self.site_pka:
            sites = np.full((1, 8), np.nan)
            sites[0, :len(self.site_pka)] = self.site_pka
        return replace(mix, calcite=self.calcite == "precipitates", site_pka=sites)

    @property
    def tank_metals_mol_l(self) -> dict[str, float]:
        """Metals in the tank as dosed (after aeration, if planned) [mol/L]."""
        tot = self.mixture().totals_mol_l[0]
        return {m: float(tot[system_index(m)]) for m in METAL_IDS
                if tot[system_index(m)] > 0}

    def strong_ionic_strength_for(self, strong_eq_l):
        """Ionic strength of the strong ions for another balance [mol/L].

        The measured ions count with their charges; what the balance needs
        beyond them is taken as monovalent.
        """
        return self.known_ionic_strength + 0.5 * np.abs(
            np.asarray(strong_eq_l, dtype=float) - self.known_strong_eq_l)

    @property
    def carbonate_mol_l(self) -> float:
        """Total inorganic carbon [mol/L]."""
        return self.totals_mol_l.get("carbonate", 0.0)


def aerate(vec: np.ndarray) -> np.ndarray:
    """Totals (m,) or (n, m) with ferrous iron moved to ferric [mol/L].

    Aeration, 4 Fe2+ + O2 + 10 H2O -> 4 Fe(OH)3 + 8 H+: the strong-ion
    balance is unchanged, and the charge balance releases the acid as the
    ferric iron hydrolyses and precipitates.
    """
    out = np.array(vec, dtype=float)
    fe2, fe3 = system_index("iron_ii"), system_index("iron_iii")
    out[..., fe3] += out[..., fe2]
    out[..., fe2] = 0.0
    return out


def totals_vector(totals_mol_l: Mapping[str, float],
                  metals_mol_l: Mapping[str, float] | None = None) -> np.ndarray:
    """Totals (weak acids, then metals) as an (m,) array in engine order [mol/L]."""
    v = np.zeros(N_SYSTEMS)
    for key, value in totals_mol_l.items():
        v[SYSTEM_IDS.index(get_system(key).id)] = value
    for key, value in (metals_mol_l or {}).items():
        v[system_index(get_metal(key).id)] = value
    return v


def _check_number(field_name: str, value, lo=None, hi=None, *, lo_open=False):
    try:
        x = float(value)
    except (TypeError, ValueError, OverflowError):
        raise InputError(field_name, f"expected a number, got {value!r}") from None
    if not math.isfinite(x):
        raise InputError(field_name, f"expected a finite number, got {value!r}")
    if lo is not None and (x < lo or (lo_open and x == lo)):
        raise InputError(field_name, f"{x:g} is too low; allowed: "
                         + (f"above {lo:g}" if lo_open else f"{lo:g} or more")
                         + (f" and up to {hi:g}" if hi is not None else ""))
    if hi is not None and x > hi:
        raise InputError(field_name, f"{x:g} is too high; allowed: up to {hi:g}")
    return x


def _collect_totals(solutes_mmol_l, solutes_mg_l):
    totals: dict[str, float] = {}
    for table, name, per_mol in ((solutes_mmol_l, "solutes_mmol_l", None),
                                 (solutes_mg_l, "solutes_mg_l", "mg")):
        for key, value in (table or {}).items():
            where = f"{name}.{key}"
            if key not in SOLUTE_IDS:
                raise InputError(where, "unknown solute; known solutes are "
                                 + ", ".join(SOLUTE_IDS))
            x = _check_number(where, value, 0.0)
            if key in totals:
                raise InputError(where, "given both in mmol/L and in mg/L; "
                                 "give it once")
            system = get_system(key)
            mol = x / 1000.0 if per_mol is None else x / 1000.0 / system.basis_molar_mass_g_mol
            totals[key] = mol
    return totals


def _collect_ions(ions_mg_l, metals_mg_l):
    """Strong ions [mg/L] and metals [mol/L] from the two tables, each once."""
    ions: dict[str, float] = {}
    metals: dict[str, float] = {}
    for key, value in (ions_mg_l or {}).items():
        where = f"ions_mg_l.{key}"
        if key not in BACKGROUND_IONS:
            raise InputError(where, "unknown ion; allowed: " + ", ".join(BACKGROUND_IONS))
        x = _check_number(where, value, 0.0, 2e5)
        if key in STRONG_IONS:
            ions[key] = x
        else:
            metals[key] = x / 1000.0 / get_metal(key).molar_mass_g_mol
    for key, value in (metals_mg_l or {}).items():
        where = f"metals_mg_l.{key}"
        if key not in METAL_IDS:
            raise InputError(where, "unknown metal; allowed: " + ", ".join(METAL_IDS))
        x = _check_number(where, value, 0.0, 1e5)
        if key in metals:
            raise InputError(where, f"{key} is also given in ions_mg_l; give it once")
        metals[key] = x / 1000.0 / get_metal(key).molar_mass_g_mol
    return ions, {k: v for k, v in metals.items() if v > 0}


def _known_strong(ions_mg_l: Mapping[str, float], extra_i: float) -> tuple[float, float]:
    """Net charge [eq/L] and ionic strength [mol/L] of the measured strong ions."""
    eq = ionic = 0.0
    for name, mg in ions_mg_l.items():
        mol = mg / 1000.0 / MOLAR_MASS[BACKGROUND_IONS[name]]
        z = STRONG_IONS[name]
        eq += z * mol
        ionic += 0.5 * z * z * mol
    return eq, ionic + extra_i


#: The highest alkalinity or acidity taken [mg/L as CaCO3]: 2 eq/L, beyond
#: any effluent a lab titrates as such (common practice).
MEASURED_MAX_MG_L = 1e5

#: The two lab titrations: sign of the strong acid taken [-], allowed end
#: points [pH], what the method is called, which way it titrates, and the
#: other measurement to give instead.
_LAB = {"alkalinity": (1, (3.5, 5.5), "total alkalinity", "down", "below", "an acidity"),
        "acidity": (-1, (7.5, 9.0), "acidity", "up", "above", "an alkalinity")}


@dataclass(frozen=True)
class _Measured:
    """A lab alkalinity or acidity, as the engine uses it."""

    kind: str               #: "alkalinity" or "acidity"
    mg_l: float             #: the value as reported [mg/L as CaCO3]
    endpoint_ph: float      #: titration end point [pH]

    @property
    def field(self) -> str:
        """The scenario key it came from."""
        return f"{self.kind}_mg_l_as_caco3"

    @property
    def eq_l(self) -> float:
        """Strong acid taken to the end point: + alkalinity, - acidity [eq/L]."""
        return _LAB[self.kind][0] * self.mg_l / CACO3_MG_PER_MEQ / 1000.0

    def at_or_past_end(self, ph: float) -> bool:
        """True where the water is already at or beyond the end point."""
        return (ph - self.endpoint_ph) * _LAB[self.kind][0] <= 0


def _measured(ph, alkalinity, acidity, alk_ep, acid_ep) -> _Measured | None:
    """Check the lab alkalinity or acidity against the pH; None if neither."""
    if alkalinity is not None and acidity is not None:
        raise InputError("acidity_mg_l_as_caco3", "give alkalinity or acidity, "
                         "not both: either one fixes the carbonate total")
    for kind, value, ep in (("alkalinity", alkalinity, alk_ep), ("acidity", acidity, acid_ep)):
        if value is None:
            continue
        _, (lo, hi), method, way, side, other = _LAB[kind]
        m = _Measured(kind, _check_number(f"{kind}_mg_l_as_caco3", value, 0.0,
                                          MEASURED_MAX_MG_L),
                      _check_number(f"{kind}_endpoint_ph", ep, lo, hi))
        if m.mg_l > 0 and m.at_or_past_end(ph):
            raise InputError(m.field, f"{m.mg_l:g} mg/L as CaCO3 cannot be measured on "
                             f"a water at pH {ph:g}: {method} is titrated {way} to pH "
                             f"{m.endpoint_ph:g}, so a water at or {side} that pH has "
                             f"none. Give 0, or {other} instead")
        return m
    return None


@dataclass(frozen=True)
class _Job:
    """Validated inputs of :func:`infer_water`."""

    ph: float
    temperature_c: float
    davies: bool
    pco2_uatm: float
    known_eq: float
    known_i: float
    unknown_pka: float | None
    vec: np.ndarray         # totals (acids and metals) as sampled [mol/L]


def _carbonate_from_lab(job: _Job, m: _Measured, notes: list[str]) -> float:
    """Carbonate total that explains a lab alkalinity or acidity [mol/L]."""
    if m.eq_l == 0.0 and m.at_or_past_end(job.ph):
        return 0.0
    metals = bool(np.any(job.vec[METAL_COLUMNS] > 0))
    c, coef, _ = carbonate_for_alkalinity(
        job.vec, job.ph, job.temperature_c, m.eq_l, m.endpoint_ph, davies=job.davies,
        extra_ionic_strength=job.known_i, unknown_pka=job.unknown_pka,
        ferrous_oxidised=m.kind == "acidity")
    carb = float(c[0])
    if not np.isfinite(carb) or coef[0] == 0.0:
        raise InputError(m.field, f"carbonate cannot explain this value at pH {job.ph:g}")
    if carb >= 0.0:
        return carb
    # What the pH, the solutes and the metals alone imply, in the lab's units.
    floor_mg = abs(m.eq_l - carb * float(coef[0])) * CACO3_MG_PER_MEQ * 1000.0
    slack = max(LOW_READING_MG_L, LAB_PRECISION * floor_mg)
    others = "the listed solutes" + (", the metals" if metals else "") + " and the pH"
    if m.mg_l <= LOW_READING_MG_L:
        notes.append(f"the {m.kind} of {m.mg_l:g} mg/L as CaCO3 is at the reporting "
                     f"limit and below what {others} alone imply; the water is taken "
                     "to hold no inorganic carbon")
        return 0.0
    if floor_mg - m.mg_l <= slack:
        notes.append(f"the {m.kind} of {m.mg_l:g} mg/L as CaCO3 is within the lab's "
                     f"precision of the {_lab_fmt(floor_mg)} mg/L that {others} alone "
                     "imply; the water is taken to hold no inorganic carbon")
        return 0.0
    raise InputError(m.field, f"the {m.kind} of {m.mg_l:g} mg/L as CaCO3 is smaller "
                     f"than the {_lab_fmt(floor_mg)} mg/L that {others} alone account "
                     "for; no water can be both. Check the laboratory value, the pH, "
                     "the solute totals" + (" and the metals" if metals else ""))


def _lab_fmt(x: float) -> str:
    """A lab figure to four significant digits."""
    return f"{x:.4g}"


def _carbonate_from_air(job: _Job, notes: list[str]) -> float:
    """Carbonate of a water at equilibrium with air at its pH [mol/L]."""
    a0_c = float(co2_in_air_mol_l(job.temperature_c, job.pco2_uatm * 1e-6))
    probe = speciate(Mixture.build(job.vec, 0.0, job.known_i, job.temperature_c,
                                   a0_c, job.davies, job.unknown_pka), job.ph, solids=False)
    carb = float(probe.totals_mol_l[0, CARBONATE])
    if not math.isfinite(carb) or carb > MAX_AIR_CARBONATE_MOL_L:
        raise InputError("alkalinity_mg_l_as_caco3", "no alkalinity given, and a water "
                         f"at pH {job.ph:g} in equilibrium with air would hold "
                         f"{carb * 1000:.3g} mmol/L of carbonate, more than a tank or "
                         "pond takes up from air in days: measure the alkalinity "
                         "(Standard Methods 2320 B) and give it")
    notes.append("no alkalinity given: carbonate taken at equilibrium with "
                 f"air at the measured pH ({carb * 1000:.3g} mmol/L)")
    return carb


def _strong_balance(job: _Job) -> tuple[float, float]:
    """Strong-ion balance [eq/L] and ionic strength [mol/L] at the measured pH."""
    s, ionic = strong_balance_at_ph(job.vec, job.ph, job.temperature_c, davies=job.davies,
                                    extra_ionic_strength=job.known_i,
                                    unknown_pka=job.unknown_pka,
                                    known_strong_eq_l=job.known_eq)
    s, ionic = float(s[0]), float(ionic[0])
    if not math.isfinite(s) or not math.isfinite(ionic) or ionic > MAX_IONIC_STRENGTH:
        raise ModelError("the measurements imply an ionic strength "
                         + (f"of {ionic:.3g} mol/L, " if math.isfinite(ionic) else "that does "
                            "not settle, ")
                         + "which no water treated by dosing can have; check the pH, the "
                         "alkalinity or acidity and the solute and metal totals")
    return s, ionic


def _supersaturation_note(job: _Job, s: float, strong_i: float) -> str | None:
    """A note when a metal is above its hydroxide's solubility as sampled."""
    mix = Mixture.build(job.vec, s, strong_i, job.temperature_c, math.nan, job.davies,
                        job.unknown_pka)
    sp = speciate(mix, job.ph)
    over = [mid for mid, col in zip(METAL_IDS, METAL_COLUMNS)
            if sp.solids_mol_l[0, col] > 1e-3 * job.vec[col]]
    if not over:
        return None
    return (f"{', '.join(over)} above its hydroxide's solubility at the measured pH "
            f"{job.ph:g}: the sample may still be precipitating (or was not filtered). "
            "The plan takes it as dissolved until dosed; the dose covers its "
            "precipitation")


def infer_water(ph: float, temperature_c: float = 25.0, *,
                alkalinity_mg_l_as_caco3: float | None = None,
                acidity_mg_l_as_caco3: float | None = None,
                solutes_mmol_l: Mapping[str, float] | None = None,
                solutes_mg_l: Mapping[str, float] | None = None,
                activity: str = "davies", open_to_air: bool = False,
                pco2_uatm: float = DEFAULT_PCO2_UATM,
                alkalinity_endpoint_ph: float = ALKALINITY_ENDPOINT_PH,
                acidity_endpoint_ph: float = ACIDITY_ENDPOINT_PH,
                extra_ionic_strength_mol_l: float = 0.0,
                ions_mg_l: Mapping[str, float] | None = None,
                unknown_pka: float | None = None,
                metals_mg_l: Mapping[str, float] | None = None,
                oxidise_ferrous: bool = False, hours_in_air: float = 0.0,
                depth_m: float = DEFAULT_DEPTH_M, calcite: str = "auto") -> Water:
    """Build the :class:`Water` that matches what was measured; an
    :class:`InputError` names the field when a value is out of range or the
    measurements contradict each other.

    Parameters (units in the names; ranges are checked, see :func:`_validate`)
    ----------
    ph, temperature_c : measured pH (0-14) and temperature (0-60 °C).
    alkalinity_mg_l_as_caco3, acidity_mg_l_as_caco3 : optional, one of them:
        titrated to ``alkalinity_endpoint_ph`` / ``acidity_endpoint_ph``; with
        metals, the acidity is the hot-peroxide one of Standard Methods 2310
        (metal acidity included, ferrous iron counted as oxidised).
    solutes_mmol_l, solutes_mg_l : known totals by solute id, in mmol/L or
        on each laboratory basis (ammonia as N ...); ``carbonate`` allowed
        when neither alkalinity nor acidity is given.
    ions_mg_l, metals_mg_l : background ions (:data:`BACKGROUND_IONS`) and
        dissolved metals of a filtered sample (as the element).
    activity, calcite : "davies" or "ideal"; "auto", "precipitates" or "dissolved".
    open_to_air, pco2_uatm, hours_in_air, depth_m : an open tank, the CO2 of
        its air, how long the dosed water stands and how deep it is; the
        dose is planned at CO2 equilibrium with air only when that time
        reaches :data:`FULL_EXCHANGE` (see :class:`Water`).
    extra_ionic_strength_mol_l : strong ions beyond those given (a salt load).
    unknown_pka : pKa of the ``unknown`` solute (an unlisted acid, e.g. fitted).
    oxidise_ferrous : plan with ferrous iron oxidised by aeration first
        (4 Fe2+ + O2 + 10 H2O -> 4 Fe(OH)3 + 8 H+).

    Examples
    --------
    100 mg/L as CaCO3 at pH 8.0 (ideal) is just under 2 mmol/L of carbonate:

    >>> w = infer_water(8.0, 25.0, alkalinity_mg_l_as_caco3=100, activity="ideal")
    >>> round(w.carbonate_mol_l * 1000, 3)
    2.029
    """
    job, totals, metals, ions, measured = _validate(
        ph, temperature_c, alkalinity_mg_l_as_caco3, acidity_mg_l_as_caco3, solutes_mmol_l,
        solutes_mg_l, activity, pco2_uatm, alkalinity_endpoint_ph, acidity_endpoint_ph,
        extra_ionic_strength_mol_l, ions_mg_l, unknown_pka, metals_mg_l, oxidise_ferrous,
        open_to_air)
    hours_in_air = _check_number("hours_in_air", hours_in_air, 0.0, 1e5)
    if calcite not in CALCITE_MODES:
        raise InputError("calcite", f"{calcite!r}; allowed: " + ", ".join(CALCITE_MODES))
    depth_m = _check_number("depth_m", depth_m, 0.05, 100.0)
    return _solved_water(job, totals, metals, ions, measured, open_to_air, oxidise_ferrous,
                         hours_in_air, depth_m, calcite)


def _solved_water(job, totals, metals, ions, measured, open_to_air, oxidise_ferrous,
                  hours_in_air, depth_m, calcite) -> Water:
    """The water from checked inputs: its carbonate (from the lab value), its
    strong-ion balance (from the pH) and the notes that go with them."""
    notes: list[str] = []
    carb = _carbonate(job, measured, "carbonate" in totals, open_to_air, notes)
    if carb is not None:
        totals["carbonate"] = carb
        job.vec[CARBONATE] = carb
    s, ionic = _strong_balance(job)
    strong_i = job.known_i + 0.5 * abs(s - job.known_eq)
    note = _supersaturation_note(job, s, strong_i) if metals else None
    if note:
        notes.append(note)
    if oxidise_ferrous:
        notes.append(_AERATION_NOTE.format(fe2=metals["iron_ii"] * 1000))
    start = Mixture.build(job.vec, s, strong_i, job.temperature_c, math.nan, job.davies,
                          job.unknown_pka)
    alk_model = _alkalinity_of(start, job.ph)
    if ionic > DAVIES_I_LIMIT:
        notes.append(f"ionic strength {ionic:.2f} mol/L is above the range where "
                     "the Davies equation is trusted (about 0.5 mol/L); confirm "
                     "the dose with a bench titration")
    return Water(ph=job.ph, temperature_c=job.temperature_c, totals_mol_l=dict(totals),
                 strong_eq_l=s, strong_ionic_strength=strong_i, ionic_strength=ionic,
                 davies=job.davies, open_to_air=bool(open_to_air),
                 pco2_atm=job.pco2_uatm * 1e-6, alkalinity_eq_l=alk_model,
                 notes=tuple(notes), ions_mg_l=ions, unknown_pka=job.unknown_pka,
                 metals_mol_l=metals, ferrous_oxidised=bool(oxidise_ferrous),
                 known_strong_eq_l=job.known_eq, known_ionic_strength=job.known_i,
                 hours_in_air=hours_in_air, depth_m=depth_m, calcite=calcite)


@dataclass(frozen=True)
class Perturbation:
    """Many variants of one set of measurements, for :func:`infer_many` (arrays (n,))."""

    ph: np.ndarray
    temperature_c: np.ndarray
    lab_mg_l: np.ndarray         #: lab alkalinity or acidity [mg/L as CaCO3] (ignored if none)
    solute_factor: np.ndarray    #: each listed solute over its value given [-]
    metal_factor: np.ndarray     #: each metal over its value given [-]


def infer_many(inputs: Mapping[str, Any], variants: Perturbation
               ) -> tuple[Mixture, np.ndarray]:
    """The waters behind many variants of one set of measurements, at once.

    ``inputs`` are :func:`infer_water` keyword arguments (validated once);
    each variant moves the pH, temperature, lab value and totals. The same
    steps as :func:`infer_water`, vectorised: carbonate from the lab value
    (or from air, or as given), then the strong-ion balance from the pH.

    Returns the mixtures, ready for dosing as :meth:`Water.mixture` makes
    them (aerated iron, CO2 held by air when the water stands long enough,
    calcite as the inputs say), and a mask of the variants that a real water
    can be (a lab value below what the rest implies, beyond the lab's
    precision, or an unsettled ionic strength is not).
    """
    # infer_water's own defaults fill what the inputs leave out.
    bound = inspect.signature(infer_water).bind(**inputs)
    bound.apply_defaults()
    a = bound.arguments
    job, totals, metals, ions, measured = _validate(
        a["ph"], a["temperature_c"], a["alkalinity_mg_l_as_caco3"],
        a["acidity_mg_l_as_caco3"], a["solutes_mmol_l"], a["solutes_mg_l"], a["activity"],
        a["pco2_uatm"], a["alkalinity_endpoint_ph"], a["acidity_endpoint_ph"],
        a["extra_ionic_strength_mol_l"], a["ions_mg_l"], a["unknown_pka"], a["metals_mg_l"],
        a["oxidise_ferrous"], a["open_to_air"])
    air_equilibrium = bool(a["open_to_air"]) and air_exchange_fraction(
        a["hours_in_air"], a["depth_m"]) >= FULL_EXCHANGE
    v = variants
    n = v.ph.size
    vec = np.repeat(job.vec[None, :], n, axis=0)
    vec[:, :N_ACIDS] *= v.solute_factor[:, None]
    vec[:, N_ACIDS:] *= v.metal_factor[:, None]
    ok = _many_carbonate(job, measured, "carbonate" in totals, bool(a["open_to_air"]), v, vec)
    s, ionic = strong_balance_at_ph(vec, v.ph, v.temperature_c, davies=job.davies,
                                    extra_ionic_strength=job.known_i,
                                    unknown_pka=job.unknown_pka,
                                    known_strong_eq_l=job.known_eq)
    ok &= np.isfinite(s) & np.isfinite(ionic) & (ionic <= MAX_IONIC_STRENGTH)
    s = np.where(ok, s, 0.0)
    strong_i = job.known_i + 0.5 * np.abs(s - job.known_eq)
    co2 = (co2_in_air_mol_l(v.temperature_c, job.pco2_uatm * 1e-6) if air_equilibrium
           else np.full(n, math.nan))
    tank = aerate(vec) if a["oxidise_ferrous"] else vec
    mix = Mixture.build(tank, s, strong_i, v.temperature_c, co2, job.davies, job.unknown_pka)
    return replace(mix, calcite=a["calcite"] == "precipitates"), ok


def _many_carbonate(job: _Job, measured: _Measured | None, given_c: bool, open_to_air: bool,
                    v: Perturbation, vec: np.ndarray) -> np.ndarray:
    """Carbonate of each variant, written into ``vec``; the mask of possible ones."""
    n = v.ph.size
    ok = np.ones(n, dtype=bool)
    if measured is not None:
        mg = np.maximum(v.lab_mg_l, 0.0)
        eq = measured.eq_l / measured.mg_l * mg if measured.mg_l > 0 else (
            _LAB[measured.kind][0] * mg / CACO3_MG_PER_MEQ / 1000.0)
        past = (v.ph - measured.endpoint_ph) * _LAB[measured.kind][0] <= 0
        c, coef, _ = carbonate_for_alkalinity(
            vec, v.ph, v.temperature_c, eq, measured.endpoint_ph, davies=job.davies,
            extra_ionic_strength=job.known_i, unknown_pka=job.unknown_pka,
            ferrous_oxidised=measured.kind == "acidity")
        floor_mg = np.abs(eq - c * coef) * CACO3_MG_PER_MEQ * 1000.0
        slack = np.maximum(LOW_READING_MG_L, LAB_PRECISION * floor_mg)
        zero = (c < 0) & ((mg <= LOW_READING_MG_L) | (floor_mg - mg <= slack))
        # At or past the end point the lab finds nothing: 0 is right, more is not.
        none_left = past & (mg == 0)
        ok &= none_left | (~past & np.isfinite(c) & ((c >= 0) | zero)
                           & (c <= MAX_CARBONATE_MOL_L))
        vec[:, CARBONATE] = np.where(ok & ~none_left & (c > 0), c, 0.0)
    elif not given_c and open_to_air:
        co2 = co2_in_air_mol_l(v.temperature_c, job.pco2_uatm * 1e-6)
        probe = speciate(Mixture.build(vec, 0.0, job.known_i, v.temperature_c, co2,
                                       job.davies, job.unknown_pka), v.ph, solids=False)
        vec[:, CARBONATE] = probe.totals_mol_l[:, CARBONATE]
        ok &= vec[:, CARBONATE] <= MAX_AIR_CARBONATE_MOL_L
    return ok


def _validate(ph, temperature_c, alkalinity, acidity, solutes_mmol_l, solutes_mg_l,
              activity, pco2_uatm, alk_ep, acid_ep, extra_i, ions_mg_l, unknown_pka,
              metals_mg_l, oxidise_ferrous, open_to_air):
    """Check every input; the job, totals, metals, strong ions and lab value."""
    ph = _check_number("ph", ph, 0.0, 14.0)
    check_temperature(temperature_c)
    if activity not in ("davies", "ideal"):
        raise InputError("activity", f"{activity!r} is not a model; allowed: "
                         "'davies' or 'ideal'")
    pco2_uatm = _check_number("pco2_uatm", pco2_uatm, 0.0, 1e6, lo_open=True)
    extra_i = _check_number("extra_ionic_strength_mol_l", extra_i, 0.0, 5.0)
    totals = _collect_totals(solutes_mmol_l, solutes_mg_l)
    if (solutes_mg_l or {}).get("unknown") is not None:
        raise InputError("solutes_mg_l.unknown", "an unidentified acid has no mass basis; "
                         "give it in solutes_mmol_l with its unknown_pka")
    if "unknown" in totals and unknown_pka is None:
        raise InputError("solutes_mmol_l.unknown", "give the pKa of the unidentified "
                         "acid as unknown_pka")
    if unknown_pka is not None:
        unknown_pka = _check_number("unknown_pka", unknown_pka, 1.0, 13.0)
    ions, metals = _collect_ions(ions_mg_l, metals_mg_l)
    if oxidise_ferrous and not metals.get("iron_ii"):
        raise InputError("oxidise_ferrous", "there is no ferrous iron to oxidise; give "
                         "metals_mg_l.iron_ii or leave oxidise_ferrous out")
    measured = _measured(ph, alkalinity, acidity, alk_ep, acid_ep)
    if measured is not None and "carbonate" in totals:
        raise InputError(measured.field, "give carbonate as a solute or an "
                         "alkalinity/acidity, not both: either one fixes it")
    known_eq, known_i = _known_strong(ions, extra_i)
    job = _Job(ph, float(temperature_c), activity == "davies", pco2_uatm, known_eq,
               known_i, unknown_pka, totals_vector(totals, metals))
    return job, totals, metals, ions, measured


def _carbonate(job: _Job, measured: _Measured | None, given: bool, open_to_air: bool,
               notes: list[str]) -> float | None:
    """The carbonate total to use, or None when it was given as a solute."""
    if measured is not None:
        carb = _carbonate_from_lab(job, measured, notes)
    elif given:
        return None
    elif open_to_air:
        carb = _carbonate_from_air(job, notes)
    else:
        notes.append("no alkalinity, acidity or carbonate given: the water "
                     "is taken to hold no inorganic carbon, which is rare in "
                     "practice; a laboratory alkalinity makes the dose more "
                     "reliable")
        return 0.0
    if carb > MAX_CARBONATE_MOL_L:
        raise InputError(measured.field if measured else "alkalinity_mg_l_as_caco3",
                         f"the measurements imply {carb:.3g} mol/L of dissolved "
                         "carbonate, more than any water holds; check the pH and the "
                         "laboratory value")
    return carb


_AERATION_NOTE = ("ferrous iron ({fe2:.3g} mmol/L) planned as oxidised to ferric by "
                  "aeration before dosing (4 Fe2+ + O2 + 10 H2O -> 4 Fe(OH)3 + 8 H+): "
                  "aerate fully first, or the dose overshoots as the iron oxidises later")


def _alkalinity_of(mix: Mixture, ph: float) -> float:
    """Total alkalinity to pH 4.5 of a closed one-row mixture [eq/L]."""
    here = speciate(mix, ph, solids=False)
    end = speciate(mix, ALKALINITY_ENDPOINT_PH)
    w = here.h_mol_l - here.oh_mol_l
    we = end.h_mol_l - end.oh_mol_l
    return float((end.totals_mol_l * end.mean_charge).sum(-1)[0]
                 - (here.totals_mol_l * here.mean_charge).sum(-1)[0] + we[0] - w[0])
