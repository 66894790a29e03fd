"""Products at other strengths and purities, and custom products.

The sizes-against-strengths grid compares a product at each strength it is
sold or made up at (:data:`STRENGTHS`, read from the one density table
:data:`dosing.planning.reagents.SOLUTION_DENSITIES`) and a solid at its usual
purities; :func:`custom_reagent` builds a product the catalogue does not
hold from its compound and strength, refusing a strength with no density.
"""

from __future__ import annotations

import math
from dataclasses import replace

from ..errors import InputError
from .reagents import CATALOGUE, COMPOUNDS, SOLUTION_DENSITIES, Compound, Reagent, _rho

__all__ = ["as_slurry", "SOLID_DENSITY_KG_L", "USUAL_SLURRY",
           "STRENGTHS", "SOLID_PURITIES", "ALTERNATIVE", "strengths_of", "at_strength",
           "with_purity", "custom_reagent"]


#: Strengths a solution is sold or made up at, for the sizes-against-strengths
#: grid: compound -> (mass fraction, density at 20 °C [kg/L]) rows, read from
#: :data:`SOLUTION_DENSITIES`.
STRENGTHS: dict[str, tuple[tuple[float, float], ...]] = {
    formula: tuple((w, rho) for w, (rho, _) in rows.items())
    for formula, rows in SOLUTION_DENSITIES.items()}


#: The catalogue product most worth comparing with each (the sweep's default
#: second column): the same product at its other strength, or the usual
#: alternative.
ALTERNATIVE: dict[str, str] = {
    "caustic-50": "caustic-25", "caustic-25": "caustic-50", "sulfuric-98": "sulfuric-93",
    "sulfuric-93": "sulfuric-98", "hydrochloric-32": "sulfuric-93", "co2": "sulfuric-98",
    "lime": "caustic-50", "soda-ash": "caustic-50", "bicarbonate": "soda-ash"}


assert set(ALTERNATIVE) | set(ALTERNATIVE.values()) <= set(CATALOGUE), "unknown id"


#: Purities a solid product is compared at (common practice: commercial grades).
SOLID_PURITIES = (0.85, 0.90, 0.95)


_FAMILY = {"NaOH": ("caustic", "caustic soda"), "H2SO4": ("sulfuric", "sulfuric acid"),
           "HCl": ("hydrochloric", "hydrochloric acid")}


def strengths_of(reagent: Reagent) -> tuple[float, ...]:
    """The strengths (mass fractions) ``reagent`` is compared at: a listed
    solution's table, a solid's usual purities, else only its own."""
    table = STRENGTHS.get(reagent.compound.formula)
    if reagent.form == "liquid" and table and reagent.molarity_mol_l is None:
        return tuple(w for w, _ in table)
    if reagent.form == "solid" and reagent.id != "custom":
        return tuple(sorted({*SOLID_PURITIES, reagent.mass_fraction}))
    return (reagent.mass_fraction,)


def at_strength(reagent: Reagent, fraction: float) -> Reagent:
    """The same product at another strength: a solution at a row of
    :data:`STRENGTHS` (the catalogue entry where there is one), a solid at
    any purity.

    Raises
    ------
    InputError
        A strength with no density at hand, or a product that has no
        strengths to choose from (a gas, a solution given by molarity).
    """
    if abs(fraction - reagent.mass_fraction) < 1e-9:
        return reagent
    if reagent.form == "solid":
        return replace(with_purity(reagent, fraction), id=f"{reagent.id}-{fraction * 100:g}")
    formula = reagent.compound.formula
    table = dict(STRENGTHS.get(formula, ()))
    if reagent.form != "liquid" or reagent.molarity_mol_l is not None or not table:
        raise InputError("strengths", f"{reagent.name} has no other strengths here; "
                         "compare it with other products instead")
    rho = next((d for w, d in table.items() if abs(w - fraction) < 1e-9), None)
    if rho is None:
        listed = ", ".join(f"{w * 100:g}" for w in table)
        raise InputError("strengths", f"{formula} at {fraction * 100:g} %: no density at "
                         f"hand; allowed: {listed} % (or a custom reagent with its "
                         "density)")
    family, name = _FAMILY[formula]
    rid = f"{family}-{fraction * 100:g}"
    if rid in CATALOGUE:
        return CATALOGUE[rid]
    model = CATALOGUE[{"NaOH": "caustic-25", "H2SO4": "sulfuric-93",
                       "HCl": "hydrochloric-32"}[formula]]
    return replace(model, id=rid, name=f"{name} {fraction * 100:g} %", mass_fraction=fraction,
                   density_kg_l=rho, density_source=_rho(formula, fraction)[1],
                   dilution_heat_kj_mol=None, dilution_heat_source="")


def with_purity(reagent: Reagent, purity: float) -> Reagent:
    """The same solid product at another purity (mass fraction) [-]."""
    if reagent.form == "liquid":
        raise InputError("reagent.purity", f"{reagent.id} is a solution; give a "
                         "custom reagent with its own strength and density instead")
    if not (0.0 < purity <= 1.0):
        raise InputError("reagent.purity", f"{purity:g} is not a mass fraction; "
                         "allowed: above 0 and up to 1")
    name = reagent.name.split(",")[0] + f", {purity * 100:g} % {reagent.compound.formula}"
    return replace(reagent, mass_fraction=purity, name=name)


#: Densities of the solids a plant feeds as slurry [kg/L] (CRC Handbook,
#: physical constants of inorganic compounds; from memory). Quicklime is
#: slaked to Ca(OH)2 before it is a slurry.
SOLID_DENSITY_KG_L = {"Ca(OH)2": 2.24, "CaO": 2.24, "Mg(OH)2": 2.34, "CaCO3": 2.71}
#: A lime slurry's usual solids, for the sheet's words (common practice: 10-20 %).
USUAL_SLURRY = (0.10, 0.20)


def as_slurry(reagent: Reagent, fraction: float, where: str = "reagent") -> Reagent:
    """A solid product fed as a slurry of ``fraction`` of it by mass [-]: a
    liquid whose density is that of the solid and water mixed,
    1 / (w / rho_solid + (1 - w) / rho_water), so doses and pump rates come
    out in litres of slurry."""
    formula = reagent.compound.formula
    if reagent.form != "solid" or formula not in SOLID_DENSITY_KG_L:
        raise InputError(f"{where}.slurry_fraction", f"{reagent.id} is not fed as a slurry; "
                         "allowed with lime, quicklime, magnesia or limestone")
    if not 0.02 <= fraction <= 0.5:
        raise InputError(f"{where}.slurry_fraction", f"{fraction:g}; allowed: 0.02 to 0.5 "
                         "(common practice: lime slurries of 0.10 to 0.20)")
    # Quicklime slakes: the slurry carries Ca(OH)2, 74.09 g per 56.08 g of CaO.
    gain = COMPOUNDS["Ca(OH)2"].molar_mass_g_mol / COMPOUNDS["CaO"].molar_mass_g_mol \
        if formula == "CaO" else 1.0
    solids = min(fraction * gain, 0.9)
    rho = 1.0 / (solids / SOLID_DENSITY_KG_L[formula] + (1.0 - solids) / 1.0)
    return replace(reagent, id=f"{reagent.id}-as-slurry-{fraction * 100:g}",
                   name=f"{reagent.name.split(',')[0]} as {fraction * 100:g} % slurry",
                   mass_fraction=reagent.mass_fraction * fraction, density_kg_l=round(rho, 3),
                   form="liquid",
                   density_source=f"computed for {solids * 100:.3g} % solids of "
                   f"{SOLID_DENSITY_KG_L[formula]} kg/L and water",
                   cautions=("Slurry settles and scales: keep it stirred, the lines short "
                             "and flushed, the pump rated for slurry.",) + reagent.cautions)


def custom_reagent(compound: str, *, mass_fraction: float | None = None,
                   density_kg_l: float | None = None,
                   molarity_mol_l: float | None = None,
                   form: str | None = None, name: str | None = None) -> Reagent:
    """A product made up by the user.

    Give either a ``mass_fraction`` (with ``density_kg_l`` for a solution,
    without for a solid) or a ``molarity_mol_l`` (a solution; density
    optional, needed to report kilograms).

    Parameters
    ----------
    compound : str
        Key of :data:`COMPOUNDS` (``NaOH``, ``KOH``, ``Ca(OH)2``, ``CaO``,
        ``Mg(OH)2``, ``CaCO3``, ``Na2CO3``, ``NaHCO3``, ``H2SO4``, ``HCl``,
        ``HNO3``, ``CO2``); a slurry is a mass fraction with its density.
    mass_fraction : float, optional
        [-], 0 < w <= 1.
    density_kg_l : float, optional
        Density of the product [kg/L], 0.5-2.5.
    molarity_mol_l : float, optional
        [mol/L], above 0 and up to 30.
    """
    if compound not in COMPOUNDS:
        raise InputError("reagent.compound", f"unknown compound {compound!r}; "
                         "allowed: " + ", ".join(COMPOUNDS))
    comp = COMPOUNDS[compound]
    if (mass_fraction is None) == (molarity_mol_l is None):
        raise InputError("reagent.mass_fraction", "give exactly one of "
                         "mass_fraction or molarity_mol_l")
    if density_kg_l is not None and not (0.5 <= density_kg_l <= 2.5):
        raise InputError("reagent.density_kg_l", f"{density_kg_l:g} kg/L is not "
                         "a plausible product density; allowed: 0.5 to 2.5")
    frac, form, label = _custom_strength(compound, comp, mass_fraction, density_kg_l,
                                         molarity_mol_l, form)
    if form not in ("liquid", "solid", "gas"):
        raise InputError("reagent.form", f"{form!r}; allowed: liquid, solid, gas")
    like = {"NaOH": "caustic-25", "KOH": "caustic-25", "Ca(OH)2": "lime",
            "Na2CO3": "soda-ash", "NaHCO3": "bicarbonate", "H2SO4": "sulfuric-93",
            "HCl": "hydrochloric-32", "HNO3": "hydrochloric-32", "CO2": "co2",
            "CaO": "quicklime", "Mg(OH)2": "magnesia", "CaCO3": "limestone"}[compound]
    model = CATALOGUE[like]
    return Reagent("custom", name or f"custom {label}", comp, frac,
                   density_kg_l if form == "liquid" else None, form,
                   "given by the user" if density_kg_l else "",
                   model.cautions, model.min_practical_ph, model.max_practical_ph,
                   model.solubility_g_l, molarity_mol_l)


def _custom_strength(compound: str, comp: Compound, mass_fraction, density_kg_l,
                     molarity_mol_l, form):
    """A custom product's mass fraction, form and label, from its molarity
    or its mass fraction; raises InputError naming the field."""
    if molarity_mol_l is not None:
        if not (0.0 < molarity_mol_l <= 30.0) or not math.isfinite(molarity_mol_l):
            raise InputError("reagent.molarity_mol_l", f"{molarity_mol_l:g} is out "
                             "of range; allowed: above 0 and up to 30 mol/L")
        frac = (molarity_mol_l * comp.molar_mass_g_mol / 1000.0 / density_kg_l
                if density_kg_l else float("nan"))
        if density_kg_l and frac > 1.0:
            raise InputError("reagent.molarity_mol_l", "this molarity and density "
                             "give more active compound than product mass")
        form = "liquid"
        label = f"{compound} {molarity_mol_l:g} mol/L"
    else:
        if not (0.0 < mass_fraction <= 1.0) or not math.isfinite(mass_fraction):
            raise InputError("reagent.mass_fraction", f"{mass_fraction:g} is not a "
                             "mass fraction; allowed: above 0 and up to 1")
        frac = mass_fraction
        if form is None:
            form = "gas" if compound == "CO2" else ("liquid" if density_kg_l else "solid")
        if form == "liquid" and density_kg_l is None:
            raise InputError("reagent.density_kg_l", "a solution needs its density "
                             "to turn kilograms into litres")
        label = f"{compound} {mass_fraction * 100:g} %"
    return frac, form, label
