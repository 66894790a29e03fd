"""The effluent, as far as an operator's measurements describe it.

An operator knows a measured pH and temperature, perhaps a laboratory
alkalinity (Standard Methods 2320 B, titration to pH 4.5) or acidity
(Standard Methods 2310 B, titration to pH 8.3), and perhaps some solute
totals. :func:`infer_water` turns those :class:`~dosing.planning.measurements.Measurements`
into a :class:`Water`: the carbonate total that explains the alkalinity or
acidity, and the strong-ion balance that puts the water at its measured pH
by charge balance. Both are direct solves (see :mod:`dosing.chem.dose`).
:func:`dosing.planning.variants.infer_many` does the same for many
variants of one set of measurements at once.

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
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Mapping

import numpy as np

from ..chem import (CARBONATE, METAL_COLUMNS, Mixture, carbonate_for_alkalinity,
                    co2_in_air_mol_l, speciate, strong_balance_at_ph, system_index)
from ..chem.activity import DAVIES_I_LIMIT, SIT, ActivityModel, kg_water_per_l
from ..chem.metals import METAL_IDS
from ..errors import InputError, ModelError
from .findings import Finding, Q, note
from .measurements import (ALKALINITY_ENDPOINT_PH, CACO3_MG_PER_MEQ, DEFAULT_DEPTH_M,
                           LAB_PRECISION, LOW_READING_MG_L, Checked, LabValue, Measurements,
                           check, totals_vector)

__all__ = ["Water", "infer_water", "with_sit", "aerate", "air_exchange_fraction", "FULL_EXCHANGE",
           "STILL_WATER_KL_M_H", "MAX_CARBONATE_MOL_L", "MAX_AIR_CARBONATE_MOL_L",
           "MAX_IONIC_STRENGTH"]

#: Molal ionic strength up to which the specific ion interaction model is
#: checked in sulfate media (the Pitzer model of Clegg, Rard & Pitzer 1994
#: via pytzer: sulfuric acid's mean activity coefficient within 8 % to 1
#: mol/kg, 18 % at 2, 29 % at 3; tests/test_activity_sit.py) [mol/kg].
SIT_SULFATE_MOL_KG = 1.0

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
    activity : ActivityModel
        How activity coefficients are found (:mod:`dosing.chem.activity`).
    open_to_air : bool
        The tank is open to air: a sample without alkalinity is taken as in
        CO2 equilibrium with it, and the dosed water exchanges CO2 with it
        over ``hours_in_air``.
    pco2_atm : float
        CO2 partial pressure of that air [atm].
    alkalinity_eq_l : float
        Total alkalinity to pH 4.5 of the water as modelled [eq/L]; equal to
        the measured value when one was given.
    notes : tuple of Finding
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
    activity: ActivityModel
    open_to_air: bool
    pco2_atm: float
    alkalinity_eq_l: float
    notes: tuple[Finding, ...] = field(default=())
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
                            self.temperature_c, co2, self.activity, self.unknown_pka)
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


def _carbonate_from_lab(job: Checked, m: LabValue, notes: list[Finding]) -> float:
    """Carbonate total that explains a lab alkalinity or acidity [mol/L]."""
    if m.eq_l == 0.0 and m.at_or_past_end(job.ph):
        return 0.0
    metals = bool(np.any(job.vec[METAL_COLUMNS] > 0))
    c, coef, _ = carbonate_for_alkalinity(
        job.vec, job.ph, job.temperature_c, m.eq_l, m.endpoint_ph, activity=job.activity,
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
        notes.append(note("lab-at-limit", "the {kind} of {lab:gnum} mg/L as CaCO3 is at the "
                          "reporting limit and below what {others} alone imply; the water is "
                          "taken to hold no inorganic carbon", "info",
                          {"kind": m.kind, "others": others},
                          lab=Q(m.mg_l, "mg/L as CaCO3")))
        return 0.0
    if floor_mg - m.mg_l <= slack:
        notes.append(note("lab-within-precision", "the {kind} of {lab:gnum} mg/L as CaCO3 is "
                          "within the lab's precision of the {floor:.4gnum} mg/L that {others} "
                          "alone imply; the water is taken to hold no inorganic carbon", "info",
                          {"kind": m.kind, "others": others}, lab=Q(m.mg_l, "mg/L as CaCO3"),
                          floor=Q(floor_mg, "mg/L as CaCO3")))
        return 0.0
    raise InputError(m.field, f"the {m.kind} of {m.mg_l:g} mg/L as CaCO3 is smaller "
                     f"than the {_lab_fmt(floor_mg)} mg/L that {others} alone account "
                     "for; no water can be both. Check the laboratory value, the pH, "
                     "the solute totals" + (" and the metals" if metals else ""))


def _lab_fmt(x: float) -> str:
    """A lab figure to four significant digits."""
    return f"{x:.4g}"


def _carbonate_from_air(job: Checked, notes: list[Finding]) -> float:
    """Carbonate of a water at equilibrium with air at its pH [mol/L]."""
    a0_c = float(co2_in_air_mol_l(job.temperature_c, job.pco2_uatm * 1e-6))
    probe = speciate(Mixture.build(job.vec, 0.0, job.known_i, job.temperature_c,
                                   a0_c, job.activity, job.unknown_pka), job.ph, solids=False)
    carb = float(probe.totals_mol_l[0, CARBONATE])
    if not math.isfinite(carb) or carb > MAX_AIR_CARBONATE_MOL_L:
        raise InputError("alkalinity_mg_l_as_caco3", "no alkalinity given, and a water "
                         f"at pH {job.ph:g} in equilibrium with air would hold "
                         f"{carb * 1000:.3g} mmol/L of carbonate, more than a tank or "
                         "pond takes up from air in days: measure the alkalinity "
                         "(Standard Methods 2320 B) and give it")
    notes.append(note("carbonate-from-air", "no alkalinity given: carbonate taken at "
                      "equilibrium with air at the measured pH ({carbonate:.3g})", "info",
                      carbonate=Q(carb * 1000, "mmol/L")))
    return carb


def _strong_balance(job: Checked) -> tuple[float, float]:
    """Strong-ion balance [eq/L] and ionic strength [mol/L] at the measured pH."""
    s, ionic = strong_balance_at_ph(job.vec, job.ph, job.temperature_c, activity=job.activity,
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


def _supersaturation_note(job: Checked, s: float, strong_i: float) -> Finding | None:
    """A note when a metal is above its hydroxide's solubility as sampled."""
    mix = Mixture.build(job.vec, s, strong_i, job.temperature_c, math.nan, job.activity,
                        job.unknown_pka)
    sp = speciate(mix, job.ph)
    over = [mid for mid, col in zip(METAL_IDS, METAL_COLUMNS)
            if sp.solids_mol_l[0, col] > 1e-3 * job.vec[col]]
    if not over:
        return None
    return note("supersaturated-sample", "{metals} above its hydroxide's solubility at the "
                "measured pH {ph:g}: the sample may still be precipitating (or was not "
                "filtered). The plan takes it as dissolved until dosed; the dose covers its "
                "precipitation", "info", {"metals": ", ".join(over)}, ph=Q(job.ph, "pH"))


def _solved_water(job: Checked, m: Measurements) -> Water:
    """The water from checked inputs: its carbonate (from the lab value), its
    strong-ion balance (from the pH) and the notes that go with them."""
    notes: list[Finding] = []
    totals = dict(job.totals)
    carb = _carbonate(job, "carbonate" in totals, m.open_to_air, notes)
    if carb is not None:
        totals["carbonate"] = carb
        job.vec[CARBONATE] = carb
    s, ionic = _strong_balance(job)
    strong_i = job.known_i + 0.5 * abs(s - job.known_eq)
    over = _supersaturation_note(job, s, strong_i) if job.metals else None
    if over:
        notes.append(over)
    if m.oxidise_ferrous:
        notes.append(note("aeration", _AERATION_NOTE, "info",
                          fe2=Q(job.metals["iron_ii"] * 1000, "mmol/L")))
    start = Mixture.build(job.vec, s, strong_i, job.temperature_c, math.nan, job.activity,
                          job.unknown_pka)
    alk_model = _alkalinity_of(start, job.ph)
    notes.extend(_activity_notes(job, ionic))
    return Water(ph=job.ph, temperature_c=job.temperature_c, totals_mol_l=totals,
                 strong_eq_l=s, strong_ionic_strength=strong_i, ionic_strength=ionic,
                 activity=job.activity, open_to_air=bool(m.open_to_air),
                 pco2_atm=job.pco2_uatm * 1e-6, alkalinity_eq_l=alk_model,
                 notes=tuple(notes), ions_mg_l=job.ions, unknown_pka=job.unknown_pka,
                 metals_mol_l=job.metals, ferrous_oxidised=bool(m.oxidise_ferrous),
                 known_strong_eq_l=job.known_eq, known_ionic_strength=job.known_i,
                 hours_in_air=job.hours_in_air, depth_m=job.depth_m, calcite=m.calcite)


def _carbonate(job: Checked, given: bool, open_to_air: bool,
               notes: list[Finding]) -> float | None:
    """The carbonate total to use, or None when it was given as a solute."""
    measured = job.lab
    if measured is not None:
        carb = _carbonate_from_lab(job, measured, notes)
    elif given:
        return None
    elif open_to_air:
        carb = _carbonate_from_air(job, notes)
    else:
        notes.append(note("no-carbonate", "no alkalinity, acidity or carbonate given: the "
                          "water is taken to hold no inorganic carbon, which is rare in "
                          "practice; a laboratory alkalinity makes the dose more reliable",
                          "info"))
        return 0.0
    if carb > MAX_CARBONATE_MOL_L:
        raise InputError(measured.field if measured else "alkalinity_mg_l_as_caco3",
                         f"the measurements imply {carb:.3g} mol/L of dissolved "
                         "carbonate, more than any water holds; check the pH and the "
                         "laboratory value")
    return carb


_AERATION_NOTE = ("ferrous iron ({fe2:.3g}) planned as oxidised to ferric by "
                  "aeration before dosing (4 Fe2+ + O2 + 10 H2O -> 4 Fe(OH)3 + 8 H+): "
                  "aerate fully first, or the dose overshoots as the iron oxidises later")


def _alkalinity_of(mix: Mixture, ph: float) -> float:
    """Total alkalinity to pH 4.5 of a closed one-row mixture [eq/L]."""
    here = speciate(mix, ph, solids=False)
    end = speciate(mix, ALKALINITY_ENDPOINT_PH)
    # Strong acid from pH to 4.5: the charge balance at the end point less the
    # one at the sample (the strong ions cancel; complexes are in both).
    return float(end.charge_residual_eq_l[0] - here.charge_residual_eq_l[0])


def infer_water(measurements: Measurements) -> Water:
    """Build the :class:`Water` that matches what was measured; an
    :class:`InputError` names the field when a value is out of range or the
    measurements contradict each other.

    Examples
    --------
    100 mg/L as CaCO3 at pH 8.0 (ideal) is just under 2 mmol/L of carbonate:

    >>> w = infer_water(Measurements(8.0, 25.0, alkalinity_mg_l_as_caco3=100, activity="ideal"))
    >>> round(w.carbonate_mol_l * 1000, 3)
    2.029
    """
    job = check(measurements)
    water = _solved_water(job, measurements)
    if job.auto and water.ionic_strength > DAVIES_I_LIMIT:
        water = with_sit(measurements, water.ionic_strength)
    return water


def with_sit(measurements: Measurements, ionic_mol_l: float) -> Water:
    """The water inferred with the specific ion interaction model, with a
    note saying why ("auto" found an ionic strength past the Davies range)."""
    water = _solved_water(replace(check(measurements), activity=SIT), measurements)
    why = note("activity-model", "ionic strength {ionic:.2fnum} mol/L is past the range of "
               "the Davies equation (about {limit:gnum} mol/L): activities come from the "
               "specific ion interaction model (SIT)", "info",
               ionic=Q(ionic_mol_l, "mol/L"), limit=Q(DAVIES_I_LIMIT, "mol/L"))
    return replace(water, notes=(why,) + water.notes)


def _activity_notes(job: Checked, ionic: float) -> list[Finding]:
    """What the activity model says of this water; a water past what it
    covers is refused (SIT) or warned about (Davies, ideal)."""
    model = job.activity
    if model is SIT:
        molal = ionic / float(kg_water_per_l(ionic))
        if molal > model.limit_mol_l:
            raise InputError("activity", f"the water's ionic strength, {molal:.2g} mol/kg, "
                             "is beyond what the specific ion interaction coefficients "
                             f"cover ({model.limit_mol_l:g} mol/kg): no activity model "
                             "here gives a trustworthy dose; plan from a bench titration "
                             "of a sample")
        sulfate = job.vec[system_index("sulfate")]
        if molal > SIT_SULFATE_MOL_KG and 2.0 * sulfate > 0.5 * ionic:
            return [note("activity-sulfate", "a sulfate-rich water at {ionic:.2fnum} mol/L: "
                         "the specific ion interaction model is checked to about "
                         "{within:gnum} mol/kg in sulfate media (against the Pitzer model "
                         "of Clegg, Rard & Pitzer 1994), and the activities here may be "
                         "off by 20-30 %: confirm the dose with a bench titration",
                         "warning", ionic=Q(ionic, "mol/L"),
                         within=Q(SIT_SULFATE_MOL_KG, "mol/kg"))]
        return []
    if ionic > model.limit_mol_l:
        return [note("activity-range", "ionic strength {ionic:.2fnum} mol/L is above the "
                     "range where the {model} equation is trusted (about {limit:gnum} "
                     "mol/L); confirm the dose with a bench titration", "warning",
                     {"model": model.label}, ionic=Q(ionic, "mol/L"),
                     limit=Q(model.limit_mol_l, "mol/L"))]
    return []


