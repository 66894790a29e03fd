"""The model's own uncertainty in "how sure": the constants a water leans on, sampled.

The spreads are the catalogue's own (each beside its source); the checks
here are of the machinery: a zero shift changes nothing, a shift moves the
constant it names on both solver paths, and where a constant sets the dose
the ranking names it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from dosing import Batch, Measurements, Target, get_reagent, infer_water, plan_dose
from dosing.chem import Mixture, dose_to_ph, speciate, system_index
from dosing.chem.activity import DAVIES
from dosing.chem.mixture import LogKShift
from dosing.chem.phases import PHASE_IDS
from dosing.planning.model_spread import model_groups
from dosing.planning.uncertainty import Spread, dose_uncertainty
from dosing.report.words import words
from tests.helpers import totals


def test_a_zero_shift_changes_nothing():
    tot = totals(aluminium=1e-3, sulfate=2e-3, zinc=3e-4, ammonia=1e-3)
    bare = Mixture.build(np.vstack([tot] * 3), -0.004, 0.002, 20.0, math.nan, DAVIES)
    shifted = Mixture.build(np.vstack([tot] * 3), -0.004, 0.002, 20.0, math.nan, DAVIES,
                            shift=LogKShift.zeros(3))
    r = get_reagent("caustic-50").vector()
    np.testing.assert_array_equal(dose_to_ph(bare, r, 7.5)[0], dose_to_ph(shifted, r, 7.5)[0])


@pytest.mark.parametrize("with_sulfate", [False, True], ids=["direct", "coupled"])
def test_a_solubility_shift_moves_the_dissolved_metal_by_its_factor(with_sulfate):
    # Al(OH)3 present at pH 5.0: the dissolved free Al3+ is *Ks0 {H+}^3 / γ
    # (Nordstrom et al. 1990's amorphous solid, from memory), so raising
    # log *Ks0 by 0.3 raises the free ion by 10^0.3 on either solver path
    # (the coupled path runs when sulfate pairs are in).
    tot = totals(aluminium=2e-3, **({"sulfate": 1e-3} if with_sulfate else {}))
    shift = LogKShift.zeros(2)
    shift.phases[1, PHASE_IDS.index("aluminium_hydroxide")] = 0.3
    mix = Mixture.build(np.vstack([tot, tot]), 0.0, 0.0, 25.0, math.nan, DAVIES, shift=shift)
    sp = speciate(mix, np.array([5.0, 5.0]))
    j = system_index("aluminium")
    free = sp.free[:, j] * sp.alpha[:, j, 0] * 10 ** sp.log_gamma[:, j, 0]
    assert free[1] / free[0] == pytest.approx(10 ** 0.3, rel=0.02)


def test_groups_follow_what_the_water_holds():
    assert model_groups(set()) == ()
    keys = {g.key for g in model_groups({"copper", "ammonia", "sulfate"})}
    assert {"model:copper:hydrolysis", "model:copper:solid", "model:ammonia",
            "model:sulfate"} <= keys


def test_metal_free_waters_sample_as_before():
    m = Measurements(3.0, 20.0, alkalinity_mg_l_as_caco3=0)
    plan = plan_dose(infer_water(m), get_reagent("caustic-50"), Target(6, 9, 7.5), Batch(10))
    unc = dose_uncertainty(m, plan, Spread(samples=300))
    assert not any(k.startswith("model:") for k, _ in unc.shares)


def test_where_a_constant_sets_the_dose_the_ranking_names_the_model():
    # Aluminium 1 mmol/L taken from pH 3.5 to 4.8, where Al(OH)3 is only
    # partly formed: the dose rides on its solubility and hydrolysis, whose
    # compilations differ by tenths of a log unit.
    m = Measurements(3.5, 20.0, alkalinity_mg_l_as_caco3=0, metals_mg_l={"aluminium": 27.0})
    plan = plan_dose(infer_water(m), get_reagent("caustic-50"), Target(4.6, 5.0, 4.8),
                     Batch(10.0))
    unc = dose_uncertainty(m, plan, Spread(samples=600))
    assert unc.shares[0][0] == "model:aluminium"
    text = words(unc.spread_finding())
    assert "model's aluminium constants" in text and "bench titration" in text
