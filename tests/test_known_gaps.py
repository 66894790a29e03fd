"""The model's known gaps: closed ones as tests, open ones as strict expected failures.

Each test states what a fuller model gives (with its source). An open gap
fails on the engine as it stands; ``strict=True`` makes it an error once the
engine gets it right, so the mark is removed in the same change (as ``pint``
keeps its known bugs as xfail, never deleted). The first four gaps (ammonia
complexes, gypsum inside the equilibrium, the CaSO4° pair, siderite) were
closed by the speciation core (dosing.chem.coupled); the fifth (activity
past the Davies range) by the specific ion interaction model.
"""

from __future__ import annotations

import math

import pytest

from dosing import Batch, Measurements, Target, get_reagent, infer_water, plan_dose
from dosing.chem.activity import DAVIES


def test_copper_held_by_ammonia_at_ph_9():
    # A copper etch rinse: 50 mg/L copper, 200 mg/L ammonia as N, caustic to
    # pH 9. With the Cu(II)-NH3 cumulative constants (log beta1..4 about 4.1,
    # 7.6, 10.5, 12.6; Smith & Martell, Critical Stability Constants, from
    # memory) more than 0.1 mg/L of copper stays dissolved; without them the
    # model says about 0.002 mg/L.
    w = infer_water(Measurements(3.0, 20.0, alkalinity_mg_l_as_caco3=0,
                                 solutes_mg_l={"ammonia": 200},
                                 metals_mg_l={"copper": 50}))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(8.5, 9.5, 9.0), Batch(10.0))
    assert plan.metals_after_mg_l["copper"] > 0.1


def test_calcium_left_after_lime_on_sulfate_water_counts_the_gypsum():
    # pH 1.9, 60 mmol/L sulfate, lime to pH 7 (the speciation issue's case):
    # about 13 mmol/L of gypsum forms, so the calcium left is near gypsum's
    # solubility (about 230 mg/L with the CaSO4° pair), not the 750 mg/L of
    # all the lime dosed, and a 500 mg/L calcium cap is met.
    w = infer_water(Measurements(1.9, 20.0, alkalinity_mg_l_as_caco3=0,
                                 solutes_mmol_l={"sulfate": 60.0}))
    plan = plan_dose(w, get_reagent("lime"), Target(6.5, 7.5, 7.0), Batch(10.0),
                     permit={"calcium_mg_l": 500.0})
    assert any(s.id == "gypsum" for s in plan.solids)
    calcium = next(c for c in plan.checks if c.id == "permit-calcium_mg_l")
    assert calcium.values["value_mg_l"] < 400.0


def test_gypsum_solubility_in_pure_water():
    # Gypsum in pure water at 25 °C: 15.2 mmol/kg dissolved (Marshall &
    # Slusher 1966, J. Phys. Chem. 70, 4015; from memory; the CRC Handbook's
    # aqueous solubility table gives about 2.0-2.1 g/L as CaSO4). Ion pairing
    # (CaSO4°, log K 2.30, Nordstrom et al. 1990) is about a third of it; free
    # ions with Davies alone would give about 10.6 mmol/L.
    import numpy as np
    from dosing.chem import Mixture, speciate, system_index
    from tests.helpers import totals
    mix = Mixture.build(totals(calcium=0.05, sulfate=0.05), 0.0, 0.0, 25.0, math.nan, DAVIES)
    sp = speciate(mix, np.array([7.0]))
    dissolved = float(sp.totals_mol_l[0, system_index("calcium")])
    assert dissolved * 1000 == pytest.approx(15.2, rel=0.10)
    assert "gypsum" in sp.phase_ids


def test_ferrous_iron_with_carbonate_forms_siderite():
    # 50 mg/L ferrous iron with 2.5 mmol/L carbonate raised from pH 6.2 to
    # 8.5: siderite (FeCO3, log Ksp -10.45 to -10.89; Bruno et al. 1992, from
    # memory) comes out before Fe(OH)2 does.
    w = infer_water(Measurements(6.2, 20.0, solutes_mmol_l={"carbonate": 2.5},
                                 metals_mg_l={"iron_ii": 50}))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(8.0, 9.0, 8.5), Batch(10.0))
    assert any("FeCO3" in s.formula for s in plan.solids)


def test_sodium_chloride_activity_at_three_molal():
    # Mean activity coefficient of NaCl at 3 mol/kg, 25 °C: 0.714 (Robinson &
    # Stokes 1959, appendix 8.10; read-quality in many textbooks, here from
    # memory). Davies gives about 1.37 there, twice too high; the specific
    # ion interaction model (closed this gap) gives 0.70.
    from dosing.chem import sit
    from dosing.chem.activity import SIT, kg_water_per_l
    assert 10 ** float(DAVIES.log_gamma_at(1, 3.0, 25.0)) > 1.3
    c = 3.0 / (1 + 0.019 * 3.0)                  # mol/L by the model's conversion
    y = 10 ** float(SIT.log_gamma_ion(1, sit.EPS_NA_CL, SIT.state(c, 0.5108)))
    assert y * float(kg_water_per_l(c)) == pytest.approx(0.714, rel=0.05)
