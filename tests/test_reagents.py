"""Reagent catalogue: densities and molar masses against published data."""

import pytest

from dosing.errors import InputError
from dosing.planning.reagents import CATALOGUE, COMPOUNDS, get_reagent
from dosing.planning.strengths import custom_reagent, with_purity

thermo_electrochem = pytest.importorskip("thermo.electrochem")
chemicals_elements = pytest.importorskip("chemicals.elements")

REQUIRED_IDS = ["caustic-50", "caustic-25", "lime", "soda-ash", "bicarbonate",
                "sulfuric-98", "sulfuric-93", "hydrochloric-32", "co2"]


def test_catalogue_has_the_ids_the_project_uses():
    assert set(REQUIRED_IDS) <= set(CATALOGUE)


# CRC Handbook 102nd ed., "Concentrative properties of aqueous solutions"
# (Wolf 1966; Söhnel & Novotný 1985), read; 25 % NaOH and 93 % H2SO4 are
# linear interpolations of the neighbouring CRC rows; 50 % NaOH from a
# Perry's-type table (from memory). Bar: 0.003 g/cm3.
@pytest.mark.parametrize("rid, rho", [("caustic-50", 1.5253), ("caustic-25", 1.2740),
                                      ("sulfuric-98", 1.8361), ("sulfuric-93", 1.8276),
                                      ("hydrochloric-32", 1.1594)])
def test_density_against_handbook(rid, rho):
    assert get_reagent(rid).density_kg_l == pytest.approx(rho, abs=0.003)


# Laliberté 2009, J. Chem. Eng. Data 54, 1725, as coded in ChEDL thermo
# (thermo.electrochem.Laliberte_density), inside its fit ranges (NaOH
# w <= 0.503, HCl w <= 0.376). 50 % NaOH sits at the edge of the fit: 0.010.
@pytest.mark.parametrize("rid, cas, tol", [("caustic-25", "1310-73-2", 0.003),
                                           ("caustic-50", "1310-73-2", 0.010),
                                           ("hydrochloric-32", "7647-01-0", 0.003)])
def test_density_against_laliberte_model(rid, cas, tol):
    r = get_reagent(rid)
    ref = thermo_electrochem.Laliberte_density(293.15, [r.mass_fraction], [cas]) / 1000
    assert r.density_kg_l == pytest.approx(ref, abs=tol)


@pytest.mark.parametrize("formula, chem", [("NaOH", "NaOH"), ("Ca(OH)2", "CaO2H2"),
                                           ("Na2CO3", "Na2CO3"), ("NaHCO3", "NaHCO3"),
                                           ("H2SO4", "H2SO4"), ("HCl", "HCl"),
                                           ("CO2", "CO2")])
def test_molar_masses_against_chemicals(formula, chem):
    # ChEDL chemicals: molecular_weight(simple_formula_parser(...)).
    ref = chemicals_elements.molecular_weight(chemicals_elements.simple_formula_parser(chem))
    assert COMPOUNDS[formula].molar_mass_g_mol == pytest.approx(ref, rel=2e-4)


def test_product_per_mole_for_50_percent_caustic():
    # Stoichiometry: 1 mol NaOH = 39.997 g; in 50 % product 79.99 g, i.e.
    # 79.99 / 1.5253 = 52.44 mL.
    r = get_reagent("caustic-50")
    assert r.kg_product_per_mol == pytest.approx(0.079994, rel=1e-4)
    assert r.litres_product_per_mol == pytest.approx(0.052445, rel=1e-3)


def test_solids_and_gas_have_no_litres():
    for rid in ("lime", "soda-ash", "bicarbonate", "co2"):
        assert get_reagent(rid).litres_product_per_mol is None


def test_custom_reagents():
    r = custom_reagent("NaOH", molarity_mol_l=2.0, density_kg_l=1.08)
    assert r.litres_product_per_mol == pytest.approx(0.5)
    assert r.kg_product_per_mol == pytest.approx(0.54)
    r = custom_reagent("H2SO4", mass_fraction=0.5, density_kg_l=1.3952)
    assert r.litres_product_per_mol == pytest.approx(98.072 / 500 / 1.3952, rel=1e-3)
    r = custom_reagent("NaOH", molarity_mol_l=1.0)
    assert r.kg_product_per_mol is None
    lime90 = with_purity(get_reagent("lime"), 0.90)
    assert lime90.kg_product_per_mol == pytest.approx(0.074093 / 0.90, rel=1e-3)


@pytest.mark.parametrize("call, field", [
    (lambda: get_reagent("caustic-75"), "reagent.id"),
    (lambda: custom_reagent("NaOCl", mass_fraction=0.1), "reagent.compound"),
    (lambda: custom_reagent("NaOH", mass_fraction=1.5, density_kg_l=1.2), "reagent.mass_fraction"),
    (lambda: custom_reagent("NaOH", molarity_mol_l=-1), "reagent.molarity_mol_l"),
    (lambda: custom_reagent("NaOH", mass_fraction=0.3, density_kg_l=9), "reagent.density_kg_l"),
    (lambda: with_purity(get_reagent("caustic-50"), 0.4), "reagent.purity"),
])
def test_bad_reagents_are_clear_errors(call, field):
    with pytest.raises(InputError) as err:
        call()
    assert err.value.field == field
