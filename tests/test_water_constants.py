"""Water and carbonate constants against published tables.

Sources named beside each check. "From memory" marks values recalled and not
re-read in the source text.
"""

import math

import pytest

from dosing.chem.activity import DAVIES, IDEAL, debye_huckel_a
from dosing.errors import InputError
from dosing.chem.water import (_pkw_iapws, calcite_pksp, carbonate_pk, check_temperature,
                          density, henry_co2, pkw, vant_hoff_pk)

chemicals_iapws = pytest.importorskip("chemicals.iapws")
thermo_electrochem = pytest.importorskip("thermo.electrochem")


def test_pkw_iapws_release_check_point():
    # IAPWS R11-07 check value: T = 300 K, rho = 1000 kg/m3 -> pKw 13.906565
    # (Bandura & Lvov 2006; the check value is from memory, and it also
    # matches an independent implementation).
    assert _pkw_iapws(300.0, 1.0) == pytest.approx(13.906565, abs=1e-6)


# CRC Handbook, "Ionization constant of water" at 0.1 MPa (Bandura & Lvov
# table), read: 14.946 / 13.995 / 13.264 at 0 / 25 / 50 °C.
@pytest.mark.parametrize("t, expected", [(0, 14.946), (25, 13.995), (50, 13.264)])
def test_pkw_against_crc_table(t, expected):
    assert float(pkw(t)) == pytest.approx(expected, abs=0.002)


# Marshall & Franck 1981, J. Phys. Chem. Ref. Data 10, 295 (older CRC table),
# read. It differs from IAPWS R11-07 by up to 0.014, hence the wider bar.
@pytest.mark.parametrize("t, expected", [(0, 14.938), (10, 14.528), (20, 14.163),
                                         (25, 13.995), (30, 13.836), (40, 13.542),
                                         (50, 13.275), (60, 13.034)])
def test_pkw_against_marshall_franck_1981(t, expected):
    assert float(pkw(t)) == pytest.approx(expected, abs=0.015)


@pytest.mark.parametrize("t", [0, 10, 20, 25, 30, 40, 50, 60])
def test_pkw_against_thermo_reference_library(t):
    # ChEDL thermo's IAPWS R11-07 with the IAPWS-95 density from chemicals:
    # an independent implementation of the same release.
    T = 273.15 + t
    rho = chemicals_iapws.iapws95_rho(T, 101325.0)
    ref = -math.log10(thermo_electrochem.Kweq_IAPWS(T, rho))
    assert float(pkw(t)) == pytest.approx(ref, abs=0.002)


@pytest.mark.parametrize("t", [0, 5, 15, 25, 35, 45, 60])
def test_water_density_kell_against_iapws95(t):
    # Kell 1975 fit against IAPWS-95 (chemicals.iapws.iapws95_rho, 0.1 MPa).
    ref = chemicals_iapws.iapws95_rho(273.15 + t, 101325.0)
    assert float(density(t)) == pytest.approx(ref, abs=0.01)


def test_carbonate_pk_at_25c():
    # Plummer & Busenberg 1982: pK1 6.352, pK2 10.329 at 25 °C (from memory);
    # CRC inorganic-acid table: 6.35 and 10.33 (read).
    pk1, pk2 = carbonate_pk(25.0)
    assert float(pk1) == pytest.approx(6.352, abs=0.001)
    assert float(pk2) == pytest.approx(10.329, abs=0.001)
    assert float(pk1) == pytest.approx(6.35, abs=0.005)
    assert float(pk2) == pytest.approx(10.33, abs=0.005)


# Plummer & Busenberg 1982 fits evaluated (log K1, log K2, log KH):
@pytest.mark.parametrize("t, lk1, lk2, lkh", [(5, -6.516, -10.554, -1.192),
                                              (15, -6.419, -10.428, -1.341),
                                              (35, -6.310, -10.252, -1.577)])
def test_carbonate_against_plummer_busenberg_table(t, lk1, lk2, lkh):
    pk1, pk2 = carbonate_pk(t)
    assert -float(pk1) == pytest.approx(lk1, abs=0.001)
    assert -float(pk2) == pytest.approx(lk2, abs=0.001)
    assert math.log10(float(henry_co2(t))) == pytest.approx(lkh, abs=0.001)


def test_calcite_pksp_at_25c():
    # Plummer & Busenberg 1982: log Ksp(calcite) = -8.48 at 25 °C (from memory).
    assert float(calcite_pksp(25.0)) == pytest.approx(8.48, abs=0.01)


def test_debye_huckel_a_at_25c():
    # Archer & Wang 1990: A_phi 0.3915 -> 3 A_phi / ln 10 = 0.510 (from memory);
    # Robinson & Stokes 0.509 (from memory). A bar of 0.002 covers 0.5085-0.511.
    assert float(debye_huckel_a(25.0)) == pytest.approx(0.5098, abs=0.002)


def test_davies_uses_the_0_3_coefficient():
    # Davies 1962 form, log g = -A z^2 (sqrt I/(1+sqrt I) - 0.3 I), evaluated
    # by hand at I = 0.1, A = 0.51, z = 2.
    s = math.sqrt(0.1)
    expected = -0.51 * 4 * (s / (1 + s) - 0.3 * 0.1)
    assert float(DAVIES.log_gamma(2, 0.1, 0.51)) == pytest.approx(expected, rel=1e-12)
    assert float(IDEAL.log_gamma(2, 0.1, 0.51)) == 0.0


def test_vant_hoff_ammonium_slope():
    # NH4+: with dH = +51.95 kJ/mol (Goldberg et al. 2002, from memory) the
    # pKa falls by about 0.03 per kelvin near 25 °C (a known property).
    slope = float(vant_hoff_pk(9.245, 51.95, 26.0) - vant_hoff_pk(9.245, 51.95, 24.0)) / 2
    assert slope == pytest.approx(-0.0295, abs=0.002)


@pytest.mark.parametrize("bad", [-0.1, 60.5, float("nan"), 100])
def test_temperature_outside_range_is_an_error(bad):
    with pytest.raises(InputError, match="temperature_c"):
        check_temperature(bad)
