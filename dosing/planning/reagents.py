"""Reagents: the products an operator doses, and what one mole of each adds.

A :class:`Reagent` is a product (a drum of 50 % caustic soda, a bag of
hydrated lime) whose active compound is one of :data:`COMPOUNDS`. The
compound says what one mole adds to the water (strong-ion equivalents, weak
acid totals, ions for the discharge check); the product says how much of it
a kilogram or a litre carries.

Densities at 20 °C
------------------
* NaOH 50 %: 1.5253 g/cm³, Perry's Chemical Engineers' Handbook table of
  aqueous NaOH (from memory).
* NaOH 25 %: 1.2740 g/cm³, linear interpolation of CRC Handbook
  "Concentrative properties of aqueous solutions" (24 % 1.2631, 26 %
  1.2848).
* H2SO4 98 %: 1.8361 g/cm³, CRC Handbook, same table.
* H2SO4 93 %: 1.8276 g/cm³, linear interpolation of CRC (92 % 1.8240,
  94 % 1.8312).
* HCl 32 %: 1.1594 g/cm³, CRC Handbook, same table.

How far lime, quicklime and magnesia can raise the pH follows from the
solubility of portlandite and brucite in :mod:`dosing.chem.metals` (with
temperature), not from a fixed limit. Limestone stops near pH 6.5 in
practice (common practice: its surface coats and CO2 builds up). Purities
of the solid products are typical commercial grades (common practice) and
can be set.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from ..chem import N_SYSTEMS, ReagentVector, system_index
from ..errors import InputError
from .findings import Finding, Q, note
from ..chem.species import MOLAR_MASS

__all__ = ["Compound", "COMPOUNDS", "Reagent", "CATALOGUE", "REAGENT_IDS", "get_reagent", "ph_reagent",
           "GENERAL_CAUTION", "SOLUTION_DENSITIES"]

#: Shown with every dose, by every front end.
GENERAL_CAUTION = ("This plan is an aid to judgement, not an approval: local "
                   "codes, the discharge permit and a licensed engineer have "
                   "the final word on any dose.")


@dataclass(frozen=True)
class Compound:
    """What one mole of an active compound does to a water.

    Attributes
    ----------
    formula : str
        Formula used as the key (``NaOH``).
    molar_mass_g_mol : float
        [g/mol].
    strong_eq : float
        Strong-ion equivalents added per mole [eq/mol].
    adds : Mapping[str, float]
        Moles added to weak-acid totals per mole [mol/mol].
    ions : Mapping[str, float]
        Strong ions added per mole, for the discharge check [mol/mol].
    ionic_strength : float
        Ionic strength added by those strong ions per mol/L dosed [-].
    raises_ph : bool
        True for a base, False for an acid.
    enters_as : Mapping[str, int]
        Form in which each added total enters (0 = most protonated), for the
        heat bookkeeping [-].
    oh_added, h_added : float
        OH- or H+ delivered per mole [mol/mol].
    """

    formula: str
    molar_mass_g_mol: float
    strong_eq: float
    adds: Mapping[str, float]
    ions: Mapping[str, float]
    ionic_strength: float
    raises_ph: bool
    enters_as: Mapping[str, int] = field(default_factory=dict)
    oh_added: float = 0.0
    h_added: float = 0.0

    def vector(self, litres_per_mol: float) -> ReagentVector:
        """The compound as a :class:`ReagentVector` for the solvers."""
        v = np.zeros(N_SYSTEMS)
        for key, n in self.adds.items():
            v[system_index(key)] = n
        return ReagentVector(v, self.strong_eq, self.ionic_strength, litres_per_mol)


def _c(formula: str, strong_eq: float, ions: Mapping[str, float], ionic_strength: float,
       raises_ph: bool, *, adds: Mapping[str, float] | None = None,
       enters_as: Mapping[str, int] | None = None, oh: float = 0.0,
       h: float = 0.0) -> Compound:
    return Compound(formula=formula, molar_mass_g_mol=MOLAR_MASS[formula],
                    strong_eq=strong_eq, adds=adds or {}, ions=ions,
                    ionic_strength=ionic_strength, raises_ph=raises_ph,
                    enters_as=enters_as or {}, oh_added=oh, h_added=h)


#: Active compounds the planner can dose. Calcium and magnesium enter as
#: metals (their hydroxides, gypsum and the lime ceiling follow from the
#: metal catalogue); sodium, potassium, chloride and nitrate as strong ions.
COMPOUNDS: dict[str, Compound] = {c.formula: c for c in (
    _c("NaOH", 1.0, {"Na": 1.0}, 0.5, True, oh=1.0),
    _c("KOH", 1.0, {"K": 1.0}, 0.5, True, oh=1.0),
    _c("Ca(OH)2", 0.0, {"Ca": 1.0}, 0.0, True, adds={"calcium": 1.0}, oh=2.0),
    _c("CaO", 0.0, {"Ca": 1.0}, 0.0, True, adds={"calcium": 1.0}, oh=2.0),
    _c("Mg(OH)2", 0.0, {"Mg": 1.0}, 0.0, True, adds={"magnesium": 1.0}, oh=2.0),
    _c("CaCO3", 0.0, {"Ca": 1.0}, 0.0, True, adds={"calcium": 1.0, "carbonate": 1.0},
       enters_as={"carbonate": 2}),
    _c("Na2CO3", 2.0, {"Na": 2.0}, 1.0, True, adds={"carbonate": 1.0},
       enters_as={"carbonate": 2}),
    _c("NaHCO3", 1.0, {"Na": 1.0}, 0.5, True, adds={"carbonate": 1.0},
       enters_as={"carbonate": 1}),
    _c("H2SO4", 0.0, {"SO4": 1.0}, 0.0, False, adds={"sulfate": 1.0},
       enters_as={"sulfate": 0}, h=1.0),
    _c("HCl", -1.0, {"Cl": 1.0}, 0.5, False, h=1.0),
    _c("HNO3", -1.0, {"NO3": 1.0}, 0.5, False, h=1.0),
    _c("CO2", 0.0, {}, 0.0, False, adds={"carbonate": 1.0}, enters_as={"carbonate": 0}),
    # Sulfide enters as HS- (S2- is not modelled: its pKa is above 17);
    # Na2S is NaHS and NaOH together.
    _c("NaHS", 1.0, {"Na": 1.0}, 0.5, True, adds={"sulfide": 1.0},
       enters_as={"sulfide": 1}),
    _c("Na2S", 2.0, {"Na": 2.0}, 1.0, True, adds={"sulfide": 1.0},
       enters_as={"sulfide": 1}, oh=1.0),
    # An oxidant, not a pH reagent: an oxidise step doses it by the iron it
    # oxidises (0.5 mol per mol of iron(II)); it adds no strong ion.
    _c("H2O2", 0.0, {}, 0.0, False),
)}

_CAUSTIC = ("Caustic burns skin and eyes on contact: face shield, "
            "gloves and apron; eyewash and shower at hand.",
            "Caustic heats the water where it enters: dose slowly into a "
            "well-mixed tank, never add water to caustic.")
_ACID_BURN = ("Strong acid burns skin and eyes on contact: face shield, "
              "acid gloves and apron; eyewash and shower at hand.",)
_ACIDIFY = ("Acid releases CO2 from carbonate (foaming), and toxic hydrogen "
            "sulfide or hydrogen cyanide from sulfide- or cyanide-bearing "
            "waste: know the waste before you acidify, ventilate.",)


@dataclass(frozen=True)
class Reagent:
    """A product as delivered.

    Attributes
    ----------
    id : str
        Catalogue id (``caustic-50``) or ``custom``.
    name : str
        Plain name for the sheet.
    compound : Compound
        The active compound.
    mass_fraction : float
        Mass fraction of the active compound in the product (strength of a
        solution, purity of a solid) [-].
    density_kg_l : float or None
        Density of a liquid product at 20 °C [kg/L]; None for a solid or gas.
    form : str
        ``liquid``, ``solid`` or ``gas``.
    density_source : str
        Where the density comes from.
    cautions : tuple of str
        Handling cautions for this product.
    min_practical_ph, max_practical_ph : float or None
        pH the product cannot take a water below / above in practice.
    solubility_g_l : float or None
        Solubility of the active compound near 20 °C [g/L].
    molarity_mol_l : float or None
        For a solution given by molarity: mol of active compound per litre
        of product [mol/L].
    dilution_heat_kj_mol : float or None
        Integral enthalpy of diluting the product to infinite dilution, per
        mole of active compound [kJ/mol]; None where no value is at hand.
    dilution_heat_source : str
        Where that value comes from.
    """

    id: str
    name: str
    compound: Compound
    mass_fraction: float
    density_kg_l: float | None
    form: str
    density_source: str = ""
    cautions: tuple[str, ...] = field(default=())
    min_practical_ph: float | None = None
    max_practical_ph: float | None = None
    solubility_g_l: float | None = None
    molarity_mol_l: float | None = None
    dilution_heat_kj_mol: float | None = None
    dilution_heat_source: str = ""

    @property
    def raises_ph(self) -> bool:
        """True for a base."""
        return self.compound.raises_ph

    @property
    def kg_product_per_mol(self) -> float | None:
        """Mass of product carrying one mole of active compound [kg/mol]."""
        if self.molarity_mol_l is not None:
            if self.density_kg_l is None:
                return None
            return self.density_kg_l / self.molarity_mol_l
        return self.compound.molar_mass_g_mol / 1000.0 / self.mass_fraction

    @property
    def litres_product_per_mol(self) -> float | None:
        """Volume of product carrying one mole [L/mol]; None if not a liquid."""
        if self.form != "liquid":
            return None
        if self.molarity_mol_l is not None:
            return 1.0 / self.molarity_mol_l
        return self.kg_product_per_mol / self.density_kg_l

    def practical_limit(self, ph: float) -> Finding | None:
        """Why the product cannot take a water to ``ph`` in practice, or None."""
        for limit, side, below in ((self.min_practical_ph, "below", True),
                                   (self.max_practical_ph, "above", False)):
            if limit is not None and (ph < limit if below else ph > limit):
                return note("practical-limit", "{reagent} cannot take a water " + side
                            + " about pH {limit:g} in practice", "warning",
                            {"reagent": self.name}, limit=Q(limit, "pH"))
        return None

    def vector(self) -> ReagentVector:
        """What dosing one mole adds, with the product's own volume."""
        return self.compound.vector(self.litres_product_per_mol or 0.0)


_SULFIDE = ("Sulfide releases hydrogen sulfide, a toxic gas that kills at a few hundred "
            "ppm and soon deadens the sense of smell, wherever it meets water below "
            "about pH 9: dose only into water held alkaline, in a covered, ventilated "
            "tank, with H2S monitors worn and escape respirators at hand.",
            "Dose only the sulfide the metals need (a bench test with lead acetate "
            "paper or a sulfide electrode); excess sulfide leaves in the discharge, "
            "which permits cap.",
            "Sulfide sludge gives off hydrogen sulfide if it later meets acid: keep it "
            "apart from acid wastes and say so on the sludge manifest.",
            "The product is strongly alkaline and corrosive: face shield, gloves and "
            "apron; eyewash and shower at hand.")
_PEROXIDE = ("Hydrogen peroxide is a strong oxidiser: it burns skin and eyes, and it "
             "decomposes to oxygen and heat on contact with metals, dirt or alkali: keep it "
             "away from organics and combustibles, vent its tank, never return unused "
             "peroxide to the drum.",
             "Dose it into the iron water slowly, with mixing: the oxidation releases acid "
             "and the pH falls.")
_LIME = ("Lime dust burns eyes and airways: goggles and dust mask when loading.",
         "Lime dissolves slowly: feed it as a slurry, mix well and allow "
         "reaction time before reading the pH.")
_NAOH = COMPOUNDS["NaOH"]
_H2SO4 = COMPOUNDS["H2SO4"]

#: Densities of the solutions the planner knows, at 20 °C: compound -> mass
#: fraction -> (density [kg/L], source). The one home of these numbers: the
#: catalogue and the sizes-against-strengths grid (:data:`STRENGTHS`) read
#: them here; tests/test_reagents.py checks each row against Laliberté 2009
#: inside that model's fit range. 25 % sulfuric is a day-tank dilution
#: (common practice: diluted acid is easier to meter into a small stream;
#: diluting it is hot).
_CRC = "CRC Handbook, concentrative properties of aqueous solutions"
SOLUTION_DENSITIES: dict[str, dict[float, tuple[float, str]]] = {
    "NaOH": {0.20: (1.2191, f"{_CRC}, 20 °C (from memory)"),
             0.25: (1.2740, f"{_CRC} (24 % and 26 % interpolated)"),
             0.32: (1.3490, f"{_CRC}, 20 °C (from memory)"),
             0.50: (1.5253, "Perry's Chemical Engineers' Handbook, aqueous NaOH at 20 °C "
                            "(from memory)")},
    "H2SO4": {0.25: (1.1783, f"{_CRC}, 20 °C (from memory)"),
              0.93: (1.8276, f"{_CRC} (92 % and 94 % interpolated)"),
              0.98: (1.8361, _CRC)},
    "HCl": {0.10: (1.0474, f"{_CRC}, 20 °C (from memory)"),
            0.20: (1.0980, f"{_CRC}, 20 °C (from memory)"),
            0.32: (1.1594, _CRC)},
}


def _rho(formula: str, fraction: float) -> tuple[float, str]:
    """Density [kg/L] and its source, from :data:`SOLUTION_DENSITIES`."""
    return SOLUTION_DENSITIES[formula][fraction]


def _solution(rid: str, name: str, compound: Compound, fraction: float,
              cautions: tuple[str, ...], **kw) -> Reagent:
    """A catalogue solution, its density read from :data:`SOLUTION_DENSITIES`."""
    rho, source = _rho(compound.formula, fraction)
    return Reagent(rid, name, compound, fraction, rho, "liquid", source, cautions, **kw)


#: Catalogue of stock products.
CATALOGUE: dict[str, Reagent] = {r.id: r for r in (
    _solution("caustic-50", "caustic soda 50 %", _NAOH, 0.50,
              _CAUSTIC + ("50 % caustic starts to crystallise below about 12 °C: "
                        "keep the line and the store warm.",),
            dilution_heat_kj_mol=-22.0,
            dilution_heat_source="50 % NaOH to infinite dilution, about -21 to -23 kJ/mol "
            "(from memory, low confidence; no published table at hand)"),
    _solution("caustic-25", "caustic soda 25 %", _NAOH, 0.25, _CAUSTIC),
    Reagent("lime", "hydrated lime, 93 % Ca(OH)2", COMPOUNDS["Ca(OH)2"], 0.93,
            None, "solid", "",
            _LIME),
    # Slaking heat CaO + H2O -> Ca(OH)2: -65.2 kJ/mol from NBS formation
    # enthalpies (Wagman et al. 1982: CaO -635.09, H2O -285.83, Ca(OH)2
    # -986.09 kJ/mol; from memory).
    Reagent("quicklime", "quicklime, 90 % CaO", COMPOUNDS["CaO"], 0.90, None, "solid", "",
            ("Quicklime slakes with water violently and hot (about 65 kJ per mol): "
             "slake in the slaker, never in a closed container; keep it dry in store.",)
            + _LIME),
    Reagent("magnesia", "magnesium hydroxide slurry 60 %", COMPOUNDS["Mg(OH)2"], 0.60,
            1.52, "liquid",
            "computed for 60 % solids from Mg(OH)2 2.34 g/cm3 (CRC Handbook, physical "
            "constants of inorganic compounds, from memory) and water: 1/(0.6/2.34 + 0.4)",
            ("Magnesium hydroxide slurry settles: keep it stirred and the lines "
             "flushed, or they block.",
             "It reacts slowly: allow reaction time (tens of minutes) before "
             "reading the pH; its own solubility caps the pH near 10, so an "
             "overdose cannot run away.")),
    Reagent("limestone", "limestone, 95 % CaCO3", COMPOUNDS["CaCO3"], 0.95, None, "solid",
            "",
            ("Limestone reacts slowly and stops near pH 6-7 as its surface "
             "coats; it releases CO2 (foam, gas in enclosed spaces): ventilate.",
             "On waters with iron or aluminium it armours with hydroxide; use a "
             "bed that is stirred or renewed."),
            max_practical_ph=6.5),
    Reagent("soda-ash", "soda ash, 99 % Na2CO3", COMPOUNDS["Na2CO3"], 0.99, None,
            "solid", "",
            ("Soda ash dust irritates eyes and skin.",
             "On an acid water soda ash fizzes as CO2 escapes: add slowly, "
             "watch for foaming."), max_practical_ph=11.5),
    Reagent("bicarbonate", "sodium bicarbonate, 99 %", COMPOUNDS["NaHCO3"], 0.99,
            None, "solid", "",
            ("On an acid water bicarbonate fizzes as CO2 escapes: add slowly, "
             "watch for foaming.",), max_practical_ph=8.3),
    _solution("sulfuric-98", "sulfuric acid 98 %", _H2SO4, 0.98,
              _ACID_BURN + ("Concentrated sulfuric acid boils water it meets: "
                          "always add acid to water, slowly, with mixing; never "
                          "water to acid.",) + _ACIDIFY,
            dilution_heat_kj_mol=-91.7,
            dilution_heat_source="estimate from NBS tables (Wagman et al. 1982): H2SO4(l) "
            "-814.0 and H2SO4(aq, inf.) -909.3 kJ/mol give -95.3; less about 3.4 for "
            "forming the 98 % mixture"),
    _solution("sulfuric-93", "sulfuric acid 93 %", _H2SO4, 0.93,
              _ACID_BURN + ("Concentrated sulfuric acid boils water it meets: "
                          "always add acid to water, slowly, with mixing; never "
                          "water to acid.",) + _ACIDIFY,
            dilution_heat_kj_mol=-82.0,
            dilution_heat_source="estimate from NBS tables (Wagman et al. 1982): -95.3 "
            "kJ/mol for H2SO4(l) to infinite dilution, less about 13 for forming the "
            "93 % mixture (0.41 H2O per H2SO4; H2SO4 in 1 H2O is -841.8), +-3"),
    _solution("hydrochloric-32", "hydrochloric acid 32 %", COMPOUNDS["HCl"], 0.32,
              _ACID_BURN + ("Hydrochloric acid gives off corrosive HCl fumes: "
                          "ventilate the dosing point and store.",) + _ACIDIFY,
            dilution_heat_kj_mol=-13.2,
            dilution_heat_source="CRC Handbook, enthalpy of dilution of HCl (after Parker "
            "1965, NSRDS-NBS 2), 10 m -10.24 and 15 m -15.40 kJ/mol, interpolated to 12.9 m"),
    Reagent("hydrosulfide-45", "sodium hydrosulfide 45 %", COMPOUNDS["NaHS"], 0.45, 1.30,
            "liquid", "45 % NaHS solution about 1.30 kg/L at 20 °C (suppliers' sheets, from "
            "memory, low confidence)", _SULFIDE),
    Reagent("sulfide-60", "sodium sulfide flake, 60 % Na2S", COMPOUNDS["Na2S"], 0.60, None,
            "solid", "", _SULFIDE + ("Flake dissolves hot and strongly alkaline: dissolve "
                                     "it in a day tank, slowly, with mixing.",)),
    Reagent("peroxide-35", "hydrogen peroxide 35 %", COMPOUNDS["H2O2"], 0.35, 1.13, "liquid",
            "35 % H2O2 about 1.13 kg/L at 20 °C (CRC Handbook, concentrative properties of "
            "aqueous solutions; from memory)", _PEROXIDE),
    Reagent("lime-slurry-15", "lime slurry, 15 % Ca(OH)2", COMPOUNDS["Ca(OH)2"], 0.15, 1.09,
            "liquid", "computed for 15 % solids from Ca(OH)2 2.24 g/cm3 (CRC Handbook, "
            "physical constants of inorganic compounds, from memory) and water: "
            "1/(0.15/2.24 + 0.85); 10-20 % slurries are common practice",
            ("Lime slurry settles and scales: keep it stirred, the lines short and "
             "flushed, the pump rated for slurry.",) + _LIME),
    Reagent("co2", "carbon dioxide gas", COMPOUNDS["CO2"], 1.0, None, "gas", "",
            ("CO2 displaces air: in a pit, a closed room or a covered tank it "
             "suffocates without warning; ventilate and use a gas monitor.",
             "Cylinders and liquid CO2 lines are under high pressure and very "
             "cold at the outlet."), min_practical_ph=5.0),
)}

#: Catalogue ids in display order.
REAGENT_IDS: tuple[str, ...] = tuple(CATALOGUE)


def ph_reagent(reagent_id: str) -> Reagent:
    """Catalogue reagent by id that moves the pH (an acid or a base).

    Raises
    ------
    InputError
        Unknown id, or a product that is not a pH reagent (an oxidant).
    """
    reagent = get_reagent(reagent_id)
    if reagent.compound.formula == "H2O2":
        raise InputError("reagent.id", f"{reagent_id} is an oxidant, not a pH reagent: it "
                         "goes in an oxidise step ([[step]] kind = \"oxidise\", by = "
                         "\"peroxide\"); allowed here: a catalogue acid or base")
    return reagent


def get_reagent(reagent_id: str) -> Reagent:
    """Catalogue reagent by id.

    Raises
    ------
    InputError
        Unknown id; the message lists the catalogue.
    """
    try:
        return CATALOGUE[reagent_id]
    except KeyError:
        raise InputError("reagent.id", f"unknown reagent {reagent_id!r}; the "
                         "catalogue has " + ", ".join(REAGENT_IDS)
                         + ", or give a custom reagent") from None


