"""Calcite precipitation (issue 16): inside the charge balance, closed and open
to air, in the dose solve and the forward solve, and the planner's rule for
when a dosed water drops it.

Constants of the hand calculations, 25 °C, ideal solution: carbonic acid
pK1 6.352 and pK2 10.329, calcite pKsp 8.48 (Plummer & Busenberg 1982,
table 5), CO2 Henry log KH -1.468 (same paper); CaOH+ log *beta1 -12.78
(Nordstrom et al. 1990, table 2; from memory).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from dosing.report.words import texts
from dosing.chem.activity import DAVIES, IDEAL
from dosing.planning.measurements import Measurements
from dosing import Batch, Target, get_reagent, infer_water, plan_dose
from dosing.chem import (Mixture, add_dose, dose_to_ph, solve_ph, speciate,
                                system_index, N_SYSTEMS)
from tests.helpers import run_cli

PK1, PK2, PKSP, LOG_KH, LOG_B1_CAOH = 6.352, 10.329, 8.48, -1.468, -12.78


def _water(ca, c, strong, t=25.0, activity=IDEAL, co2=np.nan, calcite=True, complexes=False):
    """Calcium and carbonate only; by default the one-component model (free
    ions only), which the hand calculations below describe."""
    tot = np.zeros(N_SYSTEMS)
    tot[system_index("calcium")] = ca
    tot[system_index("carbonate")] = c
    return replace(Mixture.build(tot, strong, 0.0, t, co2, activity), calcite=calcite,
                   complexes=complexes)


#: CaCO3° and CaHCO3+ formation, log K 3.224 and 1.106 (with HCO3-) at 25 °C
#: (Plummer & Busenberg 1982, from memory).
LOG_K_CACO3, LOG_K_CAHCO3 = 3.224, 1.106


@pytest.mark.parametrize("ph", [8.5, 9.0, 10.0])
def test_calcite_with_its_ion_pairs_by_hand(ph):
    # With calcite present Ca2+ x CO3 2- = Ksp, so the two pairs hold a fixed
    # P = Ksp (K_CaCO3 + K_CaHCO3 {H+}/K2) whatever else; the free ions then
    # obey (Ca - x - P)(C - x - P) = Ksp / (alpha_Ca alpha_CO3), the same
    # quadratic as without pairs, shifted by P (ideal solution).
    ca, c = 3e-3, 4e-3
    a2, _ = _alpha2(ph)
    ksp = 10.0 ** -PKSP
    pairs = ksp * (10.0 ** LOG_K_CACO3 + 10.0 ** (LOG_K_CAHCO3 + PK2 - ph))
    k = ksp / (_alpha_ca(ph) * a2)
    x = 0.5 * ((ca + c - 2 * pairs) - math.sqrt((ca - c) ** 2 + 4 * k))
    sp = speciate(_water(ca, c, 0.0, complexes=True), ph)
    assert sp.calcite_mol_l[0] == pytest.approx(x, rel=0.01)
    free_ca = sp.free[0, system_index("calcium")] * _alpha_ca(ph)
    free_co3 = sp.free[0, system_index("carbonate")] * a2
    assert math.log10(free_ca * free_co3) == pytest.approx(-PKSP, abs=0.005)
    # Mass balance of both components to 1e-10 (dissolved + calcite = total).
    for cid, total in (("calcium", ca), ("carbonate", c)):
        assert sp.totals_mol_l[0, system_index(cid)] + x == pytest.approx(total, rel=1e-2)
        assert (sp.totals_mol_l[0, system_index(cid)] + sp.calcite_mol_l[0]
                == pytest.approx(total, rel=1e-10))


def _alpha2(ph):
    h = 10.0 ** -ph
    k1, k2 = 10.0 ** -PK1, 10.0 ** -PK2
    return k1 * k2 / (h * h + k1 * h + k1 * k2), h * h / (h * h + k1 * h + k1 * k2)


def _alpha_ca(ph):
    return 1.0 / (1.0 + 10.0 ** (LOG_B1_CAOH + ph))


@pytest.mark.parametrize("ph", [8.5, 9.0, 10.0])
def test_closed_water_precipitates_to_the_hand_calculated_amount(ph):
    ca, c = 3e-3, 4e-3
    a2, _ = _alpha2(ph)
    k = 10.0 ** -PKSP / (_alpha_ca(ph) * a2)
    x = 0.5 * ((ca + c) - math.sqrt((ca - c) ** 2 + 4 * k))
    sp = speciate(_water(ca, c, 0.0), ph)
    assert sp.calcite_mol_l[0] == pytest.approx(x, rel=0.01)
    # What is left is saturated: Ca_free * CO3 = Ksp.
    left_ca = sp.totals_mol_l[0, system_index("calcium")] * _alpha_ca(ph)
    left_co3 = sp.totals_mol_l[0, system_index("carbonate")] * a2
    assert math.log10(left_ca * left_co3) == pytest.approx(-PKSP, abs=0.01)


def test_open_water_caps_calcium_at_the_hand_calculated_solubility():
    ph = 8.3
    co2 = 10.0 ** LOG_KH * 420e-6
    a2, a0 = _alpha2(ph)
    co3 = co2 / a0 * a2
    ca_max = 10.0 ** -PKSP / co3 / _alpha_ca(ph)
    sp = speciate(_water(5e-3, 0.0, 0.0, co2=co2), ph)
    assert sp.totals_mol_l[0, system_index("calcium")] == pytest.approx(ca_max, rel=0.01)
    assert sp.calcite_mol_l[0] == pytest.approx(5e-3 - ca_max, rel=0.01)
    assert sp.solids_mol_l[0, system_index("calcium")] == 0.0     # no portlandite


def test_lime_softening_takes_the_stoichiometric_lime():
    # Carbonate hardness removal: Ca(HCO3)2 + Ca(OH)2 -> 2 CaCO3 + 2 H2O and
    # CO2 + Ca(OH)2 -> CaCO3 + H2O, so lime = CO2 + calcium carbonate hardness
    # (Crittenden et al. 2012, MWH Water Treatment 3rd ed., ch. 12; from
    # memory). Ca 2 mmol/L, alkalinity 200 mg/L as CaCO3 at pH 7.8.
    w = infer_water(Measurements(7.8, 25.0, alkalinity_mg_l_as_caco3=200, ions_mg_l={"calcium": 80.16},
                    activity="ideal"))
    plan = plan_dose(w, get_reagent("lime"), Target(9.8, 10.8, 10.3), Batch(100))
    hco3 = 4e-3
    co2 = hco3 * 10.0 ** (PK1 - 7.8)
    assert plan.dose_mol_l == pytest.approx(co2 + 2e-3, rel=0.05)
    # Before the calcite forms the same dose overshoots the aim (10.75 with the
    # Ca-carbonate pairs in the model; about 10.9 without them).
    assert plan.calcite is not None and plan.calcite.ph_if_dissolved > plan.target.ph_aim + 0.3
    assert any(s.id == "calcite" for s in plan.solids)
    assert any("calcite precipitates" in x for x in texts(plan.warnings))


@settings(max_examples=60, deadline=None, database=None)
@given(ca=st.floats(1e-4, 2e-2), c=st.floats(1e-4, 2e-2), strong=st.floats(-5e-3, 5e-3),
       ph=st.floats(7.5, 11.0), t=st.floats(5.0, 50.0), activity=st.sampled_from([IDEAL, DAVIES]),
       reagent=st.sampled_from(["caustic-50", "lime", "soda-ash", "sulfuric-98"]),
       complexes=st.booleans())
def test_dose_and_forward_solve_agree_with_calcite(ca, c, strong, ph, t, activity, reagent,
                                                  complexes):
    mix = _water(ca, c, strong, t, activity, complexes=complexes)
    r = get_reagent(reagent).vector()
    d, grip = dose_to_ph(mix, r, ph)
    if not (np.isfinite(d[0]) and d[0] >= 0 and abs(grip[0]) > 1e-9):
        return
    back = solve_ph(add_dose(mix, r, d), ph_guess=ph)
    assert back[0] == pytest.approx(ph, abs=1e-6)


def _hard(calcite="auto", ph=7.8):
    return infer_water(Measurements(ph, 20.0, alkalinity_mg_l_as_caco3=200,
                       ions_mg_l={"calcium": 80.16}, calcite=calcite))


def test_planner_keeps_calcite_dissolved_at_low_supersaturation():
    plan = plan_dose(_hard(), get_reagent("caustic-50"), Target(7.5, 8.8, 8.0), Batch(10))
    si = [c for c in plan.checks if c.id == "calcite"][0].values["calcite_si"]
    assert 0.5 < si < 1.0 and plan.calcite is None
    forced = plan_dose(_hard("precipitates"), get_reagent("caustic-50"),
                       Target(7.5, 8.8, 8.0), Batch(10))
    assert forced.calcite is not None and forced.dose_mol_l > plan.dose_mol_l


def test_planner_never_precipitates_when_told_dissolved():
    plan = plan_dose(_hard("dissolved"), get_reagent("lime"), Target(9.8, 10.8, 10.3),
                     Batch(10))
    assert plan.calcite is None and not any(s.id == "calcite" for s in plan.solids)


def test_replay_follows_the_planner_calcite_rule(tmp_path):
    import pandas as pd
    scen = tmp_path / "soft.toml"
    scen.write_text("[effluent]\nph = 7.8\ntemperature_c = 20\nalkalinity_mg_l_as_caco3 = 200\n"
                    "ions_mg_l = { calcium = 80.16 }\n[flow]\nm3_per_h = 5\n"
                    "[target]\nph_min = 9.8\nph_max = 10.8\nph_aim = 10.3\n"
                    "[reagent]\nid = \"lime\"\n")
    data = tmp_path / "log.csv"
    data.write_text("timestamp,flow,ph\n" + "".join(
        f"2026-01-01T00:{m:02d},5,{7.6 + 0.02 * m:.2f}\n" for m in range(10)))
    out = tmp_path / "rows.csv"
    r = run_cli("replay", str(data), "--scenario", str(scen), "--csv", str(out))
    assert r.returncode == 0, r.stderr
    # Replay holds the scenario's carbonate and re-finds the strong-ion
    # balance from each row's pH (README); the planner is given the same.
    carbonate = _hard().carbonate_mol_l * 1000
    for _, row in pd.read_csv(out, comment="#").iterrows():
        w = infer_water(Measurements(row.ph, 20.0, solutes_mmol_l={"carbonate": carbonate},
                        ions_mg_l={"calcium": 80.16}))
        plan = plan_dose(w, get_reagent("lime"), Target(9.8, 10.8, 10.3), Batch(1))
        assert plan.calcite is not None
        assert row.dose_mmol_l == pytest.approx(plan.dose_mol_l * 1000, rel=1e-5)


def test_bad_calcite_mode_is_one_line(tmp_path):
    f = tmp_path / "bad.toml"
    f.write_text("[effluent]\nph = 7\nalkalinity_mg_l_as_caco3 = 50\n[batch]\nvolume_m3 = 1\n"
                 "[target]\nph_min = 6\nph_max = 9\n[reagent]\nid = \"lime\"\n"
                 "[model]\ncalcite = \"sometimes\"\n")
    r = run_cli("plan", str(f))
    assert r.returncode == 2 and "model.calcite" in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1
