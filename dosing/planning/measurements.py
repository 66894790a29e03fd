"""What an operator measured, checked: the inputs of effluent inference.

:class:`Measurements` holds everything a water is inferred from: the
measured pH and temperature, a laboratory alkalinity (Standard Methods 2320
B, titration to pH 4.5) or acidity (Standard Methods 2310 B, to pH 8.3),
known solute totals, background ions, dissolved metals, and the model
switches that go with them (activity model, a tank open to air, calcite).
:func:`check` validates them in one place and gives the engine's view of
them (:class:`Checked`): totals in engine order [mol/L], the net charge and
ionic strength of the measured strong ions, and the lab value. Every
problem is an :class:`~dosing.errors.InputError` naming the field.

References
----------
1. APHA, AWWA, WEF. Standard Methods for the Examination of Water and
   Wastewater, methods 2320 B (alkalinity) and 2310 B (acidity). End points
   pH 4.5 and 8.3 as summarised by US EPA Region 9 SOP 560 and NEMI.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from ..chem.activity import AUTO, DAVIES, DEFAULT_CHOICE, ActivityModel, activity_model
from ..chem.columns import N_SYSTEMS, system_index
from ..chem.metals import METAL_IDS, get_metal
from ..chem.species import CHELANTS, MOLAR_MASS, SOLUTE_IDS, SYSTEM_IDS, get_system
from ..chem.water import check_temperature
from ..errors import InputError

__all__ = ["Measurements", "Checked", "LabValue", "check", "check_number", "totals_vector",
           "CACO3_MG_PER_MEQ", "ALKALINITY_ENDPOINT_PH", "ACIDITY_ENDPOINT_PH",
           "DEFAULT_PCO2_UATM", "BACKGROUND_IONS", "STRONG_IONS", "LOW_READING_MG_L",
           "LAB_PRECISION", "MEASURED_MAX_MG_L", "CALCITE_MODES", "DEFAULT_DEPTH_M"]

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
#: What the dosed water may do with calcite (see :class:`Water`).
CALCITE_MODES = ("auto", "precipitates", "dissolved")
#: Depth of an open tank or pond when none is given [m] (common practice).
DEFAULT_DEPTH_M = 2.0


def check_number(field_name: str, value, lo=None, hi=None, *, lo_open=False):
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
            x = check_number(where, value, 0.0)
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
        x = check_number(where, value, 0.0, 2e5)
        if key in STRONG_IONS:
            ions[key] = x
        else:
            metals[key] = x / 1000.0 / get_metal(key).molar_mass_g_mol
    for key, value in (metals_mg_l or {}).items():
        where = f"metals_mg_l.{key}"
        if key not in METAL_IDS:
            raise InputError(where, "unknown metal; allowed: " + ", ".join(METAL_IDS))
        x = check_number(where, value, 0.0, 1e5)
        if key in metals:
            raise InputError(where, f"{key} is also given in ions_mg_l; give it once")
        metals[key] = x / 1000.0 / get_metal(key).molar_mass_g_mol
    return ions, {k: v for k, v in metals.items() if v > 0}


def _check_chelants(totals: Mapping[str, float], m: "Measurements") -> None:
    """A chelant needs the water's metals: its hold on them is the point.

    Raises
    ------
    InputError
        A chelant is given and no metal is (not even calcium or magnesium).
    """
    named = set(m.metals_mg_l or {}) | (set(m.ions_mg_l or {}) - set(STRONG_IONS))
    for chelant in CHELANTS:
        if totals.get(chelant) and not named:
            where = ("solutes_mmol_l" if chelant in (m.solutes_mmol_l or {})
                     else "solutes_mg_l") + f".{chelant}"
            raise InputError(where, f"{chelant} is given without any metal for it to hold: "
                             "give the water's metals in metals_mg_l, calcium and magnesium "
                             "too (calcium = 0 if it truly holds none)")


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
class LabValue:
    """A lab alkalinity or acidity, as the engine uses it."""

    kind: str               #: "alkalinity" or "acidity"
    mg_l: float             #: the value as reported [mg/L as CaCO3]
    endpoint_ph: float      #: titration end point [pH]

    @property
    def field(self) -> str:
        """The scenario key it came from."""
        return f"{self.kind}_mg_l_as_caco3"

    @property
    def sign(self) -> int:
        """+1 for an alkalinity (strong acid taken), -1 for an acidity [-]."""
        return _LAB[self.kind][0]

    @property
    def eq_l(self) -> float:
        """Strong acid taken to the end point: + alkalinity, - acidity [eq/L]."""
        return self.sign * self.mg_l / CACO3_MG_PER_MEQ / 1000.0

    def at_or_past_end(self, ph):
        """True where the water is already at or beyond the end point."""
        return (ph - self.endpoint_ph) * self.sign <= 0


def _lab_value(ph, alkalinity, acidity, alk_ep, acid_ep) -> LabValue | None:
    """Check the lab alkalinity or acidity against the pH; None if neither."""
    if alkalinity is not None and acidity is not None:
        raise InputError("acidity_mg_l_as_caco3", "give alkalinity or acidity, "
                         "not both: either one fixes the carbonate total")
    for kind, value, ep in (("alkalinity", alkalinity, alk_ep), ("acidity", acidity, acid_ep)):
        if value is None:
            continue
        _, (lo, hi), method, way, side, other = _LAB[kind]
        m = LabValue(kind, check_number(f"{kind}_mg_l_as_caco3", value, 0.0,
                                          MEASURED_MAX_MG_L),
                      check_number(f"{kind}_endpoint_ph", ep, lo, hi))
        if m.mg_l > 0 and m.at_or_past_end(ph):
            raise InputError(m.field, f"{m.mg_l:g} mg/L as CaCO3 cannot be measured on "
                             f"a water at pH {ph:g}: {method} is titrated {way} to pH "
                             f"{m.endpoint_ph:g}, so a water at or {side} that pH has "
                             f"none. Give 0, or {other} instead")
        return m
    return None


@dataclass(frozen=True)
class Measurements:
    """What was measured, with the model switches that go with it.

    Parameters (units in the names; ranges are checked by :func:`check`)
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
    extra_ionic_strength_mol_l : strong ions beyond those given (a salt load).
    unknown_pka : pKa of the ``unknown`` solute (an unlisted acid, e.g. fitted).
    oxidise_ferrous : plan with ferrous iron oxidised by aeration first
        (4 Fe2+ + O2 + 10 H2O -> 4 Fe(OH)3 + 8 H+).
    activity : an activity model or its name ("davies", "ideal", "sit"), or
        "auto" (the default): Davies where it is trusted, the specific ion
        interaction model past about 0.5 mol/L (:func:`infer_water` decides).
    open_to_air, pco2_uatm, hours_in_air, depth_m : an open tank, the CO2 of
        its air, how long the dosed water stands and how deep it is.
    calcite : "auto", "precipitates" or "dissolved".
    """

    ph: float
    temperature_c: float = 25.0
    alkalinity_mg_l_as_caco3: float | None = None
    acidity_mg_l_as_caco3: float | None = None
    alkalinity_endpoint_ph: float = ALKALINITY_ENDPOINT_PH
    acidity_endpoint_ph: float = ACIDITY_ENDPOINT_PH
    solutes_mmol_l: Mapping[str, float] | None = None
    solutes_mg_l: Mapping[str, float] | None = None
    ions_mg_l: Mapping[str, float] | None = None
    metals_mg_l: Mapping[str, float] | None = None
    extra_ionic_strength_mol_l: float = 0.0
    unknown_pka: float | None = None
    oxidise_ferrous: bool = False
    activity: str | ActivityModel = DEFAULT_CHOICE
    open_to_air: bool = False
    pco2_uatm: float = DEFAULT_PCO2_UATM
    hours_in_air: float = 0.0
    depth_m: float = DEFAULT_DEPTH_M
    calcite: str = "auto"

    @property
    def lab_value(self) -> tuple[str, float] | None:
        """The lab measurement given (its field name and value), if any."""
        for name in ("alkalinity_mg_l_as_caco3", "acidity_mg_l_as_caco3"):
            value = getattr(self, name)
            if value is not None:
                return name, value
        return None


@dataclass(frozen=True)
class Checked:
    """:class:`Measurements` after :func:`check`: the engine's view of them."""

    ph: float
    temperature_c: float
    activity: ActivityModel
    pco2_uatm: float
    known_eq: float                 #: net charge of the measured strong ions [eq/L]
    known_i: float                  #: their ionic strength, with any salt load [mol/L]
    unknown_pka: float | None
    vec: np.ndarray                 #: totals (acids and metals) as sampled [mol/L]
    totals: dict[str, float]        #: weak-acid totals given [mol/L]
    metals: dict[str, float]        #: metals given (calcium, magnesium too) [mol/L]
    ions: dict[str, float] = field(default_factory=dict)   #: strong ions [mg/L]
    lab: LabValue | None = None
    hours_in_air: float = 0.0
    depth_m: float = DEFAULT_DEPTH_M
    auto: bool = False              #: the model was "auto": Davies, SIT if past its range


def totals_vector(totals_mol_l: Mapping[str, float],
                  metals_mol_l: Mapping[str, float] | None = None) -> np.ndarray:
    """Totals (weak acids, then metals) as an (m,) array in engine order [mol/L]."""
    v = np.zeros(N_SYSTEMS)
    for key, value in totals_mol_l.items():
        v[SYSTEM_IDS.index(get_system(key).id)] = value
    for key, value in (metals_mol_l or {}).items():
        v[system_index(get_metal(key).id)] = value
    return v


def check(m: Measurements) -> Checked:
    """Check every input; the engine's view of them.

    Raises
    ------
    InputError
        Naming the field at fault and what is allowed.
    """
    ph = check_number("ph", m.ph, 0.0, 14.0)
    check_temperature(m.temperature_c)
    auto = isinstance(m.activity, str) and m.activity == AUTO
    model = DAVIES if auto else activity_model(m.activity)
    pco2_uatm = check_number("pco2_uatm", m.pco2_uatm, 0.0, 1e6, lo_open=True)
    extra_i = check_number("extra_ionic_strength_mol_l", m.extra_ionic_strength_mol_l, 0.0, 5.0)
    totals = _collect_totals(m.solutes_mmol_l, m.solutes_mg_l)
    if (m.solutes_mg_l or {}).get("unknown") is not None:
        raise InputError("solutes_mg_l.unknown", "an unidentified acid has no mass basis; "
                         "give it in solutes_mmol_l with its unknown_pka")
    if "unknown" in totals and m.unknown_pka is None:
        raise InputError("solutes_mmol_l.unknown", "give the pKa of the unidentified "
                         "acid as unknown_pka")
    pka = None if m.unknown_pka is None else check_number("unknown_pka", m.unknown_pka, 1.0, 13.0)
    ions, metals = _collect_ions(m.ions_mg_l, m.metals_mg_l)
    _check_chelants(totals, m)
    if m.oxidise_ferrous and not metals.get("iron_ii"):
        raise InputError("oxidise_ferrous", "there is no ferrous iron to oxidise; give "
                         "metals_mg_l.iron_ii or leave oxidise_ferrous out")
    lab = _lab_value(ph, m.alkalinity_mg_l_as_caco3, m.acidity_mg_l_as_caco3,
                     m.alkalinity_endpoint_ph, m.acidity_endpoint_ph)
    if lab is not None and "carbonate" in totals:
        raise InputError(lab.field, "give carbonate as a solute or an "
                         "alkalinity/acidity, not both: either one fixes it")
    hours = check_number("hours_in_air", m.hours_in_air, 0.0, 1e5)
    if m.calcite not in CALCITE_MODES:
        raise InputError("calcite", f"{m.calcite!r}; allowed: " + ", ".join(CALCITE_MODES))
    depth = check_number("depth_m", m.depth_m, 0.05, 100.0)
    known_eq, known_i = _known_strong(ions, extra_i)
    return Checked(ph, float(m.temperature_c), model, pco2_uatm, known_eq, known_i, pka,
                   totals_vector(totals, metals), totals, metals, ions, lab, hours, depth, auto)
