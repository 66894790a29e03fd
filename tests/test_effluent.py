"""The effluent from measurements: alkalinity, acidity, solutes, errors."""

import math

import pytest
from scipy.optimize import brentq

from dosing.planning.measurements import Measurements
from dosing.planning.measurements import CACO3_MG_PER_MEQ
from dosing.planning.effluent import infer_water
from dosing.chem import Mixture, add_dose, solve_ph
from dosing.errors import InputError
from dosing.planning.reagents import COMPOUNDS


def test_caco3_equivalent_weight():
    # Standard Methods 2320 B writes 50 000 mg CaCO3 per eq (i.e. 50.0 per
    # meq); M(CaCO3)/2 with IUPAC atomic weights is 50.04 (computed). Either
    # convention lies in 50.000-50.045.
    assert 50.000 <= CACO3_MG_PER_MEQ <= 50.045
    assert CACO3_MG_PER_MEQ == pytest.approx(50.04, abs=0.005)


def _titrate(water, compound, endpoint):
    """Lab titration by forward solves: eq/L of titrant to reach ``endpoint``.

    An independent path from the linear inverse used by infer_water: brentq
    over the dose, each point a full forward pH solve of the closed sample.
    """
    vec = COMPOUNDS[compound].vector(0.0)
    mix = Mixture.build(water.mixture().totals_mol_l, water.strong_eq_l,
                        water.strong_ionic_strength, water.temperature_c, math.nan,
                        water.activity)
    f = lambda d: float(solve_ph(add_dose(mix, vec, d))[0]) - endpoint
    return brentq(f, 0.0, 1.0, xtol=1e-14)


@pytest.mark.parametrize("activity", ["ideal", "davies"])
@pytest.mark.parametrize("ph, alk", [(8.3, 250.0), (7.2, 40.0), (10.5, 900.0)])
def test_alkalinity_round_trip_through_a_simulated_titration(ph, alk, activity):
    w = infer_water(Measurements(ph, 18.0, alkalinity_mg_l_as_caco3=alk,
                    solutes_mmol_l={"phosphate": 0.2, "ammonia": 0.5},
                    activity=activity))
    acid_eq = _titrate(w, "HCl", 4.5)
    assert acid_eq * CACO3_MG_PER_MEQ * 1000 == pytest.approx(alk, rel=1e-3)


@pytest.mark.parametrize("activity", ["ideal", "davies"])
def test_acidity_round_trip_through_a_simulated_titration(activity):
    w = infer_water(Measurements(5.8, 22.0, acidity_mg_l_as_caco3=60.0, activity=activity))
    base_eq = _titrate(w, "NaOH", 8.3)
    assert base_eq * CACO3_MG_PER_MEQ * 1000 == pytest.approx(60.0, rel=1e-3)


def test_bicarbonate_water_worked_by_hand():
    # Worked by hand from the carbonate fractions (ideal, 25 °C, pK1 6.352,
    # pK2 10.329 from Plummer & Busenberg 1982): at pH 8.0 the alkalinity
    # per mole of carbon is a1 + 2 a2 = 0.9827; at the 4.5 end point it is
    # 0.0139, and [H+] there adds 0.032 meq/L. 100 mg/L as CaCO3 = 1.998
    # meq/L, so C = (1.998 - 0.032 - 0.001) / 0.9688 = 2.029 mmol/L.
    w = infer_water(Measurements(8.0, 25.0, alkalinity_mg_l_as_caco3=100, activity="ideal"))
    assert w.carbonate_mol_l * 1000 == pytest.approx(2.029, abs=0.002)
    # The strong base balance of a bicarbonate water is close to its alkalinity.
    assert w.strong_eq_l * 1000 == pytest.approx(1.995, abs=0.003)


def test_lab_basis_mg_l_converts_on_the_reporting_basis():
    # 14.007 mg/L ammonia as N is 1.000 mmol/L; 30.974 mg/L as P likewise.
    w = infer_water(Measurements(7.0, solutes_mg_l={"ammonia": 14.007, "phosphate": 30.974},
                    alkalinity_mg_l_as_caco3=50))
    assert w.totals_mol_l["ammonia"] == pytest.approx(1e-3, rel=1e-6)
    assert w.totals_mol_l["phosphate"] == pytest.approx(1e-3, rel=1e-6)


def test_davies_ionic_strength_is_self_consistent():
    w = infer_water(Measurements(2.0, 25.0, solutes_mmol_l={"sulfate": 50.0}))
    mix = w.mixture()
    # Forward solve of the inferred water gives back the measured pH.
    assert float(solve_ph(mix)[0]) == pytest.approx(2.0, abs=1e-9)
    assert 0.05 < w.ionic_strength < 0.25


@pytest.mark.parametrize("kwargs, field", [
    (dict(ph=19), "ph"),
    (dict(ph=-1), "ph"),
    (dict(ph=float("nan")), "ph"),
    (dict(ph="seven"), "ph"),
    (dict(ph=7, temperature_c=75), "temperature_c"),
    (dict(ph=4.0, alkalinity_mg_l_as_caco3=120), "alkalinity_mg_l_as_caco3"),
    (dict(ph=9.0, acidity_mg_l_as_caco3=50), "acidity_mg_l_as_caco3"),
    (dict(ph=7, alkalinity_mg_l_as_caco3=-5), "alkalinity_mg_l_as_caco3"),
    (dict(ph=7, solutes_mmol_l={"sulfate": -1}), "solutes_mmol_l.sulfate"),
    (dict(ph=7, solutes_mmol_l={"chromate": 1}), "solutes_mmol_l.chromate"),
    (dict(ph=7, alkalinity_mg_l_as_caco3=50, acidity_mg_l_as_caco3=10),
     "acidity_mg_l_as_caco3"),
    (dict(ph=7, alkalinity_mg_l_as_caco3=50, solutes_mmol_l={"carbonate": 1}),
     "alkalinity_mg_l_as_caco3"),
    (dict(ph=7, activity="debye"), "activity"),
    (dict(ph=9.0, alkalinity_mg_l_as_caco3=20, solutes_mmol_l={"borate": 50}),
     "alkalinity_mg_l_as_caco3"),
])
def test_inconsistent_or_bad_input_names_the_field(kwargs, field):
    with pytest.raises(InputError) as err:
        infer_water(Measurements(**kwargs))
    assert err.value.field == field
    assert field in str(err.value)


def test_zero_alkalinity_below_endpoint_means_no_carbonate():
    w = infer_water(Measurements(3.0, alkalinity_mg_l_as_caco3=0))
    assert w.carbonate_mol_l == 0.0
