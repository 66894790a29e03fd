"""Hazard and side-effect checks against worked calculations."""

import math

import pytest
from scipy.optimize import brentq

from dosing.report.words import words
from dosing.planning.measurements import Measurements
from dosing import Batch, Target, get_reagent, infer_water, plan_dose
from dosing.chem import speciate
from dosing.planning.hazards import DH_WATER_KJ_MOL
from dosing.chem.water import calcite_pksp


def checks(plan):
    return {c.id: c for c in plan.checks}


def test_heat_of_neutralisation_constant():
    # H+ + OH- -> H2O: -55.8 kJ/mol at 25 °C (NBS/CODATA formation enthalpies
    # give -55.84/-55.82; Olofsson & Hepler 1975 55.81; from memory). Bar 0.1.
    assert DH_WATER_KJ_MOL == pytest.approx(55.8, abs=0.1)


def test_strong_acid_strong_base_heat_by_hand():
    # Worked: 0.0100 mol/L HCl neutralised to pH 7 with NaOH (25 °C, ideal):
    # 0.0100 mol/L x 55.8 kJ/mol = 0.558 kJ/L; with c_p 4.18 kJ/(kg K) and
    # rho 0.997 kg/L the water warms 0.134 K. 25 % caustic: its dilution heat
    # is not in the catalogue, so only the reaction counts here.
    w = infer_water(Measurements(2.0, 25.0, activity="ideal", alkalinity_mg_l_as_caco3=0))
    plan = plan_dose(w, get_reagent("caustic-25"), Target(6, 8, 7), Batch(10))
    heat = checks(plan)["heat"].values
    assert heat["reaction_heat_kj_per_l"] == pytest.approx(0.558, rel=0.01)
    assert heat["temperature_rise_k"] == pytest.approx(0.134, rel=0.01)
    assert heat["water_formed_mmol_l"] == pytest.approx(10.0, rel=0.005)


def test_weak_acid_heat_follows_hess():
    # Hess's law: HOAc + OH- -> OAc- + H2O has dH = dH_a - dH_w =
    # -0.41 - 55.8 = -56.21 kJ/mol (Goldberg et al. 2002 for acetic acid,
    # -0.41 kJ/mol, from memory). 0.1 mol/L acetic acid taken to pH 8.5
    # (>99.9 % as acetate) releases 5.62 kJ/L.
    w = infer_water(Measurements(2.88, 25.0, activity="ideal", solutes_mmol_l={"acetate": 100}))
    plan = plan_dose(w, get_reagent("caustic-25"), Target(8.0, 9.0, 8.5), Batch(1))
    q = checks(plan)["heat"].values["reaction_heat_kj_per_l"]
    assert q == pytest.approx(0.1 * 56.21, rel=0.01)


def test_water_formed_agrees_from_both_proton_balances():
    # Internal bookkeeping check: the extent of water formation from the OH-
    # balance equals the one from the H+ balance (charge balance).
    w = infer_water(Measurements(3.5, 30.0, solutes_mmol_l={"phosphate": 2, "acetate": 3},
                    alkalinity_mg_l_as_caco3=None))
    r = get_reagent("caustic-50")
    plan = plan_dose(w, r, Target(6, 9, 7.5), Batch(1))
    from dosing.planning.plan import mix_closed
    from dosing.chem import add_dose, solve_ph
    before = speciate(mix_closed(w), w.ph)
    dosed = add_dose(mix_closed(w), r.vector(), plan.dose_mol_l)
    after = speciate(dosed, solve_ph(dosed))
    grow = 1 + plan.dose_mol_l * r.litres_product_per_mol
    # H+ balance: dH = sum(xi_steps) + xi_w  ->  xi_w from H+
    from dosing.planning.hazards import _stepwise
    xi_steps = float((_stepwise(after)[0] * grow - _stepwise(before)[0]).sum())
    xi_w_h = float(after.h_mol_l[0]) * grow - float(before.h_mol_l[0]) - xi_steps
    xi_w_oh = float(after.oh_mol_l[0]) * grow - float(before.oh_mol_l[0]) - plan.dose_mol_l
    assert xi_w_h == pytest.approx(xi_w_oh, rel=1e-6, abs=1e-12)


def test_sulfuric_98_dilution_heat_per_kg():
    # Estimate from NBS formation enthalpies (Wagman et al. 1982): -91.7
    # kJ/mol H2SO4 for 98 % acid to infinite dilution, i.e. about -916 kJ per
    # kg of product (9.99 mol/kg).
    w = infer_water(Measurements(12.0, 20.0, alkalinity_mg_l_as_caco3=600))
    plan = plan_dose(w, get_reagent("sulfuric-98"), Target(6.5, 9, 7.5), Batch(5))
    c = checks(plan)["local-boiling"]
    assert c.level == "danger"
    assert c.values["dilution_heat_kj_per_kg_product"] == pytest.approx(916, abs=10)


def test_co2_released_from_bicarbonate_by_hand():
    # Worked: 10 m3 of 10.0 mmol/L NaHCO3 water (pH 8.3) acidified with HCl
    # to pH 4.5: at 4.5 the carbonate is 98.6 % CO2* (pK1 6.352, 25 °C), so
    # 98.6 mol of CO2 minus the 0.14 mol air equilibrium holds; as gas at
    # 25 °C and 1 atm (24.47 L/mol, ideal gas) that is about 2.41 m3.
    w = infer_water(Measurements(8.3, 25.0, activity="ideal", solutes_mmol_l={"carbonate": 10.0}))
    plan = plan_dose(w, get_reagent("hydrochloric-32"), Target(4.0, 5.0, 4.5), Batch(10))
    c = checks(plan)["co2"]
    a0 = 1 / (1 + 10 ** (4.5 - 6.352) + 10 ** (2 * 4.5 - 6.352 - 10.329))
    air = 0.0340 * 420e-6
    mol = (0.010 * a0 - air) * 10_000
    assert c.values["co2_mol"] == pytest.approx(mol, rel=0.01)
    assert c.values["co2_gas_litres"] == pytest.approx(mol * 24.47, rel=0.01)
    assert c.level == "warning"


def test_hydrogen_sulfide_danger_when_acidified():
    # Sulfide at pH 6: fraction H2S = 1/(1 + 10^(6 - 6.99)) = 0.907 (pKa 6.99,
    # a tabulation of thermodynamic pKa values; CRC gives 7.05; ideal, 25 °C).
    w = infer_water(Measurements(9.5, 25.0, activity="ideal", alkalinity_mg_l_as_caco3=100,
                    solutes_mmol_l={"sulfide": 0.5}))
    plan = plan_dose(w, get_reagent("sulfuric-93"), Target(5.5, 6.5, 6.0), Batch(3))
    c = checks(plan)["sulfide"]
    assert c.level == "danger"
    assert c.values["fraction_as_gas_former"] == pytest.approx(1 / (1 + 10 ** (6 - 6.99)),
                                                                abs=1e-3)
    assert "hydrogen sulfide" in words(c)


def test_no_sulfide_alarm_above_ph_8():
    w = infer_water(Measurements(11.0, 25.0, alkalinity_mg_l_as_caco3=300, solutes_mmol_l={"sulfide": 0.5}))
    plan = plan_dose(w, get_reagent("sulfuric-93"), Target(8.5, 9.5, 9.0), Batch(3))
    assert "sulfide" not in checks(plan)


def test_cyanide_danger_when_acidified():
    # HCN pKa 9.21 (CRC, from memory): at pH 7 over 99 % is HCN.
    w = infer_water(Measurements(11.5, 20.0, alkalinity_mg_l_as_caco3=500, solutes_mmol_l={"cyanide": 0.2}))
    plan = plan_dose(w, get_reagent("hydrochloric-32"), Target(6.5, 8.5, 7.0), Batch(2))
    c = checks(plan)["cyanide"]
    assert c.level == "danger" and c.values["fraction_as_gas_former"] > 0.99


def test_ammonia_stripping_above_ph_9():
    # NH3 fraction at pH 10 = 1/(1 + 10^(9.245 - 10)) = 0.851 (pKa 9.245,
    # Goldberg et al. 2002, from memory; ideal, 25 °C).
    w = infer_water(Measurements(7.0, 25.0, activity="ideal", alkalinity_mg_l_as_caco3=100,
                    solutes_mg_l={"ammonia": 40}))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(9.5, 10.5, 10.0), Batch(2))
    c = checks(plan)["ammonia"]
    assert c.values["fraction_as_gas_former"] == pytest.approx(1 / (1 + 10 ** (9.245 - 10)),
                                                                abs=1e-3)


def test_added_ions_and_permit_caps():
    # Stoichiometry: each mmol of NaOH adds 22.99 mg of sodium.
    w = infer_water(Measurements(2.5, 20.0, alkalinity_mg_l_as_caco3=0, ions_mg_l={"sodium": 100}))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(6, 9, 7), Batch(5),
                     permit={"sodium_mg_l": 150, "tds_increase_mg_l": 500})
    c = checks(plan)
    added = c["discharge"].values["sodium_added_mg_l"]
    assert added == pytest.approx(plan.dose_mol_l * 22.990e3, rel=1e-3)
    assert c["permit-sodium_mg_l"].values["value_mg_l"] == pytest.approx(100 + added, rel=1e-3)
    # 100 mg/L plus about 80 mg/L from the dose is over the 150 mg/L cap.
    assert 100 + added > 150 and c["permit-sodium_mg_l"].level == "danger"
    assert c["permit-tds_increase_mg_l"].level == "info"


def _free_pair(ca_t, x_t, ph, k_pair, pair_h, alpha_x):
    """Free Ca2+ and free ligand (ideal) where Ca and a ligand X form pairs:
    Ca_t = Ca + P, X_t = X / alpha_x + P, P = Ca X (K1 + K2 {H+}) (a plain
    reference for the tests below, brentq on the free calcium)."""
    kp = 10 ** k_pair + (10 ** (pair_h - ph) if pair_h is not None else 0.0)

    def free_x(ca):
        return (x_t - (ca_t - ca)) * alpha_x
    ca = brentq(lambda ca: ca + ca * free_x(ca) * kp - ca_t, max(ca_t - x_t, 0.0) + 1e-30,
                ca_t, xtol=1e-18, rtol=1e-14)
    return ca, free_x(ca)


def test_calcite_saturation_after_lime():
    # Calcite SI = log(a_Ca a_CO3) - log Ksp, Ksp from Plummer & Busenberg
    # 1982 (8.48 at 25 °C). Ideal model so the hand value needs no activity:
    # Ca = background + lime dose; CO3 from the carbonate fractions at the
    # end pH (pK1 6.352, pK2 10.329); the pairs CaCO3° (log K 3.224) and
    # CaHCO3+ (1.106 with HCO3-, Plummer & Busenberg 1982, from memory) take
    # their share of both.
    # Calcite kept dissolved (the hand value assumes none precipitates).
    w = infer_water(Measurements(5.0, 25.0, activity="ideal", acidity_mg_l_as_caco3=250,
                    ions_mg_l={"calcium": 80}, calcite="dissolved"))
    plan = plan_dose(w, get_reagent("lime"), Target(8.0, 9.0, 8.5), Batch(10))
    c = checks(plan)["calcite"]
    ca_t = 80 / 40.078 / 1000 + plan.dose_mol_l
    c_t = w.carbonate_mol_l
    h = 10 ** -8.5
    k1, k2 = 10 ** -6.352, 10 ** -10.329
    a_co3 = k1 * k2 / (h * h + k1 * h + k1 * k2)
    a_ca = 1 / (1 + 10 ** (-12.78 + 8.5))           # CaOH+ (Nordstrom et al. 1990)
    ca, co3 = _free_pair(ca_t, c_t, 8.5, 3.224, 1.106 + 10.329, a_co3)
    si = math.log10(ca * a_ca * co3) + float(calcite_pksp(25.0))
    assert c.values["calcite_si"] == pytest.approx(si, abs=0.01)
    # SI near +2: calcite scale on the tank and pipes is likely.
    assert si > 1.5 and c.level == "warning"


def test_every_plan_has_heat_and_discharge_checks():
    w = infer_water(Measurements(3.0, alkalinity_mg_l_as_caco3=0))
    for rid in ("caustic-50", "lime", "soda-ash", "bicarbonate"):
        plan = plan_dose(w, get_reagent(rid), Target(6, 8), Batch(5))
        ids = {c.id for c in plan.checks}
        assert {"heat", "discharge"} <= ids


def test_gypsum_saturation_after_lime_on_sulfate_water():
    # Gypsum log Ksp -4.58 (Langmuir 1997, from memory). 10 mM of calcium
    # on 30 mM of sulfate is well past gypsum's solubility, so it
    # precipitates: the dosed water is left saturated (SI 0, a solid in
    # equilibrium with its water), and the check says it scales.
    w = infer_water(Measurements(2.5, 25.0, activity="ideal", alkalinity_mg_l_as_caco3=0,
                    solutes_mmol_l={"sulfate": 30.0}, ions_mg_l={"calcium": 400}))
    plan = plan_dose(w, get_reagent("lime"), Target(6.5, 8.5, 7.5), Batch(10))
    c = checks(plan)["gypsum"]
    ca = 400 / 40.078 / 1000 + plan.dose_mol_l
    so4 = 0.030 / (1 + 10 ** (1.99 - 7.5))
    assert math.log10(ca * so4) + 4.58 > 0          # supersaturated as dosed
    assert c.values["gypsum_si"] == pytest.approx(0.0, abs=0.01)
    assert c.values["gypsum_mmol_l"] > 0 and c.level == "warning"
    assert any(s.id == "gypsum" for s in plan.solids)


