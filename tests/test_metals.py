"""Metal-bearing effluents: hydrolysis, hydroxide solids, sludge and caps.

Each check names its source. Where the expected value is a hand calculation
from the catalogue's own constants, the constants' sources are in
``dosing/metals.py`` (all from memory) and the check guards the engine's
arithmetic, not the constants.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from dosing.report.words import texts
from dosing.chem.activity import DAVIES, IDEAL
from dosing.planning.measurements import Measurements
from dosing import Batch, Target, get_reagent, infer_water, plan_dose
from dosing.chem import (Mixture, add_dose, constants_at, dose_to_ph, solve_ph,
                                speciate, system_index)
from dosing.chem.metals import METALS, get_metal
from dosing.chem.columns import COLUMN_IDS
from dosing.planning.reagents import COMPOUNDS
from dosing.planning.solids import dissolved_vs_ph
from tests.helpers import run_cli, totals


def _min_ph(metal_id: str) -> float:
    grid = np.arange(4.0, 13.5, 0.01)
    water = Mixture.build(totals(**{metal_id: 1.0}), 0.0, 0.0, 25.0, math.nan, IDEAL)
    curve = dissolved_vs_ph(water, 0.0, grid).mg_l[metal_id]
    return float(grid[np.argmin(curve)])


# Hydroxide solubility minimum, common practice ranges as read off published
# solubility diagrams (e.g. Stumm & Morgan 1996, Aquatic Chemistry ch. 6;
# from memory), each widened by 0.5 pH for the spread between compilations.
MINIMA = {"iron_iii": (7.0, 9.0), "aluminium": (6.0, 7.0), "zinc": (9.0, 10.0),
          "copper": (8.5, 10.0), "nickel": (10.0, 11.0), "cadmium": (10.5, 11.5),
          "lead": (9.0, 10.0), "chromium_iii": (7.5, 8.5), "iron_ii": (9.5, 10.5)}


@pytest.mark.parametrize("metal_id, band", MINIMA.items(), ids=list(MINIMA))
def test_hydroxide_solubility_minimum_ph(metal_id, band):
    lo, hi = band
    assert lo - 0.5 <= _min_ph(metal_id) <= hi + 0.5


def test_ferric_iron_takes_three_hydroxide_per_iron():
    # Worked by hand: 1 mmol/L of Fe(III) taken from pH 0.5, where it is free
    # Fe3+ but for FeOH2+ (*beta1 = 10^-2.19: mean charge 2.980), to pH 8,
    # where Fe(OH)3 holds it all, needs M x 2.980 mmol/L more caustic than
    # the same acid without iron (ideal solution).
    args = dict(activity="ideal", alkalinity_mg_l_as_caco3=0)
    bare = infer_water(Measurements(0.5, 25.0, **args))
    iron = infer_water(Measurements(0.5, 25.0, metals_mg_l={"iron_iii": 55.845}, **args))
    r, t = get_reagent("caustic-50"), Target(7.5, 8.5, 8.0)
    extra = plan_dose(iron, r, t, Batch(1)).dose_mol_l - plan_dose(bare, r, t, Batch(1)).dose_mol_l
    k1 = 10 ** -2.19 / 10 ** -0.5
    k2 = 10 ** -5.67 / 10 ** -1.0
    q = (3 + 2 * k1 + 1 * k2) / (1 + k1 + k2)
    assert extra * 1000 == pytest.approx(q, rel=2e-3)
    assert extra * 1000 == pytest.approx(3.0, rel=0.01)


def test_mine_water_acidity_matches_the_calculated_acidity():
    # Calculated acidity (Hedin et al. 1994; Kirby & Cravotta 2005, Appl.
    # Geochem. 20, "Net alkalinity and net acidity"; formula from memory):
    # 50 (2 Fe2/55.85 + 3 Fe3/55.85 + 3 Al/26.98 + 1000 10^-pH), mg/L as
    # CaCO3: the base to pH 8.3 with the iron oxidised. A ferrous water at
    # pH 3 (Fe2+ is a free ion there, so the formula holds exactly) against
    # the planner's caustic dose to pH 8.3 with ferrous iron aerated first.
    fe2, ph = 50.0, 3.0
    calc = 50 * (2 * fe2 / 55.85 + 1000 * 10 ** -ph)
    w = infer_water(Measurements(ph, 25.0, activity="ideal", alkalinity_mg_l_as_caco3=0,
                    metals_mg_l={"iron_ii": fe2}, oxidise_ferrous=True))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(8.0, 8.6, 8.3), Batch(1))
    assert plan.dose_mol_l * 1000 * 50.04 == pytest.approx(calc, rel=0.01)


def test_residual_zinc_by_hand():
    # Dissolved zinc with amorphous Zn(OH)2 present, by hand from the
    # catalogue constants (ideal): Zn_T = *Ks0 {H}^2 (1 + sum *beta_j / {H}^j).
    zn = get_metal("zinc")
    w = infer_water(Measurements(3.0, 25.0, activity="ideal", alkalinity_mg_l_as_caco3=0,
                    metals_mg_l={"zinc": 20}))
    r = get_reagent("caustic-50")
    for ph in (9.0, 9.5, 10.5):
        plan = plan_dose(w, r, Target(ph - 0.3, ph + 0.3, ph), Batch(1))
        h = 10 ** -ph
        hand = 10 ** zn.log_ks0 * h ** 2 * (1 + sum(10 ** b / h ** (j + 1)
                                                    for j, b in enumerate(zn.log_beta)))
        assert plan.metals_after_mg_l["zinc"] == pytest.approx(hand * 65.38e3, rel=2e-3)
    # Below saturation nothing precipitates: all 20 mg/L stay dissolved,
    # diluted only by the product's own volume.
    plan = plan_dose(w, r, Target(6.5, 7.5, 7.0), Batch(1))
    f = 1 / (1 + plan.dose_mol_l * r.litres_product_per_mol)
    assert plan.metals_after_mg_l["zinc"] == pytest.approx(20.0 * f, rel=1e-9)
    assert not plan.solids


def test_brucite_ceiling_of_magnesia_overdose():
    # Brucite-saturated pure water, ideal, by hand: 2 *Ks0 {H}^2 = Kw/{H},
    # so pH = (log *Ks0 + log 2 + pKw)/3 = (16.84 + 0.301 + 13.995)/3 = 10.38
    # (MgOH+ neglected). A huge overdose of magnesia gets no further.
    mix = Mixture.build(totals(), 0.0, 0.0, 25.0, math.nan, IDEAL)
    ph = float(solve_ph(add_dose(mix, COMPOUNDS["Mg(OH)2"].vector(0.0), 1.0))[0])
    pkw = -math.log10(constants_at(25.0).kw[0])
    assert ph == pytest.approx((16.84 + math.log10(2) + pkw) / 3, abs=0.01)
    w = infer_water(Measurements(2.5, 25.0, alkalinity_mg_l_as_caco3=0))
    plan = plan_dose(w, get_reagent("magnesia"), Target(6.5, 11.0, 8.0), Batch(1))
    assert plan.ph_ceiling < 10.5
    assert plan.band_mol_l[1] is None       # overdosing cannot leave the window


def test_gypsum_formed_by_hand():
    # Gypsum log Ksp -4.58 (Langmuir 1997, from memory) and the CaSO4° pair,
    # log K 2.30 (Nordstrom et al. 1990, from memory). Ideal: with gypsum
    # present Ca2+ x SO4 2- = Ksp, so the pair holds P = K_pair Ksp; the free
    # ions crystallise x until (a - x - P)(b - x - P) = Ksp.
    w = infer_water(Measurements(2.5, 25.0, activity="ideal", alkalinity_mg_l_as_caco3=0,
                    solutes_mmol_l={"sulfate": 40.0}, ions_mg_l={"calcium": 400}))
    plan = plan_dose(w, get_reagent("lime"), Target(6.5, 8.5, 7.5), Batch(10))
    ca = 400 / 40.078 / 1000 + plan.dose_mol_l
    so4 = 0.040 / (1 + 10 ** (1.99 - 7.5))
    k = 10 ** -4.58
    pair = 10 ** 2.30 * k
    x = 0.5 * ((ca + so4 - 2 * pair) - math.sqrt((ca - so4) ** 2 + 4 * k))
    gyp = {s.id: s for s in plan.solids}["gypsum"]
    assert gyp.mmol_per_l == pytest.approx(x * 1000, rel=0.01)
    assert gyp.mg_per_l == pytest.approx(x * 172.17e3, rel=0.01)


@st.composite
def metal_waters(draw):
    tot = totals()
    for m in draw(st.lists(st.sampled_from([m.id for m in METALS]), min_size=1,
                           max_size=3, unique=True)):
        tot[system_index(m)] = draw(st.floats(1e-5, 3e-3))
    tot[system_index("sulfate")] = draw(st.floats(0.0, 0.02))
    strong = draw(st.floats(-0.03, 0.0))
    return Mixture.build(tot, strong, 0.5 * abs(strong), draw(st.floats(5.0, 45.0)),
                         math.nan, draw(st.sampled_from([IDEAL, DAVIES])))


@settings(max_examples=60, deadline=None)
@given(mix=metal_waters(), target=st.floats(6.0, 11.0))
def test_dose_then_forward_ph_round_trip_with_solids(mix, target):
    dose, grip = dose_to_ph(mix, COMPOUNDS["NaOH"].vector(0.0), target)
    if not (np.isfinite(dose[0]) and dose[0] > 0):
        return
    ph = solve_ph(add_dose(mix, COMPOUNDS["NaOH"].vector(0.0), dose))
    assert ph[0] == pytest.approx(target, abs=1e-6)
    sp = speciate(add_dose(mix, COMPOUNDS["NaOH"].vector(0.0), dose), ph)
    assert abs(sp.charge_residual_eq_l[0]) < 1e-10
    assert np.all(sp.solids_mol_l >= 0)


def test_supersaturated_sample_is_said():
    w = infer_water(Measurements(8.0, 25.0, alkalinity_mg_l_as_caco3=100, metals_mg_l={"iron_iii": 5}))
    assert any("above its hydroxide's solubility" in n for n in texts(w.notes))


def test_acidity_with_metals_leaves_out_the_metal_acidity():
    # The hot-peroxide acidity (Standard Methods 2310) of a ferrous water
    # counts 2 eq per Fe: an acidity equal to the calculated one leaves no
    # room for carbonate; a larger one is carbonate (CO2) acidity.
    fe2, ph = 50.0, 3.0
    calc = 50.04 * (2 * fe2 / 55.845 + 1000 * 10 ** -ph)
    w = infer_water(Measurements(ph, 25.0, activity="ideal", acidity_mg_l_as_caco3=calc + 50.04,
                    metals_mg_l={"iron_ii": fe2}))
    assert w.carbonate_mol_l * 1000 == pytest.approx(1.0, rel=0.02)
    with pytest.raises(ValueError, match="the metals"):
        infer_water(Measurements(ph, 25.0, activity="ideal", acidity_mg_l_as_caco3=0.5 * calc,
                    metals_mg_l={"iron_ii": fe2}))


DEMOS = ["lime-acid-batch", "plating-rinse-metals", "pickling-ferrous-rinse",
         "alum-rinse", "magnesia-acid-rinse"]


@pytest.mark.parametrize("name", DEMOS)
def test_metal_demos_plan_with_their_metals(name):
    import json
    r = run_cli("plan", f"scenarios/{name}.toml", "--json")
    assert r.returncode == 0, r.stderr
    data = json.loads(r.stdout)
    assert data["solids"], "a metal water forms solids"
    assert data["metals_after_mg_l"]
    assert all({"id", "formula", "mg_per_l"} <= set(s) for s in data["solids"])
    assert data["sludge"]["dry_kg"] > 0
    assert any("final word" in c for c in data["cautions"])


def test_ferrous_iron_needs_far_more_base_than_the_ph_suggests():
    # Issue 16's pickling rinse: pH 4.5 with 120 mg/L Fe2+ needs tens of
    # times the caustic the same water without iron needs to reach pH 8.8.
    args = dict(alkalinity_mg_l_as_caco3=0, solutes_mg_l={"sulfate": 480})
    r, t = get_reagent("caustic-50"), Target(8.0, 9.5, 8.8)
    bare = plan_dose(infer_water(Measurements(4.5, 20.0, **args)), r, t, Batch(12)).dose_mol_l
    iron = plan_dose(infer_water(Measurements(4.5, 20.0, metals_mg_l={"iron_ii": 120}, **args)),
                     r, t, Batch(12)).dose_mol_l
    assert iron / bare > 20


BAD = [
    ("metals_mg_l = { unobtainium = 3 }", "effluent.metals_mg_l.unobtainium", "unknown metal"),
    ("metals_mg_l = { zinc = -3 }", "effluent.metals_mg_l.zinc", "too low"),
    ("metals_mg_l = { zinc = nan }", "effluent.metals_mg_l.zinc", "finite"),
    ("oxidise_ferrous = true", "effluent.oxidise_ferrous", "no ferrous iron"),
]


@pytest.mark.parametrize("line, key, says", BAD, ids=[b[1] + b[2] for b in BAD])
def test_bad_metal_input_one_line_exit_2(tmp_path, line, key, says):
    f = tmp_path / "bad.toml"
    f.write_text(f"[effluent]\nph = 3.0\nalkalinity_mg_l_as_caco3 = 0\n{line}\n"
                 "[batch]\nvolume_m3 = 5\n[target]\nph_min = 6\nph_max = 9\n"
                 "[reagent]\nid = \"caustic-50\"\n")
    r = run_cli("plan", str(f))
    assert r.returncode == 2 and "Traceback" not in r.stderr
    line_out = r.stderr.strip()
    assert len(line_out.splitlines()) == 1
    assert str(f) in line_out and key in line_out and says in line_out


def test_metal_cap_without_the_metal_is_refused(tmp_path):
    f = tmp_path / "cap.toml"
    f.write_text("[effluent]\nph = 3.0\nalkalinity_mg_l_as_caco3 = 0\n"
                 "metals_mg_l = { zinc = 5 }\n[batch]\nvolume_m3 = 5\n"
                 "[target]\nph_min = 6\nph_max = 9\n[reagent]\nid = \"caustic-50\"\n"
                 "[permit]\nnickel_mg_l = 0.5\n")
    r = run_cli("plan", str(f))
    assert r.returncode == 2
    assert "permit.nickel_mg_l" in r.stderr and "gives no nickel" in r.stderr


def test_caps_that_miss_the_window_are_said():
    # Nickel needs pH above about 9 to fall below 0.1 mg/L: with a 6-8.5
    # window the two ranges do not overlap.
    w = infer_water(Measurements(3.0, 25.0, alkalinity_mg_l_as_caco3=0, metals_mg_l={"nickel": 10}))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(6.0, 8.5, 7.5), Batch(1),
                     permit={"nickel_mg_l": 0.1})
    assert plan.cap_window.overlap is None
    assert any("does not overlap" in m for m in texts(plan.warnings))
    assert any(c.id == "permit-nickel_mg_l" and c.level == "danger" for c in plan.checks)


def test_shift_log_records_solids_and_metals(tmp_path):
    db = tmp_path / "log.sqlite"
    r = run_cli("log", "add", "scenarios/plating-rinse-metals.toml", "--operator", "A. Test",
                "--db", str(db))
    assert r.returncode == 0, r.stderr
    assert "solid: Zn(OH)2" in r.stdout and "metals left: zinc" in r.stdout
    assert "final word" in r.stdout


def _oh_and_charge(formula: str) -> tuple[int, int]:
    """(OH count, charge) of a hydroxo complex written as in the catalogue:
    ``MnOH+``, ``Mn(OH)3-``, ``Zn(OH)4 2-``, ``Fe(OH)3`` (neutral)."""
    import re
    m = re.fullmatch(r"[A-Z][a-z]?(?:OH|\(OH\)(\d))(?: ?(\d)?([+-]))?", formula)
    assert m, formula
    oh = int(m.group(1) or 1)
    sign = {"+": 1, "-": -1, None: 0}[m.group(3)]
    return oh, sign * int(m.group(2) or 1) if sign else 0


@pytest.mark.parametrize("metal", METALS, ids=lambda m: m.id)
def test_each_hydrolysis_constant_sits_in_the_row_of_its_species(metal):
    # Me(z+) + j H2O = Me(OH)j(z-j) + j H+: the j-th cumulative constant
    # belongs to the complex with j OH and charge z - j (stoichiometry). A
    # constant of Mn(OH)3- once sat in the second row, read as log *beta2.
    assert len(metal.species) == len(metal.log_beta)
    for j, formula in enumerate(metal.species, start=1):
        assert _oh_and_charge(formula) == (j, metal.charge - j), formula
    # Each further OH is harder to add than the last on average: the
    # cumulative constants fall (every compilation agrees on the sign).
    assert all(b < a for a, b in zip((0.0,) + metal.log_beta, metal.log_beta))


def test_manganese_has_its_neutral_hydroxo_complex():
    # Baes & Mesmer (1976), Mn(II) hydrolysis: log *beta2 of Mn(OH)2° about
    # -22.2 and log *beta3 of Mn(OH)3- about -34.8 (both from memory).
    mn = get_metal("manganese")
    assert mn.species[1] == "Mn(OH)2" and mn.log_beta[1] == pytest.approx(-22.2, abs=0.3)
    assert mn.species[2] == "Mn(OH)3-" and mn.log_beta[2] == pytest.approx(-34.8, abs=0.3)


def test_ideal_activity_is_warned_where_it_decides_the_solids(tmp_path):
    # At I = 0.06 mol/L the Davies equation (Davies 1962) puts log gamma of a
    # divalent ion near -0.35, so Ca2+ and SO4 2- activities are each about
    # 45 % of their concentrations: gypsum saturation moves by a factor of
    # about five and the gypsum formed with it. Ideal activity must say so.
    from pathlib import Path
    root = Path(__file__).resolve().parents[1] / "scenarios"
    text = (root / "lime-acid-batch.toml").read_text()
    ideal = tmp_path / "ideal.toml"
    ideal.write_text(text.replace('activity = "davies"', 'activity = "ideal"'))
    r = run_cli("plan", str(ideal), "--json")
    assert r.returncode == 0, r.stderr
    import json
    warned = [w for w in json.loads(r.stdout)["warnings"] if "ideal activity decides" in w]
    assert len(warned) == 1 and "CaSO4" in warned[0]
    r = run_cli("plan", str(root / "lime-acid-batch.toml"), "--json")
    assert not [w for w in json.loads(r.stdout)["warnings"] if "ideal activity" in w]
    dilute = tmp_path / "dilute.toml"
    dilute.write_text((root / "acid-rinse-caustic.toml").read_text().replace(
        'activity = "davies"', 'activity = "ideal"'))
    r = run_cli("plan", str(dilute), "--json")
    assert r.returncode == 0, r.stderr
    assert not [w for w in json.loads(r.stdout)["warnings"] if "ideal activity" in w]


def test_a_subnormal_total_is_no_total():
    # Found by the round-trip test above: a total of 5e-324 mol/L (the
    # smallest float) scaled a mass balance by infinity in the compiled core.
    # Such a total is nothing; the water plans as if it were absent.
    tot = np.zeros(len(COLUMN_IDS))
    tot[2], tot[25], tot[26], tot[35] = 4.940656e-324, 1.953125e-3, 1.953125e-3, 3e-3
    none = tot.copy()
    none[2] = 0.0
    r = COMPOUNDS["NaOH"].vector(0.0)
    for target in (6.0, 11.0):
        d, _ = dose_to_ph(Mixture.build(tot, 0.0, 0.0, 40.0, math.nan, IDEAL), r, target)
        d0, _ = dose_to_ph(Mixture.build(none, 0.0, 0.0, 40.0, math.nan, IDEAL), r, target)
        assert d[0] == pytest.approx(d0[0], rel=1e-9, abs=1e-15)
