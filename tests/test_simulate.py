"""Continuous neutralisation in time (issue 26): the simulator against exact
solutions, a published benchmark, conservation and the static replay."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from dosing.chem.activity import IDEAL
from dosing.chem.columns import N_SYSTEMS
from dosing.chem.mixture import ReagentVector
from dosing.chem import system_index
from dosing.io.scenario import build_scenario, load_scenario
from dosing.planning.job import make_plan
from dosing.planning.reagents import get_reagent
from dosing.planning.simulate import (INVARIANTS, Design, Influent, StageSpec, mixture_of,
                                      run_design)
from dosing.planning.simulate_design import DesignChoice, simulate
from dosing.planning.simulate_influent import synthetic_influent
from tests.helpers import run_cli

FOOD = "scenarios/food-acetate-stream.toml"
#: pKw at 25 °C, IAPWS R11-07 (Bandura & Lvov 2006, J. Phys. Chem. Ref. Data 35:15).
PKW_25 = 13.995


def _influent(strong_eq_l, flow_m3_h, hours=2.0, row_s=60.0, carbonate=0.0):
    n = int(hours * 3600 / row_s)
    state = np.zeros((n, INVARIANTS))
    state[:, N_SYSTEMS] = strong_eq_l
    state[:, N_SYSTEMS + 1] = abs(strong_eq_l)          # Na+ or Cl- with its partner
    state[:, system_index("carbonate")] = carbonate
    return Influent(np.arange(n) * row_s, np.full(n, row_s), np.full(n, flow_m3_h), state,
                    np.full(n, 25.0), np.zeros(n, dtype=bool), IDEAL)


def _fixed_feed(volume_m3, nominal_mol_s, nominal_flow, feedforward=False, kc=0.0):
    """One tank fed a fixed reagent rate (no feedback): the open loop."""
    st = StageSpec(volume_m3=volume_m3, setpoint_ph=7.0, nominal_mol_s=nominal_mol_s,
                   pump_max_mol_s=10 * nominal_mol_s, pump_min_mol_s=0.0,
                   kc_pct_per_ph=kc, ti_s=math.inf, feedforward=feedforward,
                   manual_pct=0.0 if feedforward else 100.0, probe_lag_s=0.0)
    return Design("fixed feed", (st,), nominal_flow)


def _ph_of_strong(s):
    """pH of a strong acid or base solution of net strong charge s [eq/L]
    (charge balance [H+] - Kw/[H+] + s = 0, ideal activity)."""
    kw = 10 ** -PKW_25
    h = (-s + np.sqrt(s * s + 4 * kw)) / 2
    return -np.log10(h)


def test_a_flow_step_approaches_the_new_steady_state_exactly():
    # Strong acid (2 meq/L) into one 5 m3 tank with a fixed caustic feed
    # sized for 1.5 meq/L at 10 m3/h; the flow halves at the start, so the
    # tank moves from acid to alkaline. Exact solution of the invariant
    # balance V dS/dt = Q S_in + u - (Q + u v) S: an exponential approach.
    caustic = get_reagent("caustic-25").vector()
    q1, q2, s_in, vol = 10.0, 5.0, -2e-3, 5.0
    u = 1.5e-3 * q1 * 1000 / 3600                       # mol/s
    run = run_design(_influent(s_in, q2), _fixed_feed(vol, u, q1), caustic, True,
                     (6.0, 9.0), 10.0)
    ql1, ql2, v = q1 / 3.6, q2 / 3.6, caustic.volume_l
    s1 = (ql1 * s_in + u) / (ql1 + u * v)
    s2 = (ql2 * s_in + u) / (ql2 + u * v)
    a = (ql2 + u * v) / (vol * 1000)
    s_t = s2 + (s1 - s2) * np.exp(-a * run.t_s)
    assert run.ph[0] == pytest.approx(_ph_of_strong(s_t), abs=2e-3)
    assert run.ph[0, 0] < 7 < run.ph[0, -1]             # it crossed neutral
    assert np.all(run.rate_mol_s == u)                  # the open loop: a fixed feed


def test_zero_gain_with_feedforward_is_the_ratio_feed_alone():
    caustic = get_reagent("caustic-25").vector()
    inf = _influent(-2e-3, 7.0)
    run = run_design(inf, _fixed_feed(5.0, 1e-3, 10.0, feedforward=True), caustic, True,
                     (6.0, 9.0), 10.0)
    assert run.rate_mol_s[0] == pytest.approx(np.full(run.t_s.size, 1e-3 * 0.7), rel=1e-12)


def test_henson_seborg_benchmark_steady_state():
    # Henson & Seborg (1994, IEEE Trans. Control Syst. Technol. 2:2), from
    # memory: acid 16.6 mL/s of 3 mM HNO3 and buffer 0.55 mL/s of 30 mM
    # NaHCO3 into the tank, base 15.6 mL/s of 3 mM NaOH with 0.05 mM NaHCO3;
    # at these nominal flows the tank settles at pH 7.0.
    q1, q2, q3 = 16.6e-3, 0.55e-3, 15.6e-3              # L/s
    q_in = q1 + q2
    strong = (q1 * -3e-3 + q2 * 3e-2) / q_in            # NO3- against Na+
    carb = q2 * 3e-2 / q_in
    inf = _influent(strong, q_in * 3.6, hours=3.0, carbonate=carb)
    inf.state[:, N_SYSTEMS + 1] = (q1 * 3e-3 + q2 * 3e-2) / q_in
    base = np.zeros(N_SYSTEMS)
    base[system_index("carbonate")] = 5e-5 / 3e-3       # per mol of NaOH
    reagent = ReagentVector(base, 1 + 5e-5 / 3e-3, 0.5, 1 / 3e-3)
    u = q3 * 3e-3
    design = _fixed_feed(2.9e-3, u, q_in * 3.6)         # about 2.9 L, from memory
    run = run_design(inf, design, reagent, True, (6.0, 8.0), 5.0)
    assert run.ph[0, -1] == pytest.approx(7.0, abs=0.05)


def _food():
    s = load_scenario(FOOD)
    return s, make_plan(s, sampled=False)


def test_what_entered_minus_what_left_is_what_the_tanks_hold():
    s, plan = _food()
    inf = synthetic_influent(s, 3.0, seed=4)
    sim = simulate(s, inf, [DesignChoice(2, "tight")], source="test", control=plan.control)
    run = sim.runs[0]
    gained = (run.held_end - run.held_start).sum(axis=0)
    scale = np.abs(run.entered).max()
    assert np.abs(run.entered - run.left - gained).max() <= 1e-9 * scale


def test_a_fast_tight_loop_uses_what_the_static_replay_does():
    # A near-perfect controller (tiny tanks, no probe lag or delay, 2 s
    # steps) doses each row as the static replay would: within 1 % over
    # six hours of made-up disturbances.
    s, plan = _food()
    inf = synthetic_influent(s, 6.0, seed=2)
    choice = DesignChoice(1, "tight", True, residence_min=0.5, probe_lag_s=0.0, delay_s=0.0)
    sim = simulate(s, inf, [choice], source="test", step_s=2.0, control=plan.control)
    assert sim.runs[0].reagent_mol == pytest.approx(sim.static_mol, rel=0.01)
    assert sim.runs[0].outside_s == 0.0


def test_shorter_steps_converge():
    # One design (tuned once), run at ever shorter steps: the discharge pH
    # approaches the fine-step answer, about in proportion to the step.
    from dosing.planning.simulate_design import build_design
    s, plan = _food()
    inf = synthetic_influent(s, 2.0, seed=5)
    mix0 = mixture_of(inf.state[0], inf.temperature_c[0], inf.activity, inf.unknown_pka)
    design = build_design(DesignChoice(1, "tight", False), s, mix0, 1.3, 1.0, plan.control)
    traces = {}
    for step in (30.0, 6.0, 2.0, 1.0):
        run = run_design(inf, design, s.reagent.vector(), True, (6.0, 10.0), step)
        traces[step] = np.interp(np.arange(60, 7200, 60.0), run.t_s, run.ph[0])
    err = {step: np.abs(traces[step] - traces[1.0]).max() for step in (30.0, 6.0, 2.0)}
    assert err[30.0] > err[6.0] > err[2.0]
    assert err[2.0] < 0.05


def test_the_initial_state_is_the_steady_state_at_the_set_point():
    s, plan = _food()
    inf = synthetic_influent(s, 0.5, seed=1)
    mix0 = mixture_of(inf.state[0], inf.temperature_c[0], inf.activity, inf.unknown_pka)
    assert mix0.n == 1
    sim = simulate(s, inf, [DesignChoice(1, "tight")], source="test", control=plan.control)
    # The first minutes run at the nominal flow and pH: the loop holds the aim.
    run = sim.runs[0]
    first = run.t_s < 600
    assert np.abs(run.ph[0][first] - s.target.ph_aim).max() < 0.01


# ---------------------------------------------------------------- command --

def test_simulate_prints_the_comparison_with_the_cautions(tmp_path):
    png = tmp_path / "sim.png"
    r = run_cli("simulate", FOOD, "--hours", "3", "--stages", "1,2", "--tunings",
                "tight,smooth", "--plot", str(png))
    assert r.returncode == 0, r.stderr
    for words in ("1 stage, tight", "2 stages, smooth", "dosed exactly (replay)",
                  "WHAT THE SIMULATION ASSUMES", "licensed engineer"):
        assert words in r.stdout
    assert png.read_bytes()[:4] == b"\x89PNG"


def test_simulate_json_is_strict_and_stable():
    r = run_cli("simulate", FOOD, "--hours", "2", "--stages", "1", "--json",
                "--without-feedforward")
    assert r.returncode == 0, r.stderr
    data = json.loads(r.stdout, parse_constant=lambda c: pytest.fail(f"{c} in JSON"))
    assert [d["name"] for d in data["designs"]] == ["1 stage, tight", "1 stage, smooth",
                                                   "1 stage, tight, no feedforward",
                                                   "1 stage, smooth, no feedforward"]
    for key in ("outside_fraction", "excursions", "worst_excursion", "reagent_kg_product",
                "reagent_vs_static", "stages"):
        assert key in data["designs"][0]
    assert any("licensed engineer" in c for c in data["cautions"])


def test_a_record_with_gaps_is_held_and_said(tmp_path):
    rows = ["timestamp,flow_m3_h,ph"]
    for i in range(120):
        ph = "" if 40 <= i < 45 else "3.6"
        rows.append(f"2026-03-01T{i // 60:02d}:{i % 60:02d}:00,{12 + (i > 60) * 4},{ph}")
    data = tmp_path / "log.csv"
    data.write_text("\n".join(rows) + "\n")
    r = run_cli("simulate", FOOD, "--data", str(data), "--stages", "1", "--tunings", "tight")
    assert r.returncode == 0, r.stderr
    assert "5 held from the row before" in r.stdout


def test_a_pump_that_cannot_keep_up_is_a_result(tmp_path):
    # The influent turns far more acid than the pump is sized for: the
    # discharge leaves the window and the pump sits at its maximum; said,
    # not a crash.
    rows = ["timestamp,flow_m3_h,ph"]
    for i in range(180):
        rows.append(f"2026-03-01T{i // 60:02d}:{i % 60:02d}:00,12,{3.6 if i < 30 else 1.3}")
    data = tmp_path / "log.csv"
    data.write_text("\n".join(rows) + "\n")
    r = run_cli("simulate", FOOD, "--data", str(data), "--stages", "1", "--tunings",
                "tight", "--json")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)["designs"][0]
    assert d["outside_fraction"] > 0.3 and d["stages"][0]["pump_at_max_fraction"] > 0.3


@pytest.mark.parametrize("args, word", [
    (("scenarios/acid-rinse-caustic.toml",), "[flow]"),
    (("scenarios/mine-water-train.toml",), "train"),
    ((FOOD, "--hours", "0"), "--hours"),
    ((FOOD, "--step-s", "0"), "--step-s"),
    ((FOOD, "--stages", "4"), "--stages"),
    ((FOOD, "--tunings", "fast"), "--tunings"),
    ((FOOD, "--residence-min", "0"), "--residence-min"),
    ((FOOD, "--residence-min", "5,x"), "--residence-min"),
    ((FOOD, "--hours", "0.1", "--probe-lag-s", "600"), "--probe-lag-s: the probe"),
    ((FOOD, "--hours", "8000", "--step-s", "1"), "--step-s: the record needs"),
    ((FOOD, "--plot", "out.svg"), ".png"),
])
def test_bad_input_is_one_line(args, word):
    r = run_cli("simulate", *args)
    assert r.returncode == 2 and r.stdout == ""
    assert word in r.stderr and len(r.stderr.strip().splitlines()) == 1


@pytest.mark.parametrize("reagent", ["lime", "lime-slurry-15", "magnesia"])
def test_a_slurry_or_solid_reagent_is_refused_in_one_line(tmp_path, reagent):
    from dosing.io.scenario import scenario_to_toml
    data = dict(load_scenario(FOOD).data)
    data["reagent"] = {"id": reagent}
    build_scenario(data, "check")                       # a valid scenario otherwise
    path = tmp_path / "slurry.toml"
    path.write_text(scenario_to_toml(data))
    r = run_cli("simulate", str(path))
    assert r.returncode == 2 and "slurry or a solid" in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1


@pytest.mark.parametrize("feedforward, step, tol", [(True, 10.0, 0.002), (False, 2.0, 0.004)])
def test_the_exact_step_loop_agrees_with_scipy_solve_ivp(feedforward, step, tol):
    # The same model (tank balance, probe lag, PI integral, pH solved by the
    # engine) integrated by scipy's LSODA (solve_ivp, row by row): the
    # simulator's loop, which holds the pump rate over each step, agrees to
    # within a few thousandths of a pH over two hours with a flow step and
    # a pH step in the influent.
    from dosing.planning.simulate_design import build_design
    from tests.sim_reference import no_delay, reference_ph
    s, plan = _food()
    inf = synthetic_influent(s, 2.0, seed=5)
    assert np.ptp(inf.flow_m3_h) > 0 and np.ptp(inf.state[:, N_SYSTEMS]) > 0
    mix0 = mixture_of(inf.state[0], inf.temperature_c[0], inf.activity, inf.unknown_pka)
    design = no_delay(build_design(DesignChoice(1, "tight", feedforward, delay_s=0.0), s,
                                   mix0, 1.3, step, plan.control))
    t_ref, ph_ref = reference_ph(inf, design, s.reagent.vector(), True)
    run = run_design(inf, design, s.reagent.vector(), True, (6.0, 10.0), step)
    assert np.abs(np.interp(t_ref, run.t_s, run.ph[0]) - ph_ref).max() < tol
    assert np.ptp(ph_ref) > 0.02                      # the loop had something to do


def test_designs_run_side_by_side_as_each_alone():
    # Every tank of every design is solved in one call per step; each
    # design's run is the one it has alone.
    from dosing.planning.simulate import run_designs
    from dosing.planning.simulate_design import build_design
    s, plan = _food()
    inf = synthetic_influent(s, 1.5, seed=3)
    mix0 = mixture_of(inf.state[0], inf.temperature_c[0], inf.activity, inf.unknown_pka)
    designs = [build_design(DesignChoice(n, t, ff), s, mix0, 1.3, 10.0, plan.control)
               for n, t, ff in ((1, "tight", True), (2, "smooth", True), (1, "tight", False))]
    together = run_designs(inf, designs, s.reagent.vector(), True, (6.0, 10.0), 10.0)
    for design, run in zip(designs, together):
        alone = run_design(inf, design, s.reagent.vector(), True, (6.0, 10.0), 10.0)
        assert run.ph == pytest.approx(alone.ph, abs=1e-9)
        assert run.reagent_mol == pytest.approx(alone.reagent_mol, rel=1e-9)


def test_a_drifting_probe_leads_the_loop_off_by_its_drift():
    # A steady influent and a probe that drifts 0.4 pH an hour: the loop
    # holds the reading at the set-point, so the tank ends about 0.4 pH per
    # hour below it (a ramp the PI loop follows with a small lag).
    from dosing.planning.simulate_design import build_design
    s, plan = _food()
    inf = synthetic_influent(s, 3.0, seed=1)
    inf = Influent(inf.t_s, inf.dt_s, np.full_like(inf.flow_m3_h, inf.flow_m3_h[0]),
                   np.repeat(inf.state[:1], inf.t_s.size, axis=0), inf.temperature_c,
                   inf.held, inf.activity, inf.unknown_pka)
    mix0 = mixture_of(inf.state[0], inf.temperature_c[0], inf.activity, inf.unknown_pka)
    choice = DesignChoice(1, "tight", probe_drift_ph_per_h=0.4, probe_noise_ph=0.01)
    design = build_design(choice, s, mix0, 1.0, 10.0, plan.control)
    run = run_design(inf, design, s.reagent.vector(), True, (6.0, 10.0), 10.0)
    assert run.ph[0, -1] == pytest.approx(s.target.ph_aim - 0.4 * 3.0, abs=0.05)
    # The reading stays near the set-point: a PI loop follows a ramp with a
    # constant lag, here a few hundredths above it as the drift rises.
    offset = (run.measured_ph[0][-60:] - s.target.ph_aim).mean()
    assert 0.0 < offset < 0.05
    again = run_design(inf, design, s.reagent.vector(), True, (6.0, 10.0), 10.0)
    assert np.array_equal(again.measured_ph, run.measured_ph)       # seeded noise


DISTURBED = """title = "Dye flume with a morning surge"
[effluent]
ph = 10.4
temperature_c = 32
alkalinity_mg_l_as_caco3 = 620
[flow]
m3_per_h = 22
[target]
ph_min = 6
ph_max = 9
ph_aim = 7.5
[reagent]
id = "hydrochloric-32"

[[disturbance]]
at_h = 1.0
flow_m3_h = 33      # the morning surge
ramp_h = 0.25

[[disturbance]]
at_h = 2.0
ph = 11.2           # a caustic rinse reaches the flume
"""


def test_the_scenario_s_steps_and_ramps_are_the_influent():
    from dosing.io.scenario import parse_scenario
    from dosing.planning.simulate_influent import scheduled_influent
    s = parse_scenario(DISTURBED)
    inf = scheduled_influent(s, 3.0)
    t_h = inf.t_s / 3600.0

    def at(hours, series):
        return series[np.argmin(np.abs(t_h - hours))]
    assert at(0.5, inf.flow_m3_h) == 22.0
    assert at(1.1, inf.flow_m3_h) == pytest.approx(26.4)          # 40 % up the ramp
    assert at(1.5, inf.flow_m3_h) == 33.0
    before, after = at(1.9, inf.state[:, N_SYSTEMS]), at(2.1, inf.state[:, N_SYSTEMS])
    assert after > before                       # pH 11.2: more strong base in the water
    assert make_plan(s, sampled=False).dose_mol_l > 0               # the plan ignores them


def test_simulate_runs_the_scenario_s_disturbances(tmp_path):
    path = tmp_path / "surge.toml"
    path.write_text(DISTURBED)
    r = run_cli("simulate", str(path), "--hours", "3", "--stages", "1", "--tunings", "tight")
    assert r.returncode == 0, r.stderr
    assert "the scenario's 2 disturbances" in r.stdout


def test_the_disturbance_tables_survive_a_save():
    from dosing.io.scenario import parse_toml, scenario_to_toml
    data = parse_toml(DISTURBED, "x")
    assert scenario_to_toml(data, DISTURBED) == DISTURBED          # comments and all
    data["disturbance"][1]["ph"] = 11.5
    again = parse_toml(scenario_to_toml(data, DISTURBED), "x")
    assert again["disturbance"][1]["ph"] == 11.5 and again["disturbance"][0]["ramp_h"] == 0.25


@pytest.mark.parametrize("table, word", [
    ("at_h = 1\nspeed = 3", "disturbance[1].speed"),
    ("flow_m3_h = 30", "disturbance[1].at_h"),
    ("at_h = 1", "give flow_m3_h, ph or both"),
    ("at_h = 1\nph = 15", "disturbance[1].ph"),
    ("at_h = -1\nph = 5", "disturbance[1].at_h"),
])
def test_a_bad_disturbance_is_one_line(tmp_path, table, word):
    path = tmp_path / "bad.toml"
    path.write_text(DISTURBED.split("[[disturbance]]")[0] + "[[disturbance]]\n" + table + "\n")
    r = run_cli("simulate", str(path), "--hours", "1")
    assert r.returncode == 2 and word in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1


def test_tank_sizes_are_compared_in_one_run(tmp_path):
    # The caustic rinse reaching the flume at 2 h: a 5-minute tank lets the
    # discharge out of the window, a 20-minute one holds it (its volume
    # evens the step out while the loop catches up).
    path = tmp_path / "surge.toml"
    path.write_text(DISTURBED)
    r = run_cli("simulate", str(path), "--hours", "3", "--stages", "1", "--tunings", "tight",
                "--residence-min", "5,20", "--json")
    assert r.returncode == 0, r.stderr
    small, big = json.loads(r.stdout)["designs"]
    assert (small["name"], big["name"]) == ("1 stage, tight, 5 min", "1 stage, tight, 20 min")
    assert big["stages"][0]["volume_m3"] == pytest.approx(4 * small["stages"][0]["volume_m3"])
    assert small["outside_fraction"] > 0 and big["outside_fraction"] == 0
    assert big["stages"][0]["ph_max"] < small["stages"][0]["ph_max"]


def test_a_flow_plan_can_show_its_control_design_simulated(tmp_path):
    path = tmp_path / "surge.toml"
    path.write_text(DISTURBED)
    r = run_cli("plan", str(path), "--simulate-hours", "3")
    assert r.returncode == 0, r.stderr
    text = r.stdout
    assert text.index("SIMULATED CONTROL") < text.index("CAUTIONS")   # cautions stay last
    j = run_cli("plan", str(path), "--simulate-hours", "3", "--json")
    sim = json.loads(j.stdout)["simulated_control"]
    d = sim["designs"][0]
    assert f"outside the window {d['outside_fraction']:.2%}" in text
    assert sim["source"] == "the scenario's 2 disturbances"
    r = run_cli("plan", "scenarios/acid-rinse-caustic.toml", "--simulate-hours", "3")
    assert r.returncode == 2 and "--simulate-hours" in r.stderr and r.stdout == ""
