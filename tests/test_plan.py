"""Dose planning: hand calculations from stoichiometry, bands, refusals."""

import numpy as np
import pytest

from dosing.report.words import texts
from dosing.planning.measurements import Measurements
from dosing import (Batch, Flow, Target, UnreachableError, get_reagent, infer_water,
                    plan_dose)
from dosing.chem import add_dose, solve_ph
from dosing.planning.reagents import GENERAL_CAUTION
from dosing.planning.strengths import custom_reagent


def test_strong_acid_batch_to_ph7_with_50_percent_caustic_by_hand():
    # Hand calculation from stoichiometry (ideal solution, no buffer): a
    # 40 m3 batch of strong mineral acid at pH 2.00 holds 0.0100 mol/L H+,
    # i.e. 400 mol; raising it to pH 7 takes 400 mol NaOH = 16.00 kg, i.e.
    # 32.00 kg of 50 % product, 32.00 / 1.5253 = 20.98 L (density of 50 %
    # NaOH at 20 °C, Perry's Chemical Engineers' Handbook, from memory).
    w = infer_water(Measurements(2.0, 25.0, activity="ideal", alkalinity_mg_l_as_caco3=0))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(6.0, 9.0, 7.0), Batch(40.0))
    a = plan.amounts()
    assert a.mmol_per_l == pytest.approx(10.0, rel=2e-3)
    assert a.kg_product == pytest.approx(32.00, rel=2e-3)
    assert a.litres_product == pytest.approx(20.98, rel=2e-3)
    assert a.kg_active == pytest.approx(16.00, rel=2e-3)
    assert plan.ph_end == pytest.approx(7.0, abs=1e-6)


def test_caustic_batch_lowered_with_98_percent_sulfuric_by_hand():
    # Hand calculation: 10 m3 at pH 12.00 (ideal, 25 °C, pKw 13.995) holds
    # [OH-] = 10^-1.995 = 0.01012 mol/L, i.e. 101.2 mol; H2SO4 gives 2 H+ per
    # mole so 50.6 mol = 4.963 kg H2SO4 = 5.064 kg of 98 % product, 2.758 L
    # at 1.8361 kg/L (CRC Handbook, concentrative properties).
    w = infer_water(Measurements(12.0, 25.0, activity="ideal", alkalinity_mg_l_as_caco3=0))
    plan = plan_dose(w, get_reagent("sulfuric-98"), Target(6.0, 9.0, 7.0), Batch(10.0))
    a = plan.amounts()
    assert a.kg_product == pytest.approx(5.064, rel=3e-3)
    assert a.litres_product == pytest.approx(2.758, rel=3e-3)


def test_flow_amounts_are_per_hour():
    w = infer_water(Measurements(2.0, 25.0, activity="ideal", alkalinity_mg_l_as_caco3=0))
    batch = plan_dose(w, get_reagent("caustic-25"), Target(6, 9, 7), Batch(12.0))
    flow = plan_dose(w, get_reagent("caustic-25"), Target(6, 9, 7), Flow(12.0))
    assert flow.amounts().kg_product == pytest.approx(batch.amounts().kg_product)
    assert flow.amounts().mg_per_l_product == pytest.approx(
        flow.dose_mol_l * 0.159988 * 1e6, rel=1e-6)


def _ph_after(plan, dose):
    dosed = add_dose(plan.water.mixture(), plan.reagent.vector(), dose)
    return float(solve_ph(dosed)[0])


@pytest.mark.parametrize("rid, start", [("caustic-50", 3.2), ("lime", 4.0),
                                        ("sulfuric-93", 10.8), ("co2", 9.6),
                                        ("hydrochloric-32", 11.0)])
def test_band_edges_give_the_window_edges(rid, start):
    w = infer_water(Measurements(start, 15.0, alkalinity_mg_l_as_caco3=300 if start > 7 else None,
                    solutes_mmol_l={"acetate": 2.0} if start < 7 else None))
    t = Target(6.5, 8.5, 7.5)
    plan = plan_dose(w, get_reagent(rid), t, Batch(25.0))
    lo, hi = plan.band_mol_l
    assert lo <= plan.dose_mol_l <= hi
    edges = sorted([_ph_after(plan, lo), _ph_after(plan, hi)])
    assert edges == pytest.approx([6.5, 8.5], abs=1e-6)
    assert _ph_after(plan, plan.dose_mol_l) == pytest.approx(7.5, abs=1e-6)


def test_wrong_direction_is_refused():
    w = infer_water(Measurements(10.0, alkalinity_mg_l_as_caco3=200))
    with pytest.raises(UnreachableError, match="already above"):
        plan_dose(w, get_reagent("caustic-50"), Target(6, 9, 7), Batch(10))


def test_co2_cannot_go_below_about_ph_5():
    w = infer_water(Measurements(8.5, alkalinity_mg_l_as_caco3=200))
    with pytest.raises(UnreachableError, match="below about pH 5"):
        plan_dose(w, get_reagent("co2"), Target(4.0, 6.0, 4.5), Batch(10))


def test_co2_saturation_limit():
    # A very alkaline water: to reach 6.0 it would need more dissolved CO2
    # than pure CO2 at 1 atm holds (KH ~ 0.034 mol/(kg atm) at 25 °C,
    # Plummer & Busenberg 1982).
    w = infer_water(Measurements(11.0, alkalinity_mg_l_as_caco3=5000))
    with pytest.raises(UnreachableError, match="dissolved CO2"):
        plan_dose(w, get_reagent("co2"), Target(5.5, 6.5, 6.0), Batch(10))


def test_already_inside_the_window_needs_no_dose():
    w = infer_water(Measurements(7.8, alkalinity_mg_l_as_caco3=150))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(6, 9, 7), Batch(10))
    assert not plan.dose_needed
    assert plan.dose_mol_l == 0.0
    assert plan.ph_end == pytest.approx(7.8, abs=1e-6)
    assert any("no dose needed" in m for m in texts(plan.warnings))


def test_narrow_window_warning_in_operator_terms():
    # Unbuffered acid: the classic case where 5 % error overshoots.
    w = infer_water(Measurements(2.5, alkalinity_mg_l_as_caco3=0))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(6.5, 8.5, 7.5), Batch(10))
    assert any("a 5% dosing error moves the pH" in m for m in texts(plan.warnings))
    assert plan.ph_high_dose > 8.5
    # A well-buffered water gets no such warning.
    w = infer_water(Measurements(5.0, acidity_mg_l_as_caco3=400))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(6.0, 9.0, 7.0), Batch(10))
    assert not any("dosing error" in m for m in texts(plan.warnings))


def test_lime_undissolved_is_judged_after_neutralising_issue_16():
    # Issue 16 changed this check: a lime dose above lime's solubility in
    # pure water (about 1.7 g/L) dissolves as it neutralises an acid water,
    # so no "stays undissolved" warning; the slow-dissolution caution stays.
    w = infer_water(Measurements(1.5, 20.0, solutes_mmol_l={"sulfate": 40}))
    plan = plan_dose(w, get_reagent("lime"), Target(6, 9), Batch(50))
    assert plan.dose_mol_l * 74.09 > 1.7
    assert not any("undissolved" in m for m in texts(plan.warnings))
    assert any("dissolves slowly" in c for c in plan.cautions)
    assert not any(s.id == "calcium_hydroxide" for s in plan.solids)


def test_lime_ceiling_follows_temperature():
    # Saturated Ca(OH)2 is the NIST/NBS pH standard: pH 12.45 at 25 °C and
    # 11.70 at 50 °C (Bates 1973, Determination of pH, from memory). The
    # planner's ceiling for lime on clean water comes from portlandite's
    # log *Ks0 22.8 and its enthalpy (Nordstrom et al. 1990, from memory).
    for t, ref in ((25.0, 12.45), (50.0, 11.70)):
        w = infer_water(Measurements(7.0, t, alkalinity_mg_l_as_caco3=0))
        plan = plan_dose(w, get_reagent("lime"), Target(7.5, 9.0, 8.0), Batch(1))
        assert plan.ph_ceiling == pytest.approx(ref, abs=0.08)
    # An aim a warm water cannot reach with lime is refused, naming the ceiling.
    w = infer_water(Measurements(7.0, 50.0, alkalinity_mg_l_as_caco3=0))
    with pytest.raises(UnreachableError, match="no higher than about pH 11.6"):
        plan_dose(w, get_reagent("lime"), Target(11.8, 12.2, 12.0), Batch(1))


def test_every_plan_carries_the_cautions():
    w = infer_water(Measurements(3.0, alkalinity_mg_l_as_caco3=0))
    for rid in ("caustic-50", "lime", "soda-ash"):
        plan = plan_dose(w, get_reagent(rid), Target(6, 9), Batch(5))
        assert GENERAL_CAUTION in plan.cautions
        assert len(plan.cautions) >= 2


def test_titration_curve_is_monotone_with_positive_buffer_intensity():
    w = infer_water(Measurements(4.0, 25.0, solutes_mmol_l={"acetate": 5, "phosphate": 1}))
    plan = plan_dose(w, get_reagent("caustic-25"), Target(6, 9), Batch(5))
    c = plan.curve
    assert len(c.ph) >= 200
    assert np.all(np.diff(c.ph) > 0)
    assert np.all(c.buffer_intensity_eq_l > 0)
    assert c.ph[0] == pytest.approx(4.0, abs=1e-8)


def test_custom_reagent_by_molarity_without_density_reports_litres_only():
    w = infer_water(Measurements(3.0, alkalinity_mg_l_as_caco3=0))
    r = custom_reagent("NaOH", molarity_mol_l=5.0)
    a = plan_dose(w, r, Target(6, 9, 7), Batch(1)).amounts()
    assert a.kg_product is None
    assert a.litres_product == pytest.approx(a.mmol_per_l * 1000 / 1000 / 5.0, rel=1e-9)


def test_target_validation():
    from dosing import InputError
    with pytest.raises(InputError, match="target.ph_max"):
        Target(9, 6)
    with pytest.raises(InputError, match="target.ph_aim"):
        Target(6, 9, 10)
    with pytest.raises(InputError, match="batch.volume_m3"):
        Batch(-4)
    with pytest.raises(InputError, match="flow.m3_per_h"):
        Flow(0)
    assert Target(6, 9).ph_aim == 7.5
