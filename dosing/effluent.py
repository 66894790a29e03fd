"""The effluent, as far as an operator's measurements describe it.

An operator knows a measured pH and temperature, perhaps a laboratory
alkalinity (Standard Methods 2320 B, titration to pH 4.5) or acidity
(Standard Methods 2310 B, titration to pH 8.3), and perhaps some solute
totals. :func:`infer_water` turns that into a :class:`Water`: the carbonate
total that explains the alkalinity or acidity, and the strong-ion balance
that puts the water at its measured pH by charge balance. Both are direct
solves (see :mod:`dosing.equilibrium`).

Assumptions
-----------
* The alkalinity is total alkalinity to the stated end point (default pH
  4.5, the end point Standard Methods 2320 B gives for industrial wastes and
  complex systems) and all of it that the listed solutes do not explain is
  carbonate. Acidity likewise to pH 8.3.
* Strong ions are taken as monovalent for the ionic strength unless an
  extra ionic strength (e.g. from a known salt load) is given.
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

import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from .activity import DAVIES_I_LIMIT
from .equilibrium import (CARBONATE, N_SYSTEMS, Mixture, carbonate_for_alkalinity,
                          co2_in_air_mol_l, speciate, strong_balance_at_ph)
from .errors import InputError, ModelError
from .species import MOLAR_MASS, SYSTEM_IDS, get_system
from .water import check_temperature

__all__ = ["CACO3_MG_PER_MEQ", "ALKALINITY_ENDPOINT_PH", "ACIDITY_ENDPOINT_PH",
           "DEFAULT_PCO2_UATM", "BACKGROUND_IONS", "Water", "infer_water",
           "totals_vector"]

#: Equivalent weight of CaCO3 [mg/meq]: M(CaCO3)/2 with IUPAC atomic weights.
#: Standard Methods rounds it to 50.0 (its factor 50 000).
CACO3_MG_PER_MEQ = MOLAR_MASS["CaCO3"] / 2.0
#: Total alkalinity end point, Standard Methods 2320 B, industrial waste [pH].
ALKALINITY_ENDPOINT_PH = 4.5
#: Acidity end point, Standard Methods 2310 B (phenolphthalein) [pH].
ACIDITY_ENDPOINT_PH = 8.3
#: Background strong ions a scenario may give, with the formula used for
#: their molar mass.
BACKGROUND_IONS = {"sodium": "Na", "potassium": "K", "calcium": "Ca",
                   "magnesium": "Mg", "chloride": "Cl", "nitrate": "NO3"}
#: A laboratory alkalinity or acidity at or below this is taken as "not
#: detected" [mg/L as CaCO3] (common practice: a usual reporting limit).
LOW_READING_MG_L = 2.0
#: CO2 in today's outdoor air, about 420 µatm (common practice, 2020s).
DEFAULT_PCO2_UATM = 420.0


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
        Dissolved CO2 held at equilibrium with air during dosing.
    pco2_atm : float
        CO2 partial pressure of that air [atm].
    alkalinity_eq_l : float
        Total alkalinity to pH 4.5 of the water as modelled [eq/L]; equal to
        the measured value when one was given.
    notes : tuple of str
        What the inference assumed or found worth saying.
    ions_mg_l : Mapping[str, float]
        Measured background strong ions (sodium, calcium ...) [mg/L]; used by
        the discharge and scale checks, not by the charge balance (which the
        measured pH already fixes).
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

    def mixture(self) -> Mixture:
        """The water as a one-row :class:`Mixture` for dosing.

        Where the tank is open to air, dissolved CO2 is fixed at its air
        value for the dosed water.
        """
        co2 = (float(co2_in_air_mol_l(self.temperature_c, self.pco2_atm))
               if self.open_to_air else math.nan)
        return Mixture.build(totals_vector(self.totals_mol_l), self.strong_eq_l,
                             self.strong_ionic_strength, self.temperature_c,
                             co2, self.davies, self.unknown_pka)

    @property
    def carbonate_mol_l(self) -> float:
        """Total inorganic carbon [mol/L]."""
        return self.totals_mol_l.get("carbonate", 0.0)


def totals_vector(totals_mol_l: Mapping[str, float]) -> np.ndarray:
    """Totals as an (m,) array in catalogue order [mol/L]."""
    v = np.zeros(N_SYSTEMS)
    for key, value in totals_mol_l.items():
        v[SYSTEM_IDS.index(get_system(key).id)] = value
    return v


def _check_number(field_name: str, value, lo=None, hi=None, *, lo_open=False):
    try:
        x = float(value)
    except (TypeError, ValueError):
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
            if key not in SYSTEM_IDS:
                raise InputError(where, "unknown solute; known solutes are "
                                 + ", ".join(SYSTEM_IDS))
            x = _check_number(where, value, 0.0)
            if key in totals:
                raise InputError(where, "given both in mmol/L and in mg/L; "
                                 "give it once")
            system = get_system(key)
            mol = x / 1000.0 if per_mol is None else x / 1000.0 / system.basis_molar_mass_g_mol
            totals[key] = mol
    return totals


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
                unknown_pka: float | None = None) -> Water:
    """Build the :class:`Water` that matches what was measured.

    Parameters
    ----------
    ph : float
        Measured pH, 0-14 [-].
    temperature_c : float
        Temperature of the water, 0-60 [°C].
    alkalinity_mg_l_as_caco3 : float, optional
        Total alkalinity to ``alkalinity_endpoint_ph`` [mg/L as CaCO3].
    acidity_mg_l_as_caco3 : float, optional
        Acidity to ``acidity_endpoint_ph`` [mg/L as CaCO3].
    solutes_mmol_l : mapping, optional
        Known totals by solute id [mmol/L]; ``carbonate`` allowed when
        neither alkalinity nor acidity is given.
    solutes_mg_l : mapping, optional
        Known totals on each laboratory basis (ammonia as N ...) [mg/L].
    activity : {"davies", "ideal"}
        Activity model.
    open_to_air : bool
        Dissolved CO2 held by the air while dosing.
    pco2_uatm : float
        CO2 partial pressure of that air [µatm].
    extra_ionic_strength_mol_l : float
        Ionic strength of strong ions beyond those the charge balance shows
        (e.g. a known NaCl load) [mol/L].
    ions_mg_l : mapping, optional
        Background strong ions by name (:data:`BACKGROUND_IONS`) [mg/L].
    unknown_pka : float, optional
        pKa of the ``unknown`` solute (an unidentified monoprotic acid, e.g.
        fitted to a bench titration) [-].

    Raises
    ------
    InputError
        Naming the field, when a value is out of range or the measurements
        contradict each other.

    Examples
    --------
    A bicarbonate water: 100 mg/L as CaCO3 at pH 8.0 (ideal model) holds
    just under 2 mmol/L of inorganic carbon.

    >>> w = infer_water(8.0, 25.0, alkalinity_mg_l_as_caco3=100, activity="ideal")
    >>> round(w.carbonate_mol_l * 1000, 3)
    2.029
    """
    ph = _check_number("ph", ph, 0.0, 14.0)
    check_temperature(temperature_c)
    temperature_c = float(temperature_c)
    if activity not in ("davies", "ideal"):
        raise InputError("activity", f"{activity!r} is not a model; allowed: "
                         "'davies' or 'ideal'")
    davies = activity == "davies"
    pco2_uatm = _check_number("pco2_uatm", pco2_uatm, 0.0, 1e6, lo_open=True)
    extra_i = _check_number("extra_ionic_strength_mol_l", extra_ionic_strength_mol_l, 0.0, 5.0)
    totals = _collect_totals(solutes_mmol_l, solutes_mg_l)
    if (solutes_mg_l or {}).get("unknown") is not None:
        raise InputError("solutes_mg_l.unknown", "an unidentified acid has no mass basis; "
                         "give it in solutes_mmol_l with its unknown_pka")
    if "unknown" in totals and unknown_pka is None:
        raise InputError("solutes_mmol_l.unknown", "give the pKa of the unidentified "
                         "acid as unknown_pka")
    if unknown_pka is not None:
        unknown_pka = _check_number("unknown_pka", unknown_pka, 1.0, 13.0)
    ions = {}
    for key, value in (ions_mg_l or {}).items():
        if key not in BACKGROUND_IONS:
            raise InputError(f"ions_mg_l.{key}", "unknown ion; allowed: "
                             + ", ".join(BACKGROUND_IONS))
        ions[key] = _check_number(f"ions_mg_l.{key}", value, 0.0, 2e5)
    notes: list[str] = []
    if alkalinity_mg_l_as_caco3 is not None and acidity_mg_l_as_caco3 is not None:
        raise InputError("acidity_mg_l_as_caco3", "give alkalinity or acidity, "
                         "not both: either one fixes the carbonate total")
    measured = None
    if alkalinity_mg_l_as_caco3 is not None:
        alk = _check_number("alkalinity_mg_l_as_caco3", alkalinity_mg_l_as_caco3, 0.0, 1e5)
        ep = _check_number("alkalinity_endpoint_ph", alkalinity_endpoint_ph, 3.5, 5.5)
        measured = ("alkalinity_mg_l_as_caco3", alk / CACO3_MG_PER_MEQ / 1000.0, ep)
        if alk > 0 and ph <= ep:
            raise InputError("alkalinity_mg_l_as_caco3", f"{alk:g} mg/L as CaCO3 "
                             f"cannot be measured on a water at pH {ph:g}: total "
                             f"alkalinity is titrated down to pH {ep:g}, so a water "
                             f"at or below that pH has none. Give 0, or an acidity "
                             "instead")
    elif acidity_mg_l_as_caco3 is not None:
        acid = _check_number("acidity_mg_l_as_caco3", acidity_mg_l_as_caco3, 0.0, 1e5)
        ep = _check_number("acidity_endpoint_ph", acidity_endpoint_ph, 7.5, 9.0)
        measured = ("acidity_mg_l_as_caco3", -acid / CACO3_MG_PER_MEQ / 1000.0, ep)
        if acid > 0 and ph >= ep:
            raise InputError("acidity_mg_l_as_caco3", f"{acid:g} mg/L as CaCO3 "
                             f"cannot be measured on a water at pH {ph:g}: acidity "
                             f"is titrated up to pH {ep:g}, so a water at or above "
                             "that pH has none. Give 0, or an alkalinity instead")
    if measured is not None and "carbonate" in totals:
        raise InputError(measured[0], "give carbonate as a solute or an "
                         "alkalinity/acidity, not both: either one fixes it")

    vec = totals_vector(totals)
    if measured is not None:
        name, value_eq_l, ep = measured
        is_alk = name.startswith("alkalinity")
        if value_eq_l == 0.0 and ((is_alk and ph <= ep) or (not is_alk and ph >= ep)):
            carb = 0.0
        else:
            c, coef, _ = carbonate_for_alkalinity(vec, ph, temperature_c, value_eq_l,
                                                 ep, davies=davies,
                                                 extra_ionic_strength=extra_i,
                                                 unknown_pka=unknown_pka)
            carb = float(c[0])
            if not np.isfinite(carb) or coef[0] == 0.0:
                raise InputError(name, "carbonate cannot explain this value at "
                                 f"pH {ph:g}")
            if carb < 0.0:
                kind = "alkalinity" if is_alk else "acidity"
                given = abs(value_eq_l) * CACO3_MG_PER_MEQ * 1000.0
                if given <= LOW_READING_MG_L:
                    notes.append(f"the {kind} of {given:g} mg/L as CaCO3 is at the "
                                 "reporting limit and below what the pH alone "
                                 "implies; the water is taken to hold no "
                                 "inorganic carbon")
                    carb = 0.0
                else:
                    raise InputError(name, f"the {kind} is smaller than the listed "
                                     "solutes and the pH alone account for; check "
                                     "the laboratory value, the pH and the solute "
                                     "totals")
        totals["carbonate"] = carb
        vec[CARBONATE] = carb
    elif "carbonate" not in totals:
        if open_to_air:
            a0_c = float(co2_in_air_mol_l(temperature_c, pco2_uatm * 1e-6))
            probe = speciate(Mixture.build(vec, 0.0, extra_i, temperature_c,
                                           a0_c, davies, unknown_pka), ph)
            carb = float(probe.totals_mol_l[0, CARBONATE])
            totals["carbonate"] = carb
            vec[CARBONATE] = carb
            notes.append("no alkalinity given: carbonate taken at equilibrium with "
                         f"air at the measured pH ({carb * 1000:.3g} mmol/L)")
        else:
            notes.append("no alkalinity, acidity or carbonate given: the water "
                         "is taken to hold no inorganic carbon, which is rare in "
                         "practice; a laboratory alkalinity makes the dose more "
                         "reliable")

    s, ionic = strong_balance_at_ph(vec, ph, temperature_c, davies=davies,
                                    extra_ionic_strength=extra_i, unknown_pka=unknown_pka)
    s = float(s[0])
    if not math.isfinite(s):
        raise ModelError("the ionic strength of this water did not settle; check the "
                         "solute totals (Davies is not meant for brines)")
    strong_i = extra_i + 0.5 * abs(s)
    start = Mixture.build(vec, s, strong_i, temperature_c, math.nan, davies, unknown_pka)
    alk_model = _alkalinity_of(start, ph)
    ionic = float(ionic[0])
    if ionic > DAVIES_I_LIMIT:
        notes.append(f"ionic strength {ionic:.2f} mol/L is above the range where "
                     "the Davies equation is trusted (about 0.5 mol/L); confirm "
                     "the dose with a bench titration")
    return Water(ph=ph, temperature_c=temperature_c,
                 totals_mol_l={k: v for k, v in totals.items()},
                 strong_eq_l=s, strong_ionic_strength=strong_i,
                 ionic_strength=ionic, davies=davies, open_to_air=bool(open_to_air),
                 pco2_atm=pco2_uatm * 1e-6, alkalinity_eq_l=alk_model,
                 notes=tuple(notes), ions_mg_l=ions, unknown_pka=unknown_pka)


def _alkalinity_of(mix: Mixture, ph: float) -> float:
    """Total alkalinity to pH 4.5 of a closed one-row mixture [eq/L]."""
    here = speciate(mix, ph)
    end = speciate(mix, ALKALINITY_ENDPOINT_PH)
    w = here.h_mol_l - here.oh_mol_l
    we = end.h_mol_l - end.oh_mol_l
    return float((mix.totals_mol_l * (end.mean_charge - here.mean_charge)).sum(-1)[0]
                 + we[0] - w[0])
