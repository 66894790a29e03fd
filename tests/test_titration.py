"""Bench titration: synthetic fits, a textbook titration, bad data."""

import math
from pathlib import Path

import numpy as np
import pytest

from dosing.report.titration import titration_dict
from dosing.report.words import texts
from dosing.chem.activity import DAVIES, IDEAL
from dosing.planning.measurements import Measurements
from tests.helpers import run_cli

from dosing.planning.effluent import infer_water
from dosing.chem import Mixture, add_dose, solve_ph
from dosing.errors import InputError, UnreachableError
from dosing.planning.basis import Target
from dosing.planning.reagents import get_reagent
from dosing.io.scenario import load_scenario
from dosing.planning.bench import check_curve, direct_scaling, parse_titrant
from dosing.planning.titration import compare
from dosing.planning.water_fit import fit_water
from tests.helpers import totals

ROOT = Path(__file__).resolve().parents[1]
CIP = ROOT / "scenarios" / "cip-sulfuric.toml"


def synthetic(tot, strong, titrant, sample_ml, v_ml, t_c=25.0, activity=DAVIES, noise=0.0,
              pka=None, seed=0):
    """pH readings the engine predicts for a known water, with meter noise."""
    n = len(v_ml)
    mix = Mixture.build(np.repeat(tot[None, :], n, 0), strong, 0.5 * abs(strong), t_c,
                        math.nan, activity, pka)
    d = np.asarray(v_ml) * titrant.molarity_mol_l / sample_ml
    ph = solve_ph(add_dose(mix, titrant.vector(), d))
    return ph + np.random.default_rng(seed).normal(0.0, noise, n)


def test_parse_titrant():
    assert parse_titrant("0.1 M NaOH").molarity_mol_l == 0.1
    assert parse_titrant("0.02 N H2SO4").molarity_mol_l == pytest.approx(0.01)
    assert parse_titrant("HCl:0.5").normality_eq_l == 0.5
    assert parse_titrant("caustic-25").molarity_mol_l == pytest.approx(1 / 0.125579, rel=1e-4)
    for bad in ("NaOCl 0.1M", "fast", "0.1 M CO2", "50 M NaOH"):
        with pytest.raises(InputError):
            parse_titrant(bad)


@pytest.mark.parametrize("c_mm, s_meq", [(4.0, 8.0), (12.0, 20.0), (1.5, 6.0)])
def test_fit_recovers_a_known_water(c_mm, s_meq):
    # Synthetic titration from the engine, pH noise 0.01 (a good bench meter):
    # the fit must return carbonate and strong-ion balance within 5 %.
    s = load_scenario(CIP)
    tit = parse_titrant("0.1 N H2SO4")
    v = np.linspace(0, 1.3 * (s_meq + 0.5) * 50 / 100, 35)
    ph = synthetic(totals(carbonate=c_mm / 1000), s_meq / 1000, tit, 50.0, v,
                   t_c=s.water.temperature_c, noise=0.01)
    fit = fit_water(check_curve(50.0, tit, v, ph), s.water, unknown_acid="no")
    assert fit.params["carbonate_mmol_l"] == pytest.approx(c_mm, rel=0.05)
    assert fit.params["strong_ion_balance_meq_l"] == pytest.approx(s_meq, rel=0.05)
    assert fit.stderr["carbonate_mmol_l"] < 0.1 * c_mm
    assert fit.rms_ph < 0.03


def test_the_two_methods_agree_on_a_clean_curve():
    s = load_scenario(CIP)
    tit = parse_titrant("0.1 N H2SO4")
    v = np.linspace(0, 12, 41)
    ph = synthetic(totals(carbonate=0.004), 0.008, tit, 50.0, v, t_c=s.water.temperature_c)
    report = titration_dict(compare(check_curve(50.0, tit, v, ph), s))
    assert abs(report["gap_model_vs_direct"]) < 0.03
    assert not any("differ by" in w for w in report["warnings"])
    assert report["cautions"][-1].endswith("final word on any dose.")
    assert report["trusted"] == "model"          # the fit explains the curve


def test_a_sample_not_at_the_scenarios_ph_is_questioned():
    # The jar starts 0.8 pH below the scenario's water: another sample or a
    # meter out of calibration (two meters agree within about 0.1-0.2 pH,
    # common practice), said before anyone doses from it.
    s = load_scenario(CIP)
    tit = parse_titrant("0.1 N H2SO4")
    v = np.linspace(0, 12, 41)
    ph = synthetic(totals(carbonate=0.004), 0.008, tit, 50.0, v, t_c=s.water.temperature_c)
    shifted = compare(check_curve(50.0, tit, v, ph - 0.8), s)
    said = [w for w in texts(shifted.warnings) if "another sample" in w]
    assert said and f"pH {ph[0] - 0.8:.2f}" in said[0] and f"pH {s.water.ph:.2f}" in said[0]
    # within the meters' agreement, or a first reading with titrant in: nothing said
    from dosing.planning.titration import _sample_words
    assert _sample_words(check_curve(50.0, tit, v, ph), float(ph[0]) + 0.25) == []
    assert _sample_words(check_curve(50.0, tit, v[1:], ph[1:]), float(ph[1]) + 2.0) == []


def test_acetic_acid_with_naoh_textbook():
    # 50.00 mL of 0.1000 M acetic acid titrated with 0.1000 M NaOH (the
    # standard weak-acid example of Skoog, West, Holler & Crouch,
    # Fundamentals of Analytical Chemistry; from memory): at half-equivalence
    # (25 mL) pH = pKa = 4.76; at equivalence (50 mL, 0.0500 M acetate) the
    # salt's hydrolysis gives pH = 7 + (pKa + log C)/2 ~ 8.72 (pKw 13.995,
    # pKa 4.756, Goldberg et al. 2002 from memory). Ideal solution, 25 °C.
    tit = parse_titrant("0.1 M NaOH")
    v = np.array([0, 5, 10, 15, 20, 24, 25, 26, 30, 35, 40, 45, 48, 49, 49.5, 50, 50.5,
                  51, 52, 55, 60])
    ph = synthetic(totals(acetate=0.1), 0.0, tit, 50.0, v, activity=IDEAL)
    assert ph[list(v).index(25)] == pytest.approx(4.756, abs=0.01)
    eq_ph = 0.5 * (13.995 + 4.756 + math.log10(0.05))
    assert ph[list(v).index(50)] == pytest.approx(eq_ph, abs=0.01)
    assert ph[list(v).index(50)] == pytest.approx(8.72, abs=0.02)
    curve = check_curve(50.0, tit, v, ph)
    # Direct scaling finds half-equivalence at pH = pKa.
    d = direct_scaling(curve, get_reagent("caustic-50"), Target(4.5, 5.0, 4.756))
    assert d.ml_at_aim == pytest.approx(25.0, abs=0.3)
    # With no acetate listed, the fit finds an unlisted acid of 0.1 M, pKa 4.76.
    base = infer_water(Measurements(7.0, 25.0, activity="ideal", alkalinity_mg_l_as_caco3=0))
    fit = fit_water(curve, base, unknown_acid="auto")
    assert fit.unknown_acid
    assert fit.params["unknown_acid_mmol_l"] == pytest.approx(100.0, rel=0.02)
    assert fit.params["unknown_acid_pka"] == pytest.approx(4.756, abs=0.03)
    assert any("unlisted buffer" in w for w in texts(fit.warnings))


def test_unreachable_aim_is_refused_with_the_last_ph():
    s = load_scenario(CIP)
    tit = parse_titrant("0.1 N H2SO4")
    v = np.linspace(0, 1.5, 8)               # stops above the aim
    ph = synthetic(totals(carbonate=0.004), 0.008, tit, 50.0, v, t_c=45.0)
    curve = check_curve(50.0, tit, v, ph)
    with pytest.raises(UnreachableError, match="does not reach the aim"):
        direct_scaling(curve, s.reagent, s.target)


def test_small_noise_is_flagged_large_misreads_refused():
    tit = parse_titrant("0.1 M NaOH")
    v = [0, 1, 2, 3, 4, 5]
    c = check_curve(50, tit, v, [3.0, 3.5, 3.48, 4.0, 4.5, 5.0])
    assert any("meter noise" in n for n in texts(c.notes))
    with pytest.raises(InputError, match="row 3"):
        check_curve(50, tit, v, [3.0, 3.5, 3.2, 4.0, 4.5, 5.0])


_cli = run_cli


@pytest.mark.parametrize("text, says", [
    ("ml,pH\n0,3\n1,3.2\n2,3.5\n", "at least 5"),
    ("ml,pH\n0,3\n1,3.2\n1,3.3\n2,3.5\n3,3.9\n4,4.2\n", "same volume"),
    ("ml,pH\n0,3\n1,3.2\n2,nan\n3,3.5\n4,3.9\n5,4.2\n", "rows with a missing"),
    ("ml,pH\n0,3\n1,3.6\n2,3.1\n3,3.9\n4,4.2\n5,4.4\n", "misread"),
    ("volume (L),pH\n0,3\n1,3.2\n2,3.5\n3,3.9\n4,4.2\n", "mL"),
    ("ml,pH\n0,3\n100,3.2\n200,3.5\n300,3.9\n400,4.2\n800,4.4\n", "wrong unit"),
    ("ml,conductivity\n0,3\n", "column missing"),
    ("ml,pH\n0,3\n1,3.2\n2,3.5\n3,3.9\n4,4.2\n", "does not reach the aim"),
])
def test_bad_titration_files_exit_2(tmp_path, text, says):
    f = tmp_path / "jar.csv"
    f.write_text(text)
    r = _cli("titration", str(f), "--sample-ml", "50", "--titrant", "0.1 M NaOH")
    assert r.returncode == 2 and says in r.stderr and "Traceback" not in r.stderr


def test_titration_command_end_to_end(tmp_path):
    tit = parse_titrant("0.1 N H2SO4")
    v = np.linspace(0, 12, 30)
    ph = synthetic(totals(carbonate=0.004), 0.008, tit, 50.0, v, t_c=45.0, noise=0.005)
    f = tmp_path / "jar.csv"
    f.write_text("titrant added (mL),pH\n,-\n" + "".join(f"{a:.3f},{b:.3f}\n"
                                                        for a, b in zip(v, ph)))
    png = tmp_path / "jar.png"
    r = _cli("titration", str(f), "--sample-ml", "50", "--titrant", "0.1 N H2SO4",
             "--scenario", str(CIP), "--plot", str(png))
    assert r.returncode == 0, r.stderr
    assert "direct scaling" in r.stdout and "model fit" in r.stdout
    assert "final word" in r.stdout
    assert png.read_bytes()[:4] == b"\x89PNG"
    r = _cli("titration", str(f), "--sample-ml", "50", "--titrant", "0.1 N H2SO4", "--json",
             "--drop", "5")
    assert r.returncode == 0, r.stderr
    import json
    d = json.loads(r.stdout)
    assert d["points"] == 29 and "direct" in d and "model" in d


def test_the_sheet_leads_with_the_method_it_trusts(tmp_path):
    # Issue 29: where the fit misses the curve, the direct scaling leads.
    jar = tmp_path / "jar.csv"
    jar.write_text("ml,pH\n" + "".join(f"{i * 0.01:g},{p}\n" for i, p in
                                       enumerate([3, 13, 13.1, 13.2, 13.3, 13.4])))
    r = run_cli("titration", str(jar), "--sample-ml", "50", "--titrant", "0.1 M NaOH",
                "--fit", "spectrum")
    assert r.returncode == 0, r.stderr
    assert r.stdout.splitlines()[2].startswith("DOSE BY DIRECT SCALING")
    import json
    d = json.loads(run_cli("titration", str(jar), "--sample-ml", "50", "--titrant",
                           "0.1 M NaOH", "--fit", "spectrum", "--json").stdout)
    assert d["trusted"] == "direct" and d["model"]["rms_ph"] == d["spectrum"]["rms_ph"]
