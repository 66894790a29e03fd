"""Metals held by ligands on the plan: named, with what it means for the caps.

The cases are those of the speciation issue (a copper etch rinse with
ammonia; a chelated electroless rinse); each figure checked against a hand
calculation lives in tests/test_speciation_core.py, here the plan says it.
"""

from __future__ import annotations

import json
import textwrap

import pytest

from dosing import Batch, Measurements, Target, get_reagent, infer_water, plan_dose
from dosing.errors import InputError
from dosing.report.words import words
from tests.helpers import run_cli


def _ids(plan):
    return {f.id: f for f in plan.warnings}


def test_copper_with_ammonia_is_named_and_left_far_above_the_hydroxide_figure():
    # 50 mg/L Cu, 200 mg/L NH3-N, caustic to pH 9: the hydroxide-only model
    # says 0.002 mg/L copper left; with the ammines (Smith & Martell, from
    # memory) it is 50 to 2,000 times that (the speciation issue's check).
    w = infer_water(Measurements(3.0, 20.0, alkalinity_mg_l_as_caco3=0,
                                 solutes_mg_l={"ammonia": 200}, metals_mg_l={"copper": 50}))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(8.5, 9.5, 9.0), Batch(10.0),
                     permit={"copper_mg_l": 0.05})
    assert 0.002 * 50 < plan.metals_after_mg_l["copper"] < 0.002 * 2000
    held = _ids(plan)["ligand-copper"]
    assert held.level == "warning"                      # above the 0.05 mg/L cap
    text = words(held, "si")
    assert "copper stays dissolved as its ammonia complexes" in text
    assert "cannot meet the cap" in text and "ammonia" in text.split("cap")[-1]


def test_a_chelated_metal_stays_dissolved_and_makes_no_sludge():
    # Nickel with equimolar EDTA at pH 9: the chelate holds it (log K 18.6,
    # Smith & Martell, from memory); no nickel hydroxide forms.
    w = infer_water(Measurements(3.8, 24.0, alkalinity_mg_l_as_caco3=0,
                                 solutes_mmol_l={"edta": 0.25},
                                 metals_mg_l={"nickel": 14.0}))
    plan = plan_dose(w, get_reagent("caustic-25"), Target(6.0, 9.5, 9.0), Batch(8.0),
                     permit={"nickel_mg_l": 0.5})
    assert plan.metals_after_mg_l["nickel"] == pytest.approx(14.0, rel=0.01)
    assert not any(s.id == "nickel_hydroxide" for s in plan.solids)
    found = _ids(plan)
    assert "EDTA" in words(found["ligand-nickel"], "si")
    assert "limit-chelant" in found


def test_no_ligand_no_ligand_finding():
    w = infer_water(Measurements(3.4, 22.0, alkalinity_mg_l_as_caco3=0,
                                 metals_mg_l={"zinc": 35}))
    plan = plan_dose(w, get_reagent("caustic-25"), Target(6.0, 10.0, 9.6), Batch(25.0))
    assert not any(f.id.startswith("ligand-") for f in plan.warnings)


def test_the_cap_window_counts_the_ligands():
    # The copper-ammonia water: the pH range meeting a 0.2 mg/L cap is
    # narrower with the ammines than the hydroxide alone would make it (at
    # high pH NH3 holds copper), so its top edge sits below pH 13.
    w = infer_water(Measurements(3.0, 20.0, alkalinity_mg_l_as_caco3=0,
                                 solutes_mg_l={"ammonia": 200}, metals_mg_l={"copper": 50}))
    plan = plan_dose(w, get_reagent("caustic-50"), Target(6.0, 9.5, 9.0), Batch(10.0),
                     permit={"copper_mg_l": 0.2})
    lo, hi = plan.cap_window.ph_range
    held = plan.dissolved.mg_l["copper"]
    at = lambda ph: float(held[abs(plan.dissolved.ph - ph).argmin()])  # noqa: E731
    assert at(hi) <= 0.2 and at(hi + 0.05) > 0.2
    assert hi < 13.0


# ---------------------------------------------------------- sulfide --
def test_sulfide_products_are_in_the_catalogue_with_their_gas_cautions():
    for rid in ("hydrosulfide-45", "sulfide-60"):
        r = get_reagent(rid)
        assert "sulfide" in r.compound.adds
        assert any("hydrogen sulfide" in c for c in r.cautions)


def test_sulfide_dosed_into_acid_water_is_a_danger():
    w = infer_water(Measurements(4.0, 20.0, alkalinity_mg_l_as_caco3=0,
                                 metals_mg_l={"zinc": 20}))
    plan = plan_dose(w, get_reagent("hydrosulfide-45"), Target(8.0, 10.0, 9.0), Batch(5.0))
    check = next(c for c in plan.checks if c.id == "sulfide-dose")
    assert check.level == "danger"
    assert "hydrogen sulfide" in words(check, "si")
    # The sulfide takes the zinc down as ZnS (log K -9.05 with H+, from memory).
    assert any(s.id == "zinc_sulfide" for s in plan.solids)


# ------------------------------------------------------- bad input --
def _scenario(tmp_path, effluent: str, extra: str = "") -> str:
    text = textwrap.dedent("""
        [effluent]
        ph = 3.5
        temperature_c = 20
        alkalinity_mg_l_as_caco3 = 0
        {effluent}
        [batch]
        volume_m3 = 10
        [target]
        ph_min = 6
        ph_max = 9
        [reagent]
        id = "caustic-50"
        {extra}
        """).format(effluent=textwrap.dedent(effluent), extra=textwrap.dedent(extra))
    path = tmp_path / "s.toml"
    path.write_text(text)
    return str(path)


@pytest.mark.parametrize("effluent, extra, key", [
    ('solutes_mmol_l = { dtpa = 1.0 }\n', "", "solutes_mmol_l.dtpa"),
    ('solutes_mmol_l = { edta = 0.5 }\n', "", "solutes_mmol_l.edta"),
    ('ions_mg_l = { sodium = 110000, chloride = 170000 }\n', "", "activity"),
], ids=["unknown-ligand", "chelant-without-metal", "beyond-the-coefficients"])
def test_bad_ligand_input_is_one_line(tmp_path, effluent, extra, key):
    r = run_cli("plan", _scenario(tmp_path, effluent, extra))
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and key in lines[0], r.stderr
    assert "Traceback" not in r.stderr


def test_a_chelant_with_its_metal_stated_as_none_plans(tmp_path):
    r = run_cli("plan", _scenario(tmp_path, 'solutes_mmol_l = { edta = 0.5 }\n'
                                            'metals_mg_l = { calcium = 0 }\n'), "--json")
    assert r.returncode == 0, r.stderr
    json.loads(r.stdout)


def test_chelant_check_names_the_field():
    with pytest.raises(InputError) as err:
        infer_water(Measurements(3.5, 20.0, solutes_mmol_l={"gluconate": 1.0}))
    assert err.value.field == "solutes_mmol_l.gluconate"
