"""Treatment trains: blend, oxidise, dose, separate, each on the water the step before leaves.

Each check is a hand calculation (stated in the test) or a property the
physics demands; the demos are planned whole through the command line.
"""

from __future__ import annotations

import json
import math
import textwrap
from dataclasses import replace

import pytest

from dosing import Batch, Measurements, Target, get_reagent, infer_water
from dosing.chem import system_index
from dosing.io.scenario import load_scenario, parse_scenario
from dosing.planning.blend import mix_streams
from dosing.planning.job import make_plan
from dosing.planning.train import StepSpec, water_of
from dosing.planning.train_run import run_train
from dosing.planning.train_job import make_train
from dosing.report.words import words
from tests.helpers import run_cli

IDEAL = dict(activity="ideal")
SLUDGE = (0.25, 1.2)


def _water(ph, **kw):
    return infer_water(Measurements(ph, 25.0, **(IDEAL | kw)))


def _blend(*streams):
    mix, template, ions = mix_streams(tuple(streams))
    return water_of(mix, template, ions_mg_l=ions)


# ----------------------------------------------------------- blending --
def test_blending_strong_acid_with_strong_base_by_hand():
    # 10 mmol/L HCl (strong balance -0.010 eq/L) and 5 mmol/L NaOH (+0.005),
    # 1 m3 each, ideal: the blend holds 2.5 mmol/L of excess strong acid, so
    # pH = -log10(0.0025) = 2.602 (water's own H+ negligible).
    acid = _water(2.0, alkalinity_mg_l_as_caco3=0)
    base = _water(11.699, alkalinity_mg_l_as_caco3=250.0 * 0.005 * 100.0 / 50.0 / 5.0)
    b = _blend(("acid", acid, 1.0), ("base", base, 1.0))
    assert b.strong_eq_l == pytest.approx(0.5 * (acid.strong_eq_l + base.strong_eq_l))
    assert b.ph == pytest.approx(-math.log10(-0.5 * (acid.strong_eq_l + base.strong_eq_l)),
                                 abs=0.01)


def test_blending_conserves_carbonate_and_the_strong_balance():
    # A carbonate water (alkalinity 200 mg/L as CaCO3 at pH 8.2) with an acid
    # water (pH 2.5), 3 : 1 by volume: totals and strong balance are the
    # volume-weighted means (conserved quantities mix linearly).
    carb = _water(8.2, alkalinity_mg_l_as_caco3=200)
    acid = _water(2.5, alkalinity_mg_l_as_caco3=0)
    b = _blend(("hard", carb, 3.0), ("acid", acid, 1.0))
    c = system_index("carbonate")
    expect_c = 0.75 * carb.totals_mol_l["carbonate"]
    assert b.totals_mol_l["carbonate"] == pytest.approx(expect_c, rel=1e-12)
    assert b.strong_eq_l == pytest.approx(0.75 * carb.strong_eq_l + 0.25 * acid.strong_eq_l)
    assert b.mixture().totals_mol_l[0, c] == pytest.approx(expect_c, rel=1e-12)
    assert 2.5 < b.ph < 8.2


def test_blending_is_order_independent_and_a_stream_with_itself_changes_nothing():
    a = _water(3.1, alkalinity_mg_l_as_caco3=0, metals_mg_l={"zinc": 20})
    b = _water(9.4, alkalinity_mg_l_as_caco3=300)
    one = _blend(("a", a, 2.0), ("b", b, 5.0))
    two = _blend(("b", b, 5.0), ("a", a, 2.0))
    assert one.ph == pytest.approx(two.ph, abs=1e-9)
    same = _blend(("a", a, 1.0), ("a again", a, 3.0))
    assert same.ph == pytest.approx(a.ph, abs=1e-8)


# ---------------------------------------------------------- oxidation --
def test_oxidising_ferrous_iron_releases_two_acid_per_iron():
    # 4 Fe2+ + O2 + 10 H2O -> 4 Fe(OH)3 + 8 H+: 1 mmol/L of Fe(II) oxidised
    # and precipitated releases 2 mmol/L of H+ (worked by hand). At pH 6
    # Fe2+ is free (its hydrolysis *beta1 10^-9.5) and Fe(OH)3 fully formed,
    # so the caustic to pH 6 rises by 2.0 mmol/L.
    w = _water(3.0, alkalinity_mg_l_as_caco3=0, metals_mg_l={"iron_ii": 55.845})
    caustic = get_reagent("caustic-50")
    t = Target(5.8, 6.2, 6.0)
    plain = run_train((StepSpec("dose", reagent=caustic, target=t),), w, Batch(1.0),
                      sludge=SLUDGE)
    oxid = run_train((StepSpec("oxidise"), StepSpec("dose", reagent=caustic, target=t)),
                     w, Batch(1.0), sludge=SLUDGE)
    extra = oxid[1].plan.dose_mol_l - plain[0].plan.dose_mol_l
    assert extra * 1000 == pytest.approx(2.0, rel=0.01)


def test_peroxide_takes_half_a_mole_per_iron():
    # 2 Fe2+ + H2O2 + 2 H+ -> 2 Fe3+ + 2 H2O: 0.5 mol H2O2 per mol Fe (by
    # hand). 1 mmol/L Fe(II) in 1 m3: 0.5 mol, 17.0 g H2O2, 48.6 g of 35 %.
    w = _water(3.0, alkalinity_mg_l_as_caco3=0, metals_mg_l={"iron_ii": 55.845})
    step = StepSpec("oxidise", by="peroxide", reagent=get_reagent("peroxide-35"))
    r = run_train((step,), w, Batch(1.0), sludge=SLUDGE)[0]
    assert r.product.mmol_per_l == pytest.approx(0.5, rel=1e-9)
    assert r.product.kg_product == pytest.approx(0.5 * 34.0147 / 0.35 / 1000, rel=1e-3)
    assert r.water_out.metals_mol_l.get("iron_ii", 0.0) == 0.0


# ---------------------------------------------------------- separation --
def test_separation_saves_the_acid_the_removed_zinc_would_redissolve():
    # Zinc raised to pH 9.5 (Zn(OH)2 forms), then brought down to pH 6.5,
    # where Zn(OH)2 dissolves again taking 2 H+ per Zn (by hand). Removing
    # 98 % of the solid first saves exactly 2 x 0.98 x the solid of acid.
    w = _water(4.0, alkalinity_mg_l_as_caco3=0, metals_mg_l={"zinc": 65.38})
    up = StepSpec("dose", reagent=get_reagent("caustic-50"), target=Target(9.3, 9.7, 9.5))
    down = StepSpec("dose", reagent=get_reagent("hydrochloric-32"),
                    target=Target(6.3, 6.7, 6.5))
    sep = StepSpec("separate", removal=0.98)
    without = run_train((up, down), w, Batch(1.0), sludge=SLUDGE)
    withsep = run_train((up, sep, down), w, Batch(1.0), sludge=SLUDGE)
    solid = withsep[0].plan.solids[0].mmol_per_l / 1000
    saved = without[1].plan.dose_mol_l - withsep[2].plan.dose_mol_l
    assert saved == pytest.approx(2 * 0.98 * solid, rel=0.01)
    # A separation leaves the pH as it was (a neutral solid goes).
    assert withsep[1].ph_out == pytest.approx(withsep[1].ph_in, abs=1e-8)


def test_a_separation_before_any_solid_is_a_note():
    w = _water(4.0, alkalinity_mg_l_as_caco3=0)
    r = run_train((StepSpec("separate"),), w, Batch(1.0), sludge=SLUDGE)[0]
    assert r.findings[0].id == "separate-nothing" and r.removed == ()


# ------------------------------------------------------------ proposal --
def _plating(window=(6.0, 9.0, 7.5)):
    from pathlib import Path
    s = load_scenario(str(Path(__file__).resolve().parents[1] / "scenarios"
                          / "plating-rinse-window69.toml"))
    return replace(s, target=Target(*window))


def test_the_proposed_train_meets_every_cap_and_the_window():
    s = _plating()
    train = make_train(s, make_plan(s, sampled=False))
    assert train is not None and train.proposed
    assert [r.spec.kind for r in train.steps] == ["dose", "separate", "dose"]
    assert train.discharge.met
    # A round trip: the discharged water's pH is the forward solve of its
    # totals (water_of solves it), inside the window, at the aim.
    assert train.discharge.ph == pytest.approx(7.5, abs=1e-6)
    why = words(next(w for w in train.warnings if w.id == "train-proposed"))
    assert "nickel sets this edge" in why and "zinc sets this edge" in why
    assert "Do not discharge" in why


def test_no_train_is_proposed_where_one_dose_does():
    s = _plating((6.0, 10.0, 9.6))
    assert make_train(s, make_plan(s, sampled=False)) is None


def test_iron_ii_without_oxidation_is_warned_with_both_doses():
    from pathlib import Path
    s = load_scenario(str(Path(__file__).resolve().parents[1] / "scenarios"
                          / "pickling-ferrous-rinse.toml"))
    plan = make_plan(s, sampled=False)
    found = next(w for w in plan.warnings if w.id == "ferrous")
    assert found.values["kg_ox"] > found.values["kg"] > 0


# -------------------------------------------------------- whole demos --
@pytest.mark.parametrize("name", ["plating-rinse-window69", "mine-water-train",
                                  "rinse-cleaner-blend", "lime-then-caustic"])
def test_train_demos_plan_with_strict_json_and_the_final_word(name):
    r = run_cli("plan", f"scenarios/{name}.toml", "--json")
    assert r.returncode == 0, r.stderr

    def bad(x):
        raise ValueError(x)
    data = json.loads(r.stdout, parse_constant=bad)
    assert data["steps"] and data["train"]["discharge"]["met"]
    assert any("licensed engineer" in c for c in data["cautions"])
    sheet = run_cli("plan", f"scenarios/{name}.toml")
    assert "TREATMENT TRAIN" in sheet.stdout and "licensed engineer" in sheet.stdout


# ----------------------------------------------------------- bad input --
_BASE = """
[effluent]
ph = 3.0
alkalinity_mg_l_as_caco3 = 0
metals_mg_l = {{ zinc = 20 }}
[batch]
volume_m3 = 5
[target]
ph_min = 6
ph_max = 9
{steps}
"""


@pytest.mark.parametrize("steps, key", [
    ('[[step]]\nkind = "filtrate"\n', "step[1].kind"),
    ('[[step]]\nkind = "dose"\nreagent = "caustic-50"\n[[step]]\nkind = "blend"\n',
     "step[2].kind"),
    ('[[step]]\nkind = "dose"\nreagent = "unobtainium"\n', "step[1].reagent"),
    ('[[step]]\nkind = "dose"\nreagent = "caustic-50"\nph_aim = 9.5\n[[step]]\n'
     'kind = "dose"\nreagent = "caustic-25"\nph_aim = 4\n', "step[2].ph_aim"),
    ('[[step]]\nkind = "dose"\nreagent = "caustic-50"\nremoval = 0.9\n', "step[1].removal"),
], ids=["unknown-kind", "blend-not-first", "unknown-reagent", "readjust-cannot-reach",
        "key-of-another-kind"])
def test_bad_steps_are_one_line(tmp_path, steps, key):
    path = tmp_path / "t.toml"
    path.write_text(_BASE.format(steps=steps))
    r = run_cli("plan", str(path))
    assert r.returncode == 2, r.stdout
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and key in lines[0] and "Traceback" not in r.stderr, r.stderr


def test_a_blend_stream_without_its_volume_is_one_line(tmp_path):
    text = textwrap.dedent("""
        [target]
        ph_min = 6
        ph_max = 9
        [[step]]
        kind = "blend"
        [[step.stream]]
        name = "a"
        volume_m3 = 2
        [step.stream.effluent]
        ph = 3
        [[step.stream]]
        name = "b"
        [step.stream.effluent]
        ph = 11
        [[step]]
        kind = "dose"
        reagent = "caustic-25"
        """)
    path = tmp_path / "b.toml"
    path.write_text(text)
    r = run_cli("plan", str(path))
    assert r.returncode == 2
    assert "step[1].stream[2].volume_m3" in r.stderr and len(r.stderr.strip().splitlines()) == 1


def test_a_train_with_a_reagent_table_is_refused():
    with pytest.raises(Exception) as err:
        parse_scenario(_BASE.format(steps='[reagent]\nid = "caustic-50"\n[[step]]\nkind = '
                                    '"dose"\nreagent = "caustic-50"\n'))
    assert "[reagent]" in str(err.value)


@pytest.mark.parametrize("name", ["mine-water-train", "rinse-cleaner-blend",
                                  "lime-then-caustic"])
def test_train_demos_round_trip_through_the_scenario_writer(name):
    from pathlib import Path
    from dosing.io.scenario import scenario_to_toml
    path = Path(__file__).resolve().parents[1] / "scenarios" / f"{name}.toml"
    s = load_scenario(str(path))
    train = make_train(s)
    fresh = parse_scenario(scenario_to_toml(s.data), str(path))
    kept = parse_scenario(scenario_to_toml(s.data, path.read_text(encoding="utf-8")), str(path))
    for again in (fresh, kept):
        other = make_train(again)
        assert [r.spec.kind for r in other.steps] == [r.spec.kind for r in train.steps]
        assert other.discharge.ph == pytest.approx(train.discharge.ph, abs=1e-9)
    from dosing.report.train_sheet import render_train
    text = render_train(s, train)
    assert "TREATMENT TRAIN" in text
    assert "have the final word on any dose." in " ".join(text.split())


# --------------------------------------------------------------- slurry --
def test_lime_as_a_slurry_doses_the_same_lime_in_litres_of_slurry():
    # A 15 % slurry of hydrated lime: density 1 / (0.15 / 2.24 + 0.85) =
    # 1.091 kg/L (Ca(OH)2 2.24 g/cm3, CRC Handbook, from memory; water 1),
    # and 1 / 0.15 kg of slurry per kg of lime (by hand).
    from dosing.planning.plan import plan_dose
    from dosing.planning.strengths import as_slurry
    lime = get_reagent("lime")
    slurry = as_slurry(lime, 0.15)
    assert slurry.density_kg_l == pytest.approx(1.0 / (0.15 / 2.24 + 0.85), abs=1e-3)
    w = _water(2.8, alkalinity_mg_l_as_caco3=0, solutes_mg_l={"sulfate": 400})
    t = Target(6.0, 9.0, 7.5)
    a = plan_dose(w, lime, t, Batch(10.0)).amounts()
    b = plan_dose(w, slurry, t, Batch(10.0)).amounts()
    assert b.kg_product * 0.15 == pytest.approx(a.kg_product, rel=1e-3)
    assert b.litres_product == pytest.approx(b.kg_product / slurry.density_kg_l, rel=1e-9)


def test_a_slurry_of_caustic_is_refused(tmp_path):
    path = tmp_path / "s.toml"
    path.write_text(_BASE.format(steps='[[step]]\nkind = "dose"\nreagent = "caustic-50"\n'
                                       'slurry_fraction = 0.1\n'))
    r = run_cli("plan", str(path))
    assert r.returncode == 2 and "step[1].slurry_fraction" in r.stderr


def test_sweep_of_a_train_scales_each_dose_step_with_the_size():
    # A dose per litre of water does not depend on the tank: each step's
    # product for 2 x the volume is 2 x (by proportion).
    from pathlib import Path
    from dosing.planning.sweep import train_sweep
    s = load_scenario(str(Path(__file__).resolve().parents[1] / "scenarios"
                          / "lime-then-caustic.toml"))
    grid = train_sweep(make_train(s), (15.0, 30.0))
    small, big = grid.cells
    assert [c.amounts.kg_product * 2 for c in small] == pytest.approx(
        [c.amounts.kg_product for c in big], rel=1e-12)
    assert [p.name.split(":")[0] for p in grid.reagents] == ["step 1", "step 2"]
    r = run_cli("sweep", "scenarios/lime-then-caustic.toml", "--with", "lime")
    assert r.returncode == 2 and "--with" in r.stderr


def test_replay_of_a_train_is_refused_in_one_line(tmp_path):
    # Replay plans one dose per logged row; a train is refused by name and
    # nothing is written.
    data = tmp_path / "log.csv"
    data.write_text("time,flow_m3_per_h,ph\n2026-01-01T00:00,120,3.1\n")
    out = tmp_path / "rows.csv"
    r = run_cli("replay", str(data), "--scenario", "scenarios/mine-water-train.toml",
                "--csv", str(out))
    assert r.returncode == 2 and "[[step]]" in r.stderr and "Traceback" not in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1 and not out.exists()
