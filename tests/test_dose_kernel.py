"""The compiled fixed-pH dose loop (issue 30) against its numpy reference.

The reference is the numpy path of :func:`dosing.chem.dose_to_ph` (itself
checked against outside sources elsewhere: chempy, thermo, textbook
titrations); the compiled loop must give the same doses to 1e-12 of the
charge it balances, the same slopes, and NaN exactly where the reference
gives no number.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from dosing.chem import N_SYSTEMS, Mixture, dose_to_ph, system_index
from dosing.chem.activity import DAVIES, IDEAL
from dosing.chem.dose import DOSE_KERNEL
from dosing.planning.reagents import get_reagent

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(autouse=True)
def _compiled_for_any_size():
    """The loops run from the first water here (in use they start at
    DOSE_KERNEL.min_rows, where they pay for numba's start)."""
    before = DOSE_KERNEL.min_rows
    DOSE_KERNEL.min_rows = 0
    yield
    DOSE_KERNEL.min_rows = before


def _waters(n: int, activity, seed: int, one_temperature: bool) -> Mixture:
    rng = np.random.default_rng(seed)
    tot = np.zeros((n, N_SYSTEMS))
    for key, hi in (("carbonate", 0.01), ("sulfate", 0.01), ("ammonia", 0.002),
                    ("acetate", 0.005), ("phosphate", 0.002)):
        tot[:, system_index(key)] = rng.uniform(0.0, hi, n) * (rng.random(n) < 0.8)
    s = rng.uniform(-0.05, 0.05, n)
    t = np.full(n, 18.0) if one_temperature else rng.uniform(5.0, 45.0, n)
    return Mixture.build(tot, s, 0.5 * np.abs(s), t, math.nan, activity)


def _both(fn, *args, **kw):
    """(the numpy reference's result, the compiled loop's) of one call."""
    DOSE_KERNEL.on = False
    try:
        ref = fn(*args, **kw)
    finally:
        DOSE_KERNEL.on = True
    return ref, fn(*args, **kw)


@pytest.mark.parametrize("activity", [IDEAL, DAVIES], ids=["ideal", "davies"])
@pytest.mark.parametrize("reagent", ["caustic-50", "sulfuric-93", "soda-ash"])
@pytest.mark.parametrize("one_temperature", [True, False], ids=["one-T", "many-T"])
def test_compiled_dose_equals_the_reference(activity, reagent, one_temperature):
    mix = _waters(3000, activity, seed=11, one_temperature=one_temperature)
    target = np.random.default_rng(5).uniform(3.0, 11.5, mix.n)
    (d0, s0), (d1, s1) = _both(dose_to_ph, mix, get_reagent(reagent).vector(), target)
    assert np.array_equal(np.isfinite(d0), np.isfinite(d1))
    ok = np.isfinite(d0)
    assert ok.mean() > 0.9
    # The dose balances charges of order |S| + sum of totals: 1e-12 of that.
    scale = (np.abs(mix.strong_eq_l) + mix.totals_mol_l.sum(axis=1) + 1e-7) / np.abs(s0)
    assert np.all(np.abs(d1[ok] - d0[ok]) <= 1e-12 * scale[ok])
    np.testing.assert_allclose(s1[ok], s0[ok], rtol=1e-12, atol=0.0)


def test_a_water_whose_ionic_strength_runs_away_gets_no_number_in_both():
    # A base that cannot reach pH 14.5 in a strongly acid water: the dose is
    # huge and its ionic strength passes the ceiling.
    tot = np.zeros((2, N_SYSTEMS))
    tot[:, system_index("sulfate")] = [0.01, 0.01]
    mix = Mixture.build(tot, np.array([-2.0, -0.02]), np.array([1.0, 0.01]),
                        np.array([25.0, 25.0]), math.nan, DAVIES)
    (d0, _), (d1, _) = _both(dose_to_ph, mix, get_reagent("caustic-50").vector(),
                             np.array([14.5, 7.0]))
    assert np.array_equal(np.isfinite(d0), np.isfinite(d1))
    assert np.isfinite(d1[1])
    assert d1[1] == pytest.approx(d0[1], rel=1e-12)


@pytest.mark.slow
@pytest.mark.parametrize("name", ["acid-rinse-caustic", "food-acetate-stream", "cip-sulfuric",
                                  "flow-metering-pump"])
def test_demo_plans_are_the_same_with_and_without_the_compiled_loop(name):
    # Plans sample 2,000 waters: under min_rows in use, compiled here (fixture).
    from dosing.io.scenario import load_scenario
    from dosing.planning.job import make_plan
    ref, new = _both(make_plan, load_scenario(ROOT / "scenarios" / f"{name}.toml"))
    assert new.dose_mol_l == pytest.approx(ref.dose_mol_l, rel=1e-12)
    assert new.ph_end == pytest.approx(ref.ph_end, abs=1e-10)
    if ref.uncertainty is not None:
        assert new.uncertainty.p_outside == ref.uncertainty.p_outside


@pytest.mark.parametrize("activity", [IDEAL, DAVIES], ids=["ideal", "davies"])
@pytest.mark.parametrize("one_temperature", [True, False], ids=["one-T", "many-T"])
def test_compiled_strong_balance_equals_the_reference(activity, one_temperature):
    from dosing.chem import strong_balance_at_ph
    mix = _waters(3000, activity, seed=4, one_temperature=one_temperature)
    rng = np.random.default_rng(6)
    ph = rng.uniform(2.0, 12.5, mix.n)
    extra = rng.uniform(0.0, 0.05, mix.n)
    known = rng.uniform(-0.01, 0.01, mix.n)
    (s0, i0), (s1, i1) = _both(strong_balance_at_ph, mix.totals_mol_l, ph, mix.temperature_c,
                               activity=activity, extra_ionic_strength=extra,
                               known_strong_eq_l=known)
    assert np.array_equal(np.isfinite(s0), np.isfinite(s1)) and np.isfinite(s0).all()
    scale = mix.totals_mol_l.sum(axis=1) + 10.0 ** -ph + 10.0 ** (ph - 14.0)
    assert np.all(np.abs(s1 - s0) <= 1e-12 * scale)
    np.testing.assert_allclose(i1, i0, rtol=1e-12, atol=0.0)


@pytest.mark.parametrize("activity", [IDEAL, DAVIES], ids=["ideal", "davies"])
@pytest.mark.parametrize("one_temperature", [True, False], ids=["one-T", "many-T"])
def test_compiled_carbonate_from_alkalinity_equals_the_reference(activity, one_temperature):
    from dosing.chem import carbonate_for_alkalinity
    mix = _waters(3000, activity, seed=9, one_temperature=one_temperature)
    rng = np.random.default_rng(2)
    ph = rng.uniform(4.8, 11.5, mix.n)
    alk = rng.uniform(-0.002, 0.01, mix.n)            # eq/L; negative: an acidity
    extra = rng.uniform(0.0, 0.05, mix.n)
    (c0, k0, i0), (c1, k1, i1) = _both(carbonate_for_alkalinity, mix.totals_mol_l, ph,
                                       mix.temperature_c, alk, 4.5, activity=activity,
                                       extra_ionic_strength=extra)
    assert np.array_equal(np.isfinite(c0), np.isfinite(c1))
    ok = np.isfinite(c0)
    assert ok.mean() > 0.9
    scale = (np.abs(alk) + mix.totals_mol_l.sum(axis=1) + 1e-7) / np.abs(k0)
    assert np.all(np.abs(c1[ok] - c0[ok]) <= 1e-12 * scale[ok])
    np.testing.assert_allclose(k1, k0, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(i1[ok], i0[ok], rtol=1e-12, atol=0.0)


def test_small_calls_keep_to_numpy_so_a_command_does_not_pay_numbas_start():
    from dosing.chem import fast
    DOSE_KERNEL.min_rows = 20_000
    assert fast.compiled(19_999) is None and fast.compiled_alkalinity(10) is None
    assert fast.compiled(20_000) is not None
