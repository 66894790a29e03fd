"""Control design for a continuous stream (issue 13, part 3), against hand
calculations on a water whose titration curve is analytic."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from dosing.io.scenario import build_scenario
from dosing.planning.job import make_plan
from dosing.report.plan_json import sheet_dict
from dosing.planning.control import PUMP_ACCURACY

NO_SPREAD = {"ph": 0, "lab_percent": 0, "solutes_percent": 0, "metals_percent": 0,
             "temperature_c": 0, "amount_percent": 0, "strength_percent": 0, "samples": 200}


def _stream(ph_min=6.0, ph_max=9.0, aim=7.0, flows=(4.0, 10.0, 20.0)):
    lo, q, hi = flows
    return build_scenario({
        "effluent": {"ph": 3.0, "temperature_c": 25.0, "alkalinity_mg_l_as_caco3": 0},
        "flow": {"m3_per_h": q, "m3_per_h_min": lo, "m3_per_h_max": hi},
        "target": {"ph_min": ph_min, "ph_max": ph_max, "ph_aim": aim},
        "reagent": {"id": "caustic-50"}, "model": {"activity": "ideal"},
        "uncertainty": NO_SPREAD}, "stream.toml")


def test_gain_of_an_unbuffered_stream_matches_the_hand_calculation():
    # Strong acid at pH 3 raised to pH 7, ideal solution, 25 °C: the dose is
    # the acid, 1e-3 mol/L, and the buffer intensity at the aim is that of
    # water alone, beta = ln10 ([H+] + [OH-]) with Kw = 1.0e-14 (IAPWS R11-07
    # gives pKw 13.995 at 25 °C). A 1 % change of the rate moves the pH by
    # 0.01 dose / beta.
    plan = make_plan(_stream())
    h = 10 ** -7.0
    oh = 10 ** -13.995 / h
    beta = math.log(10) * (h + oh)
    gain = 0.01 * 1e-3 / beta
    assert plan.control.gain_ph_per_percent == pytest.approx(gain, rel=0.01)
    # The nearer window edge is 1 pH away: the rate must be right to 1/gain %.
    assert plan.control.accuracy_needed == pytest.approx(1.0 / gain * 0.01, rel=0.01)
    # Far finer than a pump: three stages, the last one small.
    assert len(plan.control.stages) == 3 and plan.control.stages[-1].share <= 0.05


def test_turndown_is_the_flow_range_when_the_dose_is_certain():
    plan = make_plan(_stream(flows=(4.0, 10.0, 20.0)))
    c = plan.control
    assert c.turndown == pytest.approx(20.0 / 4.0, rel=1e-9)
    assert c.rate_low_mol_h == pytest.approx(plan.dose_mol_l * 4.0 * 1000, rel=1e-6)


def test_a_wide_window_needs_one_stage():
    plan = make_plan(build_scenario({
        "effluent": {"ph": 4.0, "acidity_mg_l_as_caco3": 1200,
                     "solutes_mmol_l": {"acetate": 20}},
        "flow": {"m3_per_h": 5.0}, "target": {"ph_min": 5.5, "ph_max": 9.5, "ph_aim": 6.5},
        "reagent": {"id": "caustic-25"}}, "wide.toml"))
    c = plan.control
    assert c.accuracy_needed >= PUMP_ACCURACY and len(c.stages) == 1
    assert not c.flow_range_given


def test_batches_have_no_control_design_and_json_has_it_for_flows():
    root = Path(__file__).resolve().parents[1] / "scenarios"
    from dosing.io.scenario import load_scenario
    s = load_scenario(str(root / "food-acetate-stream.toml"))
    d = sheet_dict(s, make_plan(s))["control"]
    assert d["flow_range_given"] and d["turndown"] > 11 / 2.5 * 0.9
    assert {"gain_ph_per_percent", "accuracy_needed", "rate_kg_product_per_h",
            "stages"} <= set(d)
    b = load_scenario(str(root / "plating-rinse-metals.toml"))
    assert make_plan(b).control is None


@pytest.mark.parametrize("flow, says", [({"m3_per_h_min": 0}, "flow.m3_per_h_min"),
                                       ({"m3_per_h_min": 50}, "flow.m3_per_h_min"),
                                       ({"m3_per_h_max": 1}, "flow.m3_per_h_max")])
def test_bad_flow_range_is_refused(flow, says):
    from dosing.errors import ScenarioError
    with pytest.raises(ScenarioError, match=says):
        build_scenario({"effluent": {"ph": 3.0, "alkalinity_mg_l_as_caco3": 0},
                        "flow": {"m3_per_h": 10.0, **flow},
                        "target": {"ph_min": 6, "ph_max": 9},
                        "reagent": {"id": "caustic-50"}}, "f.toml")
