"""Catalogue of the weak-acid systems the planner knows.

Each :class:`AcidSystem` carries, for every dissociation step, the
thermodynamic pKa at 25 °C and infinite dilution, the standard enthalpy of
that step (used for the van 't Hoff temperature correction), the charge of the
most protonated form, and the basis on which a laboratory reports the total
(ammonia as N, phosphate as P ...), with the molar mass of that basis.

The published source of each number sits beside it. Values marked "from
memory" were recalled and not re-read in the original text; the tests that
lean on them say so.

Sources
-------
[CRC]   CRC Handbook of Chemistry and Physics, tables "Dissociation constants
        of inorganic acids and bases" (after Perrin 1982) and "Dissociation
        constants of organic acids and bases".
[G2002] Goldberg, R. N.; Kishore, N.; Lennen, R. M. (2002). Thermodynamic
        quantities for the ionization reactions of buffers. J. Phys. Chem.
        Ref. Data 31, 231-370.
[NBS]   Wagman, D. D. et al. (1982). The NBS tables of chemical thermodynamic
        properties. J. Phys. Chem. Ref. Data 11, Suppl. 2. Enthalpies of
        ionisation here are differences of standard enthalpies of formation.
[PB82]  Plummer, L. N.; Busenberg, E. (1982). Geochim. Cosmochim. Acta 46,
        1011-1040 (carbonate; the temperature fits live in ``dosing.chem.water``).
[K91]   Kettler, R. M.; Palmer, D. A.; Wesolowski, D. J. (1991). J. Solution
        Chem. 20, 905-927 (oxalic acid).
[S83]   Sjöberg, S.; Hägglund, Y.; Nordin, A.; Ingri, N. (1983). Mar. Chem.
        13, 35-44 (silicic acid).
[SM]    Smith, R. M.; Martell, A. E. Critical Stability Constants (Plenum,
        1974-1989) and NIST SRD 46 (chelants; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

from ..errors import InputError

__all__ = ["AcidSystem", "SYSTEMS", "SYSTEM_IDS", "get_system", "MOLAR_MASS", "CHELANTS"]

# Standard atomic weights, IUPAC 2021 abridged values [g/mol].
_AW = {"H": 1.008, "C": 12.011, "N": 14.007, "O": 15.999, "F": 18.998,
       "Na": 22.990, "Si": 28.085, "P": 30.974, "S": 32.06, "Cl": 35.45,
       "Ca": 40.078, "B": 10.81, "K": 39.098, "Mg": 24.305}


def _mm(**atoms: int) -> float:
    return sum(_AW[el] * n for el, n in atoms.items())


#: Molar masses [g/mol] of compounds used across the planner, from IUPAC
#: standard atomic weights.
MOLAR_MASS = {
    "NaOH": _mm(Na=1, O=1, H=1),
    "KOH": _mm(K=1, O=1, H=1),
    "Ca(OH)2": _mm(Ca=1, O=2, H=2),
    "Na2CO3": _mm(Na=2, C=1, O=3),
    "NaHCO3": _mm(Na=1, H=1, C=1, O=3),
    "H2SO4": _mm(H=2, S=1, O=4),
    "HCl": _mm(H=1, Cl=1),
    "HNO3": _mm(H=1, N=1, O=3),
    "CO2": _mm(C=1, O=2),
    "CaCO3": _mm(Ca=1, C=1, O=3),
    "Na": _AW["Na"], "Ca": _AW["Ca"], "Cl": _AW["Cl"], "K": _AW["K"], "Mg": _AW["Mg"],
    "SO4": _mm(S=1, O=4), "NO3": _mm(N=1, O=3),
    "H2O": _mm(H=2, O=1),
    "H2S": _mm(H=2, S=1), "NH3": _mm(N=1, H=3), "HCN": _mm(H=1, C=1, N=1),
    "Mg(OH)2": _mm(Mg=1, O=2, H=2), "CaO": _mm(Ca=1, O=1),
    "CaSO4·2H2O": _mm(Ca=1, S=1, O=6, H=4),
    "NaHS": _mm(Na=1, H=1, S=1), "Na2S": _mm(Na=2, S=1), "H2O2": _mm(H=2, O=2),
}


@dataclass(frozen=True)
class AcidSystem:
    """One weak-acid system, from its most protonated form down.

    Attributes
    ----------
    id : str
        Catalogue id used in scenario files (``phosphate``).
    name : str
        Plain name for the sheet.
    top_form : str
        Formula of the most protonated form (``H3PO4``).
    pka25 : tuple of float
        pKa of each step at 25 °C, I = 0 [-].
    enthalpy_kj_mol : tuple of float
        Standard enthalpy of each step, HA -> H+ + A- [kJ/mol].
    top_charge : int
        Charge of the most protonated form [-].
    basis : str
        What the laboratory reports the total as (``P``, ``N``, ``SO4``).
    basis_molar_mass_g_mol : float
        Molar mass of that basis [g/mol].
    source : str
        Where the numbers come from.
    """

    id: str
    name: str
    top_form: str
    pka25: tuple[float, ...]
    enthalpy_kj_mol: tuple[float, ...]
    top_charge: int
    basis: str
    basis_molar_mass_g_mol: float
    source: str

    @property
    def steps(self) -> int:
        """Number of dissociation steps modelled [-]."""
        return len(self.pka25)

    def charges(self) -> tuple[int, ...]:
        """Charge of each form, most protonated first [-]."""
        return tuple(self.top_charge - k for k in range(self.steps + 1))


SYSTEMS: tuple[AcidSystem, ...] = (
    AcidSystem("carbonate", "carbonate (CO2/HCO3-/CO3 2-)", "H2CO3*",
               (6.352, 10.329), (9.15, 14.85), 0, "C", _AW["C"],
               "pKa 6.352 and 10.329 at 25 °C from [PB82]; the temperature "
               "dependence uses the full [PB82] fits in dosing.chem.water, the "
               "enthalpies here are only for reference (NBS, from memory)."),
    AcidSystem("phosphate", "phosphate", "H3PO4",
               (2.148, 7.198, 12.35), (-8.0, 3.6, 16.0), 0, "P", _AW["P"],
               "pKa and enthalpies [G2002] (from memory); CRC gives 2.16, "
               "7.21, 12.32."),
    AcidSystem("sulfate", "sulfate (HSO4-/SO4 2-)", "HSO4-",
               (1.99,), (-21.9,), -1, "SO4", MOLAR_MASS["SO4"],
               "pKa 1.99 [CRC]; enthalpy -21.9 kJ/mol from [NBS] formation "
               "enthalpies (from memory). The first step of H2SO4 is taken "
               "as complete."),
    AcidSystem("acetate", "acetate", "CH3COOH",
               (4.756,), (-0.41,), 0, "CH3COO", _mm(C=2, H=3, O=2),
               "pKa 4.756 and enthalpy -0.41 kJ/mol [G2002] (from memory; "
               "the ionisation is very slightly exothermic at 25 °C, which is "
               "why Ka peaks near room temperature); CRC 4.76."),
    AcidSystem("formate", "formate", "HCOOH",
               (3.75,), (-0.1,), 0, "HCOO", _mm(C=1, H=1, O=2),
               "pKa 3.75 [CRC]; enthalpy -0.1 kJ/mol from [NBS] (from "
               "memory)."),
    AcidSystem("citrate", "citrate", "H3Cit",
               (3.128, 4.761, 6.396), (4.07, 2.23, -3.38), 0, "C6H5O7",
               _mm(C=6, H=5, O=7),
               "pKa and enthalpies [G2002] (from memory); CRC 3.13, 4.76, "
               "6.40."),
    AcidSystem("ammonia", "ammonia/ammonium", "NH4+",
               (9.245,), (51.95,), 1, "N", _AW["N"],
               "pKa 9.245 and enthalpy +51.95 kJ/mol [G2002] (from memory); "
               "CRC 9.25."),
    AcidSystem("sulfide", "sulfide (H2S/HS-)", "H2S",
               (6.99,), (22.1,), 0, "S", _AW["S"],
               "pKa 6.99 (a tabulation of thermodynamic pKa values, read; "
               "recent high-temperature studies give about 6.98 at 25 °C, from "
               "memory). Sources disagree: CRC gives 7.05, an older value; "
               "the choice moves sulfide doses near pH 7 by a few per cent. "
               "Enthalpy +22.1 kJ/mol from [NBS] (from memory). The second "
               "step (pKa above 17) is ignored."),
    AcidSystem("borate", "borate", "B(OH)3",
               (9.237,), (13.8,), 0, "B", _AW["B"],
               "pKa 9.237 and enthalpy +13.8 kJ/mol [G2002] (from memory)."),
    AcidSystem("fluoride", "fluoride", "HF",
               (3.20,), (-12.6,), 0, "F", _AW["F"],
               "pKa 3.20 [CRC]; enthalpy -12.6 kJ/mol from [NBS] (from "
               "memory)."),
    AcidSystem("silicate", "silicate (first step)", "H4SiO4",
               (9.84,), (25.6,), 0, "SiO2", _mm(Si=1, O=2),
               "pKa 9.84 [S83]; enthalpy about +25.6 kJ/mol, low confidence "
               "(from memory)."),
    AcidSystem("oxalate", "oxalate", "H2C2O4",
               (1.277, 4.275), (-4.1, -6.8), 0, "C2O4", _mm(C=2, O=4),
               "pKa 1.277 and 4.275, enthalpies -4.1 and -6.8 kJ/mol [K91]; "
               "CRC gives 1.25 for the first step."),
    AcidSystem("cyanide", "cyanide (HCN/CN-)", "HCN",
               (9.21,), (43.6,), 0, "CN", _mm(C=1, N=1),
               "pKa 9.21 [CRC]; enthalpy +43.6 kJ/mol [NBS] (both from "
               "memory)."),
    AcidSystem("edta", "EDTA (chelant)", "H4Y",
               (2.00, 2.69, 6.13, 10.37), (0.0, 0.0, 0.0, 0.0), 0, "EDTA",
               _mm(C=10, H=16, N=2, O=8),
               "pKa 2.00, 2.69, 6.13, 10.37 at I = 0.1 [SM] (from memory), used as the "
               "I = 0 values (the fourth step is about 0.6 higher at I = 0); enthalpies "
               "not at hand, so not moved with temperature. Reported as the acid H4Y "
               "(292.24 g/mol)."),
    AcidSystem("tartrate", "tartrate (chelant)", "H2Tart",
               (3.04, 4.37), (3.2, 0.9), 0, "C4H6O6", _mm(C=4, H=6, O=6),
               "pKa 3.04 and 4.37 [CRC]; enthalpies 3.2 and 0.9 kJ/mol (from memory). "
               "Reported as tartaric acid."),
    AcidSystem("gluconate", "gluconate (chelant)", "HGlu",
               (3.86,), (4.0,), 0, "C6H12O7", _mm(C=6, H=12, O=7),
               "pKa 3.86 [SM] (from memory); enthalpy about 4 kJ/mol (from memory, low "
               "confidence). Reported as gluconic acid."),
    AcidSystem("unknown", "unidentified weak acid (fitted)", "HX",
               (7.0,), (0.0,), 0, "mmol", 1000.0,
               "Not a published constant: a monoprotic acid whose total and pKa "
               "are fitted to a bench titration; the pKa of each water is set on "
               "its Mixture (7.0 is only a placeholder) and not moved with "
               "temperature."),
) + tuple(
    AcidSystem(f"site_{k}", f"fitted buffer site {k}", "HX",
               (7.0,), (0.0,), 0, "mmol", 1000.0,
               "Not a published constant: one monoprotic site of a buffer spectrum "
               "fitted to a bench titration; its pKa is set on each Mixture and not "
               "moved with temperature. Internal: not accepted in a scenario.")
    for k in range(1, 9))

#: Solutes that are chelants: added to hold metals in solution (a scenario that
#: gives one gives the metals it holds, see dosing.planning.measurements).
CHELANTS: tuple[str, ...] = ("edta", "tartrate", "gluconate")
#: Ids of the fitted buffer sites (internal columns, never named in a scenario).
SITE_IDS: tuple[str, ...] = tuple(f"site_{k}" for k in range(1, 9))

#: Catalogue ids in the fixed order used by the vectorised engine.
SYSTEM_IDS: tuple[str, ...] = tuple(s.id for s in SYSTEMS)
#: The solutes a scenario may name (the fitted sites are internal).
SOLUTE_IDS: tuple[str, ...] = tuple(i for i in SYSTEM_IDS if i not in SITE_IDS)
_BY_ID = {s.id: s for s in SYSTEMS}


def get_system(system_id: str) -> AcidSystem:
    """Return the catalogue entry for ``system_id``.

    Raises
    ------
    InputError
        If the id is not in the catalogue; the message lists those that are.
    """
    try:
        return _BY_ID[system_id]
    except KeyError:
        raise InputError(
            system_id, "unknown solute; known solutes are "
            + ", ".join(SYSTEM_IDS)) from None
