"""Activity past the Davies range: the specific ion interaction model (SIT).

Checked against published mean activity coefficients (Robinson & Stokes
1959, appendix 8.10; from memory, read-quality in many textbooks) and
against the Pitzer models of ``pytzer`` (Humphreys et al. 2022, J. Open
Source Softw. 7, 4367; its libraries CWTD23 for NaCl and HCl, and CRP94,
Clegg, Rard & Pitzer 1994, for sulfuric acid), within the validity the
model states: chloride media to 3.5 mol/kg, sulfate media to 1 mol/kg.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from dosing import Batch, Measurements, Target, get_reagent, infer_water
from dosing.chem import Mixture, N_SYSTEMS, solve_ph, speciate, system_index
from dosing.chem.activity import DAVIES, SIT, kg_water_per_l
from dosing.chem import sit
from dosing.errors import InputError
from dosing.planning.job import Scenario, make_plan

# Robinson & Stokes (1959), appendix 8.10, 25 °C (from memory).
RS_NACL = {1.0: 0.657, 2.0: 0.668, 3.0: 0.714}
RS_HCL = {0.5: 0.757, 1.0: 0.809, 2.0: 1.009, 3.0: 1.316}


def _pytzer(library: str):
    pz = pytest.importorskip("pytzer")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return pz.set_library(pz, library)


def _pytzer_mean(pz, cation: str, anion: str, m: float) -> float:
    s = pz.get_solutes(**{cation: m, anion: m}, sanity_check=False)
    g = pz.activity_coefficients(s, temperature=298.15, pressure=10.1325)
    return float(np.sqrt(g[cation] * g[anion]))


def _molar(m: float) -> float:
    """mol/L of a 1:1 solute at molality m, by the model's own conversion."""
    return m / (1.0 + 0.019 * m)


def _nacl_mean(m: float) -> float:
    """γ± of NaCl at m mol/kg from the model (both ions alike in NaCl)."""
    c = _molar(m)
    st = SIT.state(c, 0.5108)                     # a sodium chloride medium
    y = 10 ** float(SIT.log_gamma_ion(1, sit.EPS_NA_CL, st))
    return y * float(kg_water_per_l(c))           # molar-scale y back to molal γ


def _hcl_mean(m: float, model) -> float:
    """γ± of HCl at m mol/kg through the engine: the pH of the solution.
    In pure HCl the two ions' coefficients are equal under SIT, so
    γ± = a_H / m."""
    c = _molar(m) if model is SIT else m
    mix = Mixture.build(np.zeros(N_SYSTEMS), -c, 0.5 * c, 25.0, math.nan, model)
    return 10 ** -float(solve_ph(mix)[0]) / m


@pytest.mark.parametrize("m", sorted(RS_NACL))
def test_sodium_chloride_against_robinson_stokes_and_pitzer(m):
    got = _nacl_mean(m)
    assert got == pytest.approx(RS_NACL[m], rel=0.03)
    assert got == pytest.approx(_pytzer_mean(_pytzer("CWTD23"), "Na", "Cl", m), rel=0.03)


@pytest.mark.parametrize("m", sorted(RS_HCL))
def test_hydrochloric_acid_ph_against_robinson_stokes_and_pitzer(m):
    got = _hcl_mean(m, SIT)
    assert got == pytest.approx(RS_HCL[m], rel=0.03)
    assert got == pytest.approx(_pytzer_mean(_pytzer("CWTD23"), "H", "Cl", m), rel=0.03)


# Robinson & Stokes (1959), appendix 8.10, CaCl2 at 25 °C (from memory).
RS_CACL2 = {0.5: 0.448, 1.0: 0.500}


def _cacl2_mean(m: float, model) -> float:
    """γ± of CaCl2 at m mol/kg: (γ_Ca γ_Cl²)^(1/3), the medium CaCl2 itself."""
    c = m / (1.0 + 0.019 * 3 * m) if model is SIT else m
    i = 3 * c
    st = model.state(i, 0.5108)
    if model is SIT:
        eps_ca = sit.CATION_VS_CHLORIDE[("calcium", 2)]
        st = SIT.with_medium(st, c, eps_ca * c, 2 * c, sit.EPS_NA_CL * 2 * c, i)
        k = float(kg_water_per_l(i))
        lg_ca = float(SIT.log_gamma_ion(2, eps_ca, st)) + math.log10(k)
        lg_cl = float(SIT.log_gamma_ion(-1, sit.EPS_NA_CL, st)) + math.log10(k)
    else:
        lg_ca, lg_cl = float(model.log_gamma(2, i, 0.5108)), float(model.log_gamma(-1, i, 0.5108))
    return 10 ** ((lg_ca + 2 * lg_cl) / 3)


@pytest.mark.parametrize("m", sorted(RS_CACL2))
def test_a_divalent_salt_where_davies_fails(m):
    # CaCl2 at I = 1.5 and 3 mol/kg: SIT within 5 % of Robinson & Stokes and
    # of the Pitzer model; Davies more than twice too high at 1 mol/kg.
    got = _cacl2_mean(m, SIT)
    assert got == pytest.approx(RS_CACL2[m], rel=0.05)
    pz = _pytzer("CWTD23")
    s = pz.get_solutes(Ca=m, Cl=2 * m, sanity_check=False)
    g = pz.activity_coefficients(s, temperature=298.15, pressure=10.1325)
    assert got == pytest.approx(float((g["Ca"] * g["Cl"] ** 2) ** (1 / 3)), rel=0.05)
    assert _cacl2_mean(1.0, DAVIES) > 2 * RS_CACL2[1.0]


def _sulfuric_mean(m: float) -> float:
    """Stoichiometric γ± of H2SO4 through the engine: (a_H² a_SO4 / 4 m³)^(1/3)."""
    so4 = system_index("sulfate")
    c = m
    for _ in range(30):                      # molarity consistent with the conversion
        mix = Mixture.build(np.eye(N_SYSTEMS)[so4] * c, 0.0, 0.0, 25.0, math.nan, SIT)
        ph = float(solve_ph(mix)[0])
        sp = speciate(mix, np.array([ph]))
        c = m * float(kg_water_per_l(sp.ionic_strength[0]))
    k = 1.0 / float(kg_water_per_l(sp.ionic_strength[0]))
    a_so4 = float(sp.activity_of(so4, 1)[0])     # molal activity (l0 carries the k)
    return (10 ** (-2 * ph) * a_so4 / (4 * m ** 3)) ** (1 / 3) if k else math.nan


def _pytzer_sulfuric(m: float) -> float:
    pz = _pytzer("CRP94")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s = pz.solve(pz.get_totals(SO4=m, sanity_check=False), temperature=298.15,
                     pressure=10.1325).solutes
        g = pz.activity_coefficients(s, temperature=298.15, pressure=10.1325)
    return float(((g["H"] * s["H"]) ** 2 * g["SO4"] * s["SO4"] / (4 * m ** 3)) ** (1 / 3))


@pytest.mark.parametrize("m", [0.1, 0.5, 1.0])
def test_sulfuric_acid_within_the_stated_validity(m):
    # Stated validity in sulfate media: 1 mol/kg, within 8 % of CRP94.
    assert _sulfuric_mean(m) == pytest.approx(_pytzer_sulfuric(m), rel=0.08)


@pytest.mark.xfail(strict=True, reason="SIT with one ε per ion pair cannot carry the strong "
                   "H+-SO4 2- interaction of concentrated sulfuric acid (29 % low at 3 mol/kg); "
                   "the plan warns above 1 mol/kg in sulfate media")
def test_sulfuric_acid_at_three_molal():
    assert _sulfuric_mean(3.0) == pytest.approx(_pytzer_sulfuric(3.0), rel=0.10)


def test_sit_meets_debye_huckel_in_dilute_water():
    # At I = 0.001 mol/L every model is the limiting law: log γ1 = -A √I
    # within 0.001 (Debye & Hückel 1923; the limit all three share).
    a = 0.5108
    for model in (SIT, DAVIES):
        assert float(model.log_gamma(1, 0.001, a)) == pytest.approx(-a * math.sqrt(0.001),
                                                                     abs=1e-3)


# ------------------------------------------------------------ auto --
def test_auto_keeps_davies_where_it_holds():
    w = infer_water(Measurements(3.0, 20.0, alkalinity_mg_l_as_caco3=0))
    assert w.activity is DAVIES
    assert not any(n.id == "activity-model" for n in w.notes)


def test_auto_switches_to_sit_past_the_davies_range_and_says_so():
    # A pickling brine: pH 0.6 with 1.2 mol/L of background chloride (as sodium).
    w = infer_water(Measurements(0.6, 20.0, ions_mg_l={"sodium": 27_600, "chloride": 42_500}))
    assert w.activity is SIT
    assert any(n.id == "activity-model" for n in w.notes)
    assert not any(n.id == "activity-range" for n in w.notes)


def test_a_named_model_is_kept():
    w = infer_water(Measurements(0.6, 20.0, ions_mg_l={"sodium": 27_600, "chloride": 42_500},
                                 activity="davies"))
    assert w.activity is DAVIES
    assert any(n.id == "activity-range" for n in w.notes)


def test_beyond_the_coefficients_is_refused():
    with pytest.raises(InputError) as err:
        infer_water(Measurements(7.0, 20.0, ions_mg_l={"sodium": 105_000, "chloride": 162_000}))
    assert err.value.field == "activity"
    assert "mol/kg" in err.value.reason


def test_a_dose_that_takes_the_water_past_davies_is_planned_with_sit():
    # A spent sulfuric rinse, 200 mmol/L sulfate at pH 1.0 (I about 0.29 mol/L,
    # mostly H+ and HSO4-), raised to pH 7 with 50 % caustic: sodium sulfate
    # at about 0.59 mol/L, past Davies' range.
    m = Measurements(1.0, 20.0, alkalinity_mg_l_as_caco3=0, solutes_mmol_l={"sulfate": 200})
    water = infer_water(m)
    assert water.activity is DAVIES and water.ionic_strength < 0.5
    sc = Scenario("t", "s", "T-1", m, water, Batch(10.0), Target(6.0, 9.0, 7.0),
                  get_reagent("caustic-50"), None, None, None, 24.0)
    plan = make_plan(sc, sampled=False)
    assert plan.water.activity is SIT
    assert plan.ionic_strength_end > 0.5
    assert any(n.id == "activity-model" for n in plan.water.notes)


# ------------------------------------------------- round trips --
from hypothesis import HealthCheck, given, settings, strategies as st  # noqa: E402


@settings(max_examples=40, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(ph=st.floats(0.3, 9.0), chloride=st.floats(20_000, 90_000),
       sulfate=st.floats(0.0, 300.0), alk=st.one_of(st.none(), st.floats(0.0, 2000.0)),
       zinc=st.floats(0.0, 200.0), rid=st.sampled_from(["caustic-50", "lime", "hydrochloric-32"]))
def test_sit_waters_round_trip(ph, chloride, sulfate, alk, zinc, rid):
    """A concentrated water inferred under SIT gives back its own pH by the
    forward solve, and the dose to a target lands there (the plan's own
    forward check, which raises otherwise)."""
    from dosing import plan_dose
    if alk is not None and ph < 4.6:
        alk = None
    if ph > 6.0:
        zinc = 0.0                   # a filtered sample holds no more than dissolves
    m = Measurements(ph, 20.0, alkalinity_mg_l_as_caco3=alk if alk is not None else 0.0,
                     ions_mg_l={"sodium": chloride * 22.99 / 35.45, "chloride": chloride},
                     solutes_mmol_l={"sulfate": sulfate} if sulfate else None,
                     metals_mg_l={"zinc": zinc} if zinc else None, activity="sit")
    try:
        w = infer_water(m)
    except InputError:
        return                       # past the coefficients: refused, as it should be
    assert float(solve_ph(w.mixture())[0]) == pytest.approx(ph, abs=1e-6)
    r = get_reagent(rid)
    target = ph + 1.5 if r.raises_ph else ph - 1.5
    if not 1.0 <= target <= 11.0:
        return
    try:
        plan = plan_dose(w, r, Target(target - 0.5, target + 0.5, target), Batch(10.0))
    except Exception as err:       # an unreachable aim is a stated refusal
        assert type(err).__name__ in ("UnreachableError", "InputError"), err
        return
    assert plan.ph_end == pytest.approx(target, abs=1e-4)
