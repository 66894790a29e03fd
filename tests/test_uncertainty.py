"""How sure the dose is (issue 13): sampled uncertainty, the staged dose and
its trim table, checked by simulation against waters drawn independently.

The checks are statistical identities and simulations of the operator's
procedure, not reference values: the sampled median must fall on the
deterministic plan when every uncertainty is zero; a wider input must widen
the 5-95 % range; a trim table followed on independently drawn true waters
must land in the window as often as the plan says.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from dosing.report.words import words
from dosing.io.scenario import load_scenario
from dosing.planning.job import make_plan
from dosing.report.plan_json import sheet_dict
from dosing.planning.uncertainty import (Spread, _sample, dose_uncertainty, follow_table,
                                spread_from)
from dosing.errors import InputError
from tests.helpers import run_cli

ZERO = Spread(ph=0.0, lab_percent=0.0, solutes_percent=0.0, metals_percent=0.0,
              temperature_c=0.0, amount_percent=0.0, strength_percent=0.0, model_scale=0.0,
              samples=200)


def _plan(name):
    from pathlib import Path
    s = load_scenario(str(Path(__file__).resolve().parents[1] / "scenarios" / f"{name}.toml"))
    plan = make_plan(s)
    return s, plan, replace(s.measurements, calcite=plan.water.calcite)


@pytest.mark.parametrize("name", ["plating-rinse-metals", "food-acetate-stream",
                                  "flow-metering-pump", "hard-wash-lime"])
def test_median_is_the_plan_when_nothing_is_uncertain(name):
    _, plan, inputs = _plan(name)
    unc = dose_uncertainty(inputs, plan, ZERO)
    for p in (unc.p05_mol_l, unc.p50_mol_l, unc.p95_mol_l):
        assert p == pytest.approx(plan.dose_mol_l, rel=1e-6)
    assert unc.p_outside == 0.0


@pytest.mark.parametrize("key, name", [("ph", "plating-rinse-metals"),
                                       ("lab_percent", "food-acetate-stream"),
                                       ("solutes_percent", "food-acetate-stream"),
                                       ("metals_percent", "plating-rinse-metals"),
                                       ("temperature_c", "flow-metering-pump"),
                                       ("amount_percent", "plating-rinse-metals"),
                                       ("strength_percent", "plating-rinse-metals")])
def test_the_range_grows_with_each_input(key, name):
    _, plan, inputs = _plan(name)
    widths = []
    for scale in (1.0, 2.0):
        spread = replace(ZERO, samples=600, **{key: getattr(Spread(), key) * scale})
        unc = dose_uncertainty(inputs, plan, spread)
        widths.append(unc.p95_mol_l - unc.p05_mol_l)
    assert widths[1] > widths[0] > 0


def test_the_largest_input_is_named_first():
    _, plan, inputs = _plan("plating-rinse-metals")
    spread = replace(ZERO, samples=600, strength_percent=10.0, ph=0.01)
    unc = dose_uncertainty(inputs, plan, spread)
    assert unc.shares[0][0] == "strength" and unc.shares[0][1] > 0.8
    assert "product strength" in words(unc.spread_finding())


@pytest.mark.parametrize("name", ["plating-rinse-metals", "magnesia-acid-rinse",
                                  "hard-wash-lime"])
def test_trim_table_lands_in_the_window_as_often_as_stated(name):
    s, plan, inputs = _plan(name)
    st = plan.staging
    assert st is not None and st.trim
    # True waters drawn independently of the ones the plan was made from.
    other = _sample(inputs, replace(s.spread, seed=7, samples=800))
    idx = np.flatnonzero(other.ok)
    delivered = other.strength[idx] / other.amount[idx]
    final = follow_table(plan, st, other.mix.take(idx), delivered)
    t = plan.target
    inside = np.mean((final >= t.ph_min) & (final <= t.ph_max))
    assert inside == pytest.approx(st.p_inside, abs=0.05)
    # The first dose alone stays short of the aim at the stated confidence.
    from dosing.chem import add_dose, solve_ph
    ph1 = solve_ph(add_dose(other.mix.take(idx), plan.reagent.vector(),
                            st.first_mol_l * delivered), ph_guess=np.full(idx.size, t.ph_aim))
    past = ph1 > t.ph_aim if plan.reagent.raises_ph else ph1 < t.ph_aim
    assert np.mean(past) <= 1.0 - st.confidence + 0.03


def test_trim_rows_come_from_reinference_not_proportion():
    _, plan, _ = _plan("plating-rinse-metals")
    rows = [r for r in plan.staging.trim if r.extra_mol_l is not None]
    from dosing.planning.uncertainty import metering_step, trim_doses
    exact = trim_doses(plan, plan.staging.first_mol_l, np.array([r.ph_read for r in rows]))
    # Less is needed the higher the reading, and never more than the whole plan.
    assert np.all(np.diff(exact) < 0) and exact.max() < plan.dose_mol_l
    # The table gives each as it can be metered: rounded to the step, and
    # nothing where less than half a step is needed (issue 29).
    _, _, step = metering_step(plan)
    for r, e in zip(rows, exact):
        assert r.below_metering == (e < step / 2)
        assert r.extra_mol_l == pytest.approx(0.0 if e < step / 2 else round(e / step) * step)
        assert abs(r.extra_mol_l - e) <= step / 2 + 1e-15
    # At a reading on the titration curve of the first dose, the extra is what
    # that curve needs from there (the same water, re-inferred from its pH).
    from dosing.chem import add_dose, solve_ph
    r = plan.reagent.vector()
    ph1 = float(solve_ph(add_dose(plan.water.mixture(), r, plan.staging.first_mol_l))[0])
    extra_at = float(trim_doses(plan, plan.staging.first_mol_l, np.array([ph1]))[0])
    assert plan.staging.first_mol_l + extra_at == pytest.approx(plan.dose_mol_l, rel=2e-3)


def test_json_has_the_promised_keys():
    s, plan, _ = _plan("plating-rinse-metals")
    d = sheet_dict(s, plan)
    u = d["uncertainty"]
    assert {"dose_p05", "dose_p50", "dose_p95", "p_outside_window"} <= set(u)
    assert u["dose_p05"]["kg_product"] < u["dose_p95"]["kg_product"]
    st = d["staging"]
    assert {"mmol_per_l", "kg_product"} <= set(st["first"])
    assert st["trim"][0]["ph_read"] < st["trim"][-1]["ph_read"]
    assert "extra_mmol_per_l" in st["trim"][0]


@pytest.mark.parametrize("table, says", [({"ph": -0.1}, "uncertainty.ph"),
                                        ({"confidence_percent": 40}, "confidence_percent"),
                                        ({"confidence_percent": 99.95}, "confidence_percent"),
                                        ({"samples": 10}, "uncertainty.samples"),
                                        ({"spread": 3}, "unknown key")])
def test_bad_uncertainty_table_is_refused(table, says):
    with pytest.raises(InputError, match=says):
        spread_from(table)


def test_bad_uncertainty_in_a_scenario_is_one_line(tmp_path):
    f = tmp_path / "u.toml"
    from pathlib import Path
    base = Path(__file__).resolve().parents[1] / "scenarios" / "plating-rinse-metals.toml"
    f.write_text(base.read_text() + "\n[uncertainty]\nconfidence_percent = 120\n")
    r = run_cli("plan", str(f))
    assert r.returncode == 2 and "uncertainty.confidence_percent" in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1


def test_flow_plans_carry_uncertainty_but_no_staging():
    _, plan, _ = _plan("food-acetate-stream")
    assert plan.uncertainty is not None and plan.staging is None


@pytest.mark.parametrize("name", ["plating-rinse-metals", "hard-wash-lime"])
def test_the_landing_rate_includes_the_ph_reading_error(name):
    # The operator reads the pH after the first dose with the meter's error
    # (0.05 pH, one standard deviation: Standard Methods 4500-H+ B precision
    # for a meter calibrated that day, common practice) and follows the
    # table for the reading. Simulated here apart from the planner: own
    # waters, own reading errors, the table interpolated by hand.
    from dosing.chem import add_dose, solve_ph
    s, plan, inputs = _plan(name)
    st = plan.staging
    assert st is not None and st.reading_sd == pytest.approx(0.05)
    other = _sample(inputs, replace(s.spread, seed=11, samples=800))
    idx = np.flatnonzero(other.ok)
    delivered = other.strength[idx] / other.amount[idx]
    r, aim = plan.reagent.vector(), plan.target.ph_aim
    waters = other.mix.take(idx)
    ph1 = solve_ph(add_dose(waters, r, st.first_mol_l * delivered),
                   ph_guess=np.full(idx.size, aim))
    read = ph1 + np.random.default_rng(99).normal(0.0, 0.05, idx.size)
    rows = sorted((t.ph_read, t.extra_mol_l) for t in st.trim if t.extra_mol_l is not None)
    extra = np.interp(read, [x for x, _ in rows], [y for _, y in rows])
    extra[(read >= aim) if plan.reagent.raises_ph else (read <= aim)] = 0.0
    final = solve_ph(add_dose(waters, r, (st.first_mol_l + extra) * delivered),
                     ph_guess=np.full(idx.size, aim))
    t = plan.target
    assert np.mean((final >= t.ph_min) & (final <= t.ph_max)) == pytest.approx(
        st.p_inside, abs=0.06)
    # Read exactly, the same table would land more often (or as often).
    exact = follow_table(plan, replace(st, reading_sd=0.0), waters, delivered)
    assert np.mean((exact >= t.ph_min) & (exact <= t.ph_max)) >= st.p_inside - 0.02
