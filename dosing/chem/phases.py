"""Solid phases: what precipitates, as data for the speciation core.

A :class:`Phase` dissolves into reference forms of components (the free
metal ion, the fully deprotonated ligand; see :mod:`.complexes`) and
protons; its saturation index is

    SI = sum_j n_j log a_j + h log a_H - log K

so Fe(OH)2 is Fe2+ with h = -2 and log K = log *Ks0 (Fe(OH)2 + 2 H+ = Fe2+ +
2 H2O), siderite FeCO3 is Fe2+ + CO3 2- with h = 0 and log K = log Ksp, and
ZnS is Zn2+ + HS- with h = -1 (ZnS + H+ = Zn2+ + HS-). A phase precipitates
where the water is supersaturated with it and dissolves where it is
undersaturated and present (the speciation core keeps the phase rule).

The hydroxides are those of :data:`dosing.chem.metals.METALS` (fresh,
amorphous solids: what a tank precipitates); calcite keeps the temperature
function of Plummer & Busenberg (1982) and only forms where the plan lets it
(see :class:`dosing.chem.mixture.Mixture`). A neutralisation tank makes
fresh solids; where compilations give a fresh precipitate and an aged
mineral, the fresh one is taken and the spread covers the other.

Sources
-------
[N90]   Nordstrom, D. K. et al. (1990), ACS Symposium Series 416 (from memory).
[B92]   Bruno, J.; Wersin, P.; Stumm, W. (1992). Geochim. Cosmochim. Acta 56,
        1149-1155 (siderite; from memory).
[L97]   Langmuir, D. (1997). Aqueous Environmental Geochemistry (gypsum; from
        memory).
[SM96]  Stumm, W.; Morgan, J. J. (1996). Aquatic Chemistry, 3rd ed. (malachite,
        sulfides; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

from .metals import METALS
from .species import MOLAR_MASS

__all__ = ["Phase", "PHASES", "PHASE_IDS", "HYDROXIDES", "CALCITE"]

_AW_OH = 15.999 + 1.008


@dataclass(frozen=True)
class Phase:
    """One solid the water may precipitate.

    Attributes
    ----------
    id : str
        ``iron_iii_hydroxide``, ``gypsum``, ``siderite`` ...
    name : str
        Plain name for the sheet.
    formula : str
        Formula its mass is reported as.
    parts : tuple of (str, int)
        Components and how many of each reference form [-].
    h : int
        Exponent of a_H in the ion activity product [-].
    log_k25 : float
        log10 K at 25 °C [-] (calcite: see :data:`CALCITE`, temperature function).
    enthalpy_kj_mol : float or None
        Enthalpy of the dissolution [kJ/mol]; None: not moved with temperature.
    molar_mass_g_mol : float
        [g/mol] of ``formula``.
    spread : float
        How far compilations differ (fresh against aged solid) [log units].
    source : str
        Where the numbers come from.
    """

    id: str
    name: str
    formula: str
    parts: tuple[tuple[str, int], ...]
    h: int
    log_k25: float
    enthalpy_kj_mol: float | None
    molar_mass_g_mol: float
    spread: float
    source: str


def _hydroxide(m) -> Phase:
    name = (f"{m.solid} (undissolved lime)" if m.id == "calcium"
            else f"{m.name} hydroxide")
    return Phase(f"{m.id}_hydroxide", name, m.solid, ((m.id, 1),), -m.charge, m.log_ks0,
                 m.enthalpy_ks0_kj_mol, m.solid_molar_mass_g_mol, 0.5 if m.id != "calcium"
                 else 0.1, m.source)


#: The hydroxide of each metal, from the metal catalogue.
HYDROXIDES: tuple[Phase, ...] = tuple(_hydroxide(m) for m in METALS)

_MM = {"Fe": 55.845, "Mn": 54.938, "Zn": 65.38, "Pb": 207.2, "Cu": 63.546, "Cd": 112.41,
       "Ni": 58.693, "C": 12.011, "O": 15.999, "S": 32.06, "H": 1.008}

#: Calcite: its log K comes from dosing.chem.water.calcite_pksp (0-90 °C).
CALCITE = Phase("calcite", "calcite", "CaCO3", (("calcium", 1), ("carbonate", 1)), 0,
                -8.48, None, MOLAR_MASS["CaCO3"], 0.1,
                "Plummer & Busenberg (1982) temperature function")

_COUPLED = (
    Phase("gypsum", "gypsum", "CaSO4·2H2O", (("calcium", 1), ("sulfate", 1)), 0, -4.58, -0.46,
          MOLAR_MASS["CaSO4·2H2O"], 0.05, "[L97] log Ksp -4.58, enthalpy -0.46 kJ/mol "
          "(from memory)"),
    Phase("siderite", "siderite", "FeCO3", (("iron_ii", 1), ("carbonate", 1)), 0, -10.45,
          -10.4, _MM["Fe"] + _MM["C"] + 3 * _MM["O"], 0.45,
          "[B92] -10.45 for a fresh precipitate; -10.89 [N90] crystalline (from memory)"),
    Phase("rhodochrosite", "rhodochrosite", "MnCO3", (("manganese", 1), ("carbonate", 1)),
          0, -10.39, -6.0, _MM["Mn"] + _MM["C"] + 3 * _MM["O"], 0.74,
          "-10.39 synthetic (fresh); -11.13 [N90] crystalline (from memory)"),
    Phase("smithsonite", "smithsonite", "ZnCO3", (("zinc", 1), ("carbonate", 1)), 0, -10.0,
          None, _MM["Zn"] + _MM["C"] + 3 * _MM["O"], 0.3, "[N90] (from memory); "
          "hydrozincite, the slower stable phase, is not modelled"),
    Phase("cerussite", "cerussite", "PbCO3", (("lead", 1), ("carbonate", 1)), 0, -13.13,
          None, _MM["Pb"] + _MM["C"] + 3 * _MM["O"], 0.3, "[N90] (from memory)"),
    Phase("malachite", "malachite", "Cu2(OH)2CO3", (("copper", 2), ("carbonate", 1)), -2,
          -5.79, None, 2 * _MM["Cu"] + 2 * _AW_OH + _MM["C"] + 3 * _MM["O"], 0.5,
          "[SM96] Ksp 10^-33.8 with OH-, so log K -5.79 with H+ (from memory)"),
    Phase("copper_sulfide", "copper sulfide", "CuS", (("copper", 1), ("sulfide", 1)), -1,
          -22.2, None, _MM["Cu"] + _MM["S"], 1.0, "[SM96] CuS + H+ = Cu2+ + HS- (from memory)"),
    Phase("zinc_sulfide", "zinc sulfide", "ZnS", (("zinc", 1), ("sulfide", 1)), -1, -9.05,
          None, _MM["Zn"] + _MM["S"], 1.0, "amorphous ZnS [N90] (from memory)"),
    Phase("cadmium_sulfide", "cadmium sulfide", "CdS", (("cadmium", 1), ("sulfide", 1)), -1,
          -14.4, None, _MM["Cd"] + _MM["S"], 1.0, "[SM96] (from memory)"),
    Phase("lead_sulfide", "lead sulfide", "PbS", (("lead", 1), ("sulfide", 1)), -1, -12.8,
          None, _MM["Pb"] + _MM["S"], 1.0, "galena [N90] (from memory)"),
    Phase("nickel_sulfide", "nickel sulfide", "NiS", (("nickel", 1), ("sulfide", 1)), -1,
          -5.6, None, _MM["Ni"] + _MM["S"], 1.0, "fresh NiS [SM96] (from memory)"),
    Phase("iron_sulfide", "iron(II) sulfide", "FeS", (("iron_ii", 1), ("sulfide", 1)), -1,
          -3.9, None, _MM["Fe"] + _MM["S"], 0.7, "precipitated FeS [N90] (from memory)"),
)

#: Every solid phase; hydroxides first, in metal order.
PHASES: tuple[Phase, ...] = HYDROXIDES + (CALCITE,) + _COUPLED
PHASE_IDS: tuple[str, ...] = tuple(p.id for p in PHASES)
