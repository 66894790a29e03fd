"""Properties of water and of the carbonate system against temperature.

All functions take temperature in °C as a float or numpy array and return
arrays of the same shape. The planner's range is 0-60 °C; values outside it
raise :class:`~dosing.errors.InputError` at the edges (``check_temperature``).

Ion product of water
--------------------
:func:`pkw` uses the IAPWS R11-07 formulation (Bandura & Lvov 2006), which
is a function of temperature and water density:

.. math::
    pK_w = -2n\\left[\\log_{10}(1+Q) - \\frac{Q}{Q+1}\\rho(\\beta_0 +
    \\beta_1 T^{-1} + \\beta_2\\rho)\\right] + pK_w^G + 2\\log_{10}(M_w/1000)

    Q = \\rho\\exp(\\alpha_0 + \\alpha_1 T^{-1} + \\alpha_2 T^{-2}\\rho^{2/3})

with ρ in g/cm³, evaluated at 0.1 MPa with the density of :func:`density`.

Carbonate system
----------------
:func:`carbonate_pk` and :func:`henry_co2` use the fits of Plummer &
Busenberg (1982), valid 0-90 °C.

Other weak acids
----------------
:func:`vant_hoff_pk` moves a 25 °C pKa to another temperature with the
standard enthalpy of the step (constant ΔH).

References
----------
1. Bandura, A. V.; Lvov, S. N. (2006). The ionization constant of water over
   wide ranges of temperature and density. J. Phys. Chem. Ref. Data 35,
   15-30. (IAPWS R11-07.)
2. Kell, G. S. (1975). Density, thermal expansivity, and compressibility of
   liquid water from 0 to 150 °C. J. Chem. Eng. Data 20, 97-105.
   (Coefficients from memory; checked in the tests against IAPWS-95.)
3. Plummer, L. N.; Busenberg, E. (1982). The solubilities of calcite,
   aragonite and vaterite in CO2-H2O solutions between 0 and 90 °C.
   Geochim. Cosmochim. Acta 46, 1011-1040.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError

__all__ = [
    "T_MIN_C", "T_MAX_C", "R_J_MOL_K", "check_temperature", "density",
    "pkw", "carbonate_pk", "henry_co2", "vant_hoff_pk", "calcite_pksp",
]

#: Temperature range the planner accepts [°C].
T_MIN_C = 0.0
T_MAX_C = 60.0
#: Molar gas constant, CODATA 2018 (exact) [J/(mol K)].
R_J_MOL_K = 8.314462618
_K0 = 273.15


def check_temperature(temperature_c, field: str = "temperature_c") -> None:
    """Raise :class:`InputError` unless every value lies in 0-60 °C."""
    t = np.asarray(temperature_c, dtype=float)
    if not np.all(np.isfinite(t)) or np.any(t < T_MIN_C) or np.any(t > T_MAX_C):
        bad = t[~((t >= T_MIN_C) & (t <= T_MAX_C))]
        shown = bad.flat[0] if bad.size else t.flat[0]
        raise InputError(field, f"{shown:g} °C is outside the range the model "
                         f"covers ({T_MIN_C:g} to {T_MAX_C:g} °C)")


def density(temperature_c):
    """Density of pure water at 0.1 MPa [kg/m³] (Kell 1975).

    Parameters
    ----------
    temperature_c : float or ndarray
        Temperature [°C].

    Examples
    --------
    >>> round(float(density(25.0)), 2)
    997.05
    """
    t = np.asarray(temperature_c, dtype=float)
    num = (999.83952 + 16.945176 * t - 7.9870401e-3 * t**2
           - 46.170461e-6 * t**3 + 105.56302e-9 * t**4 - 280.54253e-12 * t**5)
    return num / (1.0 + 16.879850e-3 * t)


def pkw(temperature_c):
    """pKw of water at 0.1 MPa on the molal scale [-] (IAPWS R11-07).

    Parameters
    ----------
    temperature_c : float or ndarray
        Temperature [°C].

    Examples
    --------
    >>> round(float(pkw(25.0)), 3)
    13.995
    """
    t = np.asarray(temperature_c, dtype=float)
    return _pkw_iapws(t + _K0, density(t) / 1000.0)


def _pkw_iapws(T, rho_g_cm3):
    n = 6.0
    a0, a1, a2 = -0.864671, 8659.19, -22786.2
    b0, b1, b2 = 0.642044, -56.8534, -0.375754
    mw = 18.015268
    pkw_g = 0.61415 + 48251.33 / T - 67707.93 / T**2 + 10102100.0 / T**3
    q = rho_g_cm3 * np.exp(a0 + a1 / T + a2 / T**2 * rho_g_cm3 ** (2.0 / 3.0))
    return (-2.0 * n * (np.log10(1.0 + q)
                        - q / (q + 1.0) * rho_g_cm3 * (b0 + b1 / T + b2 * rho_g_cm3))
            + pkw_g + 2.0 * np.log10(mw / 1000.0))


def carbonate_pk(temperature_c):
    """pK1 and pK2 of carbonic acid [-] (Plummer & Busenberg 1982).

    Returns
    -------
    (pk1, pk2) : tuple of ndarray
        pK1 for CO2* = H+ + HCO3-, pK2 for HCO3- = H+ + CO3 2-.

    Examples
    --------
    >>> [round(float(v), 3) for v in carbonate_pk(25.0)]
    [6.352, 10.329]
    """
    T = np.asarray(temperature_c, dtype=float) + _K0
    log_k1 = (-356.3094 - 0.06091964 * T + 21834.37 / T
              + 126.8339 * np.log10(T) - 1684915.0 / T**2)
    log_k2 = (-107.8871 - 0.03252849 * T + 5151.79 / T
              + 38.92561 * np.log10(T) - 563713.9 / T**2)
    return -log_k1, -log_k2


def henry_co2(temperature_c):
    """Henry's constant of CO2, KH [mol/(kg atm)] (Plummer & Busenberg 1982).

    Examples
    --------
    >>> round(float(np.log10(henry_co2(25.0))), 3)
    -1.468
    """
    T = np.asarray(temperature_c, dtype=float) + _K0
    log_kh = (108.3865 + 0.01985076 * T - 6919.53 / T
              - 40.45154 * np.log10(T) + 669365.0 / T**2)
    return 10.0 ** log_kh


def calcite_pksp(temperature_c):
    """pKsp of calcite, CaCO3 = Ca2+ + CO3 2- [-] (Plummer & Busenberg 1982).

    Examples
    --------
    >>> round(float(calcite_pksp(25.0)), 2)
    8.48
    """
    T = np.asarray(temperature_c, dtype=float) + _K0
    log_ksp = (-171.9065 - 0.077993 * T + 2839.319 / T + 71.595 * np.log10(T))
    return -log_ksp


def vant_hoff_pk(pk25, enthalpy_kj_mol, temperature_c):
    """Move a pK from 25 °C to another temperature with constant ΔH°.

    pK(T) = pK(298.15) + ΔH°/(R ln 10) · (1/T - 1/298.15)

    Parameters
    ----------
    pk25 : float or ndarray
        pK at 25 °C [-].
    enthalpy_kj_mol : float or ndarray
        Standard enthalpy of the dissociation [kJ/mol].
    temperature_c : float or ndarray
        Temperature [°C].
    """
    T = np.asarray(temperature_c, dtype=float) + _K0
    dh = np.asarray(enthalpy_kj_mol, dtype=float) * 1000.0
    return np.asarray(pk25, dtype=float) + dh / (R_J_MOL_K * np.log(10.0)) * (
        1.0 / T - 1.0 / 298.15)
