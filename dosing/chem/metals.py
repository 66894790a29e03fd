"""Catalogue of the dissolved metals the planner knows, with their hydroxides.

A metal Me of charge z hydrolyses in steps,

    Me(z+) + j H2O = Me(OH)j(z-j) + j H+        log *beta_j

and its hydroxide dissolves as

    Me(OH)z(s) + z H+ = Me(z+) + z H2O          log *Ks0

Mathematically the hydrolysis series is a polyprotic acid whose most
protonated form is the free ion (charge +z) and whose stepwise constants are
*beta_j / *beta_(j-1); the engine carries each metal as one more column of
the totals array. At a given pH the dissolved total a hydroxide allows is
[Me(z+)] / alpha_0 with [Me(z+)] = *Ks0 {H+}^z / gamma_z, so the dissolved
part of a metal is the lesser of its total and that solubility, which
depends on the pH alone (see :mod:`dosing.chem.speciation`).

Choice of solid
---------------
A neutralisation tank precipitates fresh, amorphous hydroxides within
minutes; they are far more soluble (log *Ks0 1-3 units higher) than the
aged or crystalline minerals of geochemical tables. Where compilations offer
both, the fresh/amorphous solid is used, because it is what the tank holds
when the operator reads the pH. Residual metals are estimates: complexation
with sulfate, carbonate, ammonia or organics, co-precipitation and
adsorption are not modelled, and the neutral complexes Me(OH)z° are poorly
known. A bench jar test is the check.

Temperature
-----------
Constants are at 25 °C and I = 0. Where an enthalpy is given the constant is
moved by van 't Hoff like the weak acids; where none is given (``None``) the
25 °C value is used at every temperature and the catalogue says so.

Sources
-------
[BM76]  Baes, C. F.; Mesmer, R. E. (1976). The Hydrolysis of Cations. Wiley,
        New York. (Hydrolysis constants; from memory.)
[N90]   Nordstrom, D. K.; Plummer, L. N.; Langmuir, D.; Busenberg, E.; May,
        H. M.; Jones, B. F.; Parkhurst, D. L. (1990). Revised chemical
        equilibrium data for major water-mineral reactions and their
        limitations. In: Chemical Modeling of Aqueous Systems II, ACS
        Symposium Series 416, 398-413. (Al, Fe, Mg, Ca, Mn constants and
        enthalpies; from memory.)
[SM96]  Stumm, W.; Morgan, J. J. (1996). Aquatic Chemistry, 3rd ed., Wiley,
        chapter 6 tables. (From memory.)
[P07]   Powell, K. J. et al. (2007). Chemical speciation of environmentally
        significant metals with inorganic ligands. Part 2: The Cu2+-OH-,
        Cl-, CO3 2-, SO4 2- and PO4 3- systems (IUPAC Technical Report).
        Pure Appl. Chem. 79, 895-950. (From memory.)
[P13]   Powell, K. J. et al. (2013). Part 5: The Zn2+ + OH-, Cl-, CO3 2-,
        SO4 2- and PO4 3- systems (IUPAC Technical Report). Pure Appl. Chem.
        85, 2249-2311. (From memory.)
[R87]   Rai, D.; Sass, B. M.; Moore, D. A. (1987). Chromium(III) hydrolysis
        constants and solubility of chromium(III) hydroxide. Inorg. Chem. 26,
        345-349. (From memory.)
"""

from __future__ import annotations

from dataclasses import dataclass

from ..errors import InputError

__all__ = ["Metal", "METALS", "METAL_IDS", "HARDNESS", "get_metal", "KCAL", "label"]

#: kJ per kcal (thermochemical calorie, exact).
KCAL = 4.184

# IUPAC 2021 standard atomic weights [g/mol].
_AW = {"Fe": 55.845, "Al": 26.982, "Zn": 65.38, "Cu": 63.546, "Ni": 58.693,
       "Cd": 112.41, "Pb": 207.2, "Cr": 51.996, "Mn": 54.938, "Mg": 24.305,
       "Ca": 40.078}
_OH = 15.999 + 1.008


@dataclass(frozen=True)
class Metal:
    """One hydrolysing metal and its hydroxide.

    Attributes
    ----------
    id : str
        Id used in scenario files (``iron_iii``).
    name : str
        Plain name for the sheet.
    element : str
        Element symbol; lab results are mg/L as the element.
    charge : int
        Charge of the free ion z [-].
    molar_mass_g_mol : float
        Atomic weight of the element [g/mol].
    log_beta : tuple of float
        Cumulative hydrolysis constants log *beta_1 ... log *beta_n at 25 °C,
        I = 0 [-].
    enthalpy_beta_kj_mol : tuple of float or None
        Enthalpy of each cumulative hydrolysis reaction [kJ/mol]; None where
        not at hand (then not moved with temperature).
    solid : str
        Formula of the hydroxide solid reported in the sludge.
    solid_phase : str
        Which solid the constant describes, and why that one.
    log_ks0 : float
        log *Ks0 of the solid at 25 °C, I = 0 [-].
    enthalpy_ks0_kj_mol : float or None
        Enthalpy of the *Ks0 reaction [kJ/mol]; None where not at hand.
    source : str
        Where the numbers come from.
    species : tuple of str
        The hydroxo complex each ``log_beta`` entry describes, in order
        (``"MnOH+", "Mn(OH)2", "Mn(OH)3-"``): the j-th holds j OH and charge
        z - j, which the tests check, so a constant cannot sit in the wrong row.
    """

    id: str
    name: str
    element: str
    charge: int
    log_beta: tuple[float, ...]
    enthalpy_beta_kj_mol: tuple[float, ...] | None
    solid: str
    solid_phase: str
    log_ks0: float
    enthalpy_ks0_kj_mol: float | None
    source: str
    species: tuple[str, ...] = ()

    @property
    def molar_mass_g_mol(self) -> float:
        """Atomic weight of the element [g/mol]."""
        return _AW[self.element]

    @property
    def solid_molar_mass_g_mol(self) -> float:
        """Molar mass of the hydroxide Me(OH)z [g/mol]."""
        return _AW[self.element] + self.charge * _OH

    @property
    def steps(self) -> int:
        """Number of hydroxo complexes modelled [-]."""
        return len(self.log_beta)

    def stepwise_pk(self) -> tuple[float, ...]:
        """Stepwise 'pKa' of the hydrolysis series, -log(*beta_j/*beta_(j-1)) [-]."""
        cum = (0.0,) + self.log_beta
        return tuple(-(cum[j + 1] - cum[j]) for j in range(self.steps))

    def stepwise_enthalpy(self) -> tuple[float, ...]:
        """Enthalpy of each stepwise hydrolysis reaction [kJ/mol] (0 if unknown)."""
        if self.enthalpy_beta_kj_mol is None:
            return (0.0,) * self.steps
        cum = (0.0,) + self.enthalpy_beta_kj_mol
        return tuple(cum[j + 1] - cum[j] for j in range(self.steps))


def _k(*kcal: float) -> tuple[float, ...]:
    return tuple(round(v * KCAL, 2) for v in kcal)


METALS: tuple[Metal, ...] = (
    Metal("iron_iii", "iron(III), ferric", "Fe", 3,
          (-2.19, -5.67, -12.56, -21.6), _k(10.4, 17.1, 24.8, 31.9),
          "Fe(OH)3", "ferrihydrite (fresh amorphous Fe(OH)3): what a tank "
          "precipitates; goethite is orders of magnitude less soluble", 4.891, None,
          "[N90] hydrolysis and ferrihydrite log *Ks0 4.891 (from memory); "
          "[SM96] gives 3.0-4.9 for amorphous Fe(OH)3.",
          species=("FeOH2+", "Fe(OH)2+", "Fe(OH)3", "Fe(OH)4-")),
    Metal("iron_ii", "iron(II), ferrous", "Fe", 2,
          (-9.5, -20.57, -31.0), _k(13.2, 28.57, 30.3),
          "Fe(OH)2", "fresh Fe(OH)2 (white rust), log *Ks0 12.85; published "
          "range 12.85-13.5", 12.85, None,
          "[BM76] hydrolysis (from memory); enthalpies [N90] (from memory); "
          "Fe(OH)2 log *Ks0 12.85 [BM76] (from memory).",
          species=("FeOH+", "Fe(OH)2", "Fe(OH)3-")),
    Metal("aluminium", "aluminium", "Al", 3,
          (-5.00, -10.1, -16.9, -22.7), _k(11.49, 26.90, 39.89, 42.30),
          "Al(OH)3", "amorphous Al(OH)3, log *Ks0 10.8 (gibbsite 8.11 forms "
          "only on ageing)", 10.8, -26.5 * KCAL,
          "[N90] hydrolysis, enthalpies and amorphous Al(OH)3 (from memory).",
          species=("AlOH2+", "Al(OH)2+", "Al(OH)3", "Al(OH)4-")),
    Metal("zinc", "zinc", "Zn", 2,
          (-8.96, -17.82, -28.05, -40.41), None,
          "Zn(OH)2", "amorphous Zn(OH)2, log *Ks0 12.45 (epsilon-Zn(OH)2 11.4 "
          "after ageing)", 12.45, None,
          "hydrolysis [P13] (from memory; [BM76] gives -16.9 for Zn(OH)2°, "
          "which would hold about 2 mg/L in solution at the minimum, more than "
          "plants see); amorphous Zn(OH)2 [BM76] (from memory). Amphoteric: "
          "zincate above about pH 10.",
          species=("ZnOH+", "Zn(OH)2", "Zn(OH)3-", "Zn(OH)4 2-")),
    Metal("copper", "copper(II)", "Cu", 2,
          (-7.95, -16.23, -26.60, -39.74), None,
          "Cu(OH)2", "Cu(OH)2, log *Ks0 8.64 (tenorite CuO 7.65 after ageing)",
          8.64, None,
          "hydrolysis [P07] (from memory; [BM76] gives -13.68 for Cu(OH)2°); "
          "Cu(OH)2 [BM76] (from memory). The neutral complex is poorly known "
          "and sets the minimum; polynuclear Cu2(OH)2 2+ is not modelled.",
          species=("CuOH+", "Cu(OH)2", "Cu(OH)3-", "Cu(OH)4 2-")),
    Metal("nickel", "nickel", "Ni", 2,
          (-9.86, -19.0, -30.0), None,
          "Ni(OH)2", "fresh Ni(OH)2, log *Ks0 12.8 (aged 10.8)", 12.8, None,
          "[BM76] hydrolysis and fresh Ni(OH)2 (from memory).",
          species=("NiOH+", "Ni(OH)2", "Ni(OH)3-")),
    Metal("cadmium", "cadmium", "Cd", 2,
          (-10.08, -20.35, -33.3, -47.35), None,
          "Cd(OH)2", "Cd(OH)2, log *Ks0 13.65", 13.65, None,
          "[BM76] hydrolysis and Cd(OH)2 (from memory).",
          species=("CdOH+", "Cd(OH)2", "Cd(OH)3-", "Cd(OH)4 2-")),
    Metal("lead", "lead", "Pb", 2,
          (-7.71, -17.12, -28.06), None,
          "Pb(OH)2", "Pb(OH)2, log *Ks0 8.15", 8.15, None,
          "[BM76] hydrolysis and Pb(OH)2 (from memory); amphoteric.",
          species=("PbOH+", "Pb(OH)2", "Pb(OH)3-")),
    Metal("chromium_iii", "chromium(III)", "Cr", 3,
          (-3.57, -9.84, -16.19, -27.65), None,
          "Cr(OH)3", "amorphous Cr(OH)3, log *Ks0 9.76", 9.76, None,
          "[R87] hydrolysis and amorphous Cr(OH)3 (from memory); amphoteric. "
          "Chromium(VI) is not a metal cation: reduce it to Cr(III) first.",
          species=("CrOH2+", "Cr(OH)2+", "Cr(OH)3", "Cr(OH)4-")),
    Metal("manganese", "manganese(II)", "Mn", 2,
          (-10.59, -22.2, -34.8), None,
          "Mn(OH)2", "pyrochroite Mn(OH)2, log *Ks0 15.2", 15.2, None,
          "[N90] MnOH+ and pyrochroite (from memory); Mn(OH)2° and Mn(OH)3- "
          "[BM76] (from memory); enthalpies not at hand for the series, so not "
          "moved with temperature. Needs pH above 10 or oxidation.",
          species=("MnOH+", "Mn(OH)2", "Mn(OH)3-")),
    Metal("magnesium", "magnesium", "Mg", 2,
          (-11.44,), _k(15.952),
          "Mg(OH)2", "brucite Mg(OH)2, log *Ks0 16.84", 16.84, -25.84 * KCAL,
          "[N90] MgOH+ and brucite with enthalpies (from memory).",
          species=("MgOH+",)),
    Metal("calcium", "calcium", "Ca", 2,
          (-12.78,), _k(14.535),
          "Ca(OH)2", "portlandite Ca(OH)2, log *Ks0 22.8: sets the pH that "
          "saturated lime reaches (about 12.45 at 25 °C, lower when warm)",
          22.8, -30.69 * KCAL,
          "[N90] CaOH+ and portlandite with enthalpies (from memory).",
          species=("CaOH+",)),
)

#: Metal ids in catalogue order (the order of their engine columns).
METAL_IDS: tuple[str, ...] = tuple(m.id for m in METALS)
#: The hardness ions among them: never capped as metals, not listed as
#: metals left (they are reported as ions).
HARDNESS = ("calcium", "magnesium")
_BY_ID = {m.id: m for m in METALS}


def get_metal(metal_id: str) -> Metal:
    """Return the catalogue entry for ``metal_id``.

    Raises
    ------
    InputError
        If the id is not in the catalogue; the message lists those that are.
    """
    try:
        return _BY_ID[metal_id]
    except KeyError:
        raise InputError(metal_id, "unknown metal; known metals are "
                         + ", ".join(METAL_IDS)) from None


def label(key: str) -> str:
    """A metal's (or other solute's) key as people write it: ``iron_iii``
    -> ``iron(III)``, ``chromium_iii`` -> ``chromium(III)``, ``iron_ii`` ->
    ``iron(II)``, other underscores as spaces."""
    for suffix, charge in (("_iii", "(III)"), ("_ii", "(II)")):
        if key.endswith(suffix):
            return key[: -len(suffix)].replace("_", " ") + charge
    return key.replace("_", " ")
