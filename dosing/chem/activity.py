"""Activity coefficients of ions: the Davies equation.

.. math::
    \\log_{10}\\gamma_i = -A z_i^2\\left(\\frac{\\sqrt{I}}{1+\\sqrt{I}}
    - 0.3 I\\right)

The planner uses the 0.3 coefficient of Davies (1962); some texts use 0.2
(Davies 1938). The equation is commonly trusted up to I of about 0.5 mol/L;
above that the planner still computes but the plan carries a warning.

The Debye-Hückel A parameter follows from the permittivity and density of
water, A = 1.82483e6 · sqrt(ρ) · (ε T)^(-3/2), with ρ in g/cm³, T in K and
ε from the fit of Malmberg & Maryott (1956).

References
----------
1. Davies, C. W. (1962). Ion Association. Butterworths, London. (From
   memory.)
2. Malmberg, C. G.; Maryott, A. A. (1956). Dielectric constant of water from
   0 to 100 °C. J. Res. Natl. Bur. Stand. 56, 1-8. (Fit coefficients from
   memory.)
3. Robinson, R. A.; Stokes, R. H. (1959). Electrolyte Solutions, 2nd ed.
   Butterworths. (A = 0.509 at 25 °C; from memory.)
"""

from __future__ import annotations

import numpy as np

from .water import density

__all__ = ["DAVIES_LINEAR_COEFF", "DAVIES_I_LIMIT", "debye_huckel_a", "davies_unit",
           "davies_log_gamma"]

#: Coefficient of the linear term in the Davies equation [-].
DAVIES_LINEAR_COEFF = 0.3
#: Ionic strength above which the Davies equation is no longer trusted
#: [mol/L] (common practice).
DAVIES_I_LIMIT = 0.5


def debye_huckel_a(temperature_c):
    """Debye-Hückel A for log10 γ [(kg/mol)^(1/2)].

    Examples
    --------
    >>> round(float(debye_huckel_a(25.0)), 3)
    0.511
    """
    t = np.asarray(temperature_c, dtype=float)
    eps = 87.740 - 0.40008 * t + 9.398e-4 * t**2 - 1.410e-6 * t**3
    rho = density(t) / 1000.0
    return 1.82483e6 * np.sqrt(rho) * (eps * (t + 273.15)) ** -1.5


def davies_log_gamma(charge, ionic_strength, a):
    """log10 of the activity coefficient of an ion of ``charge`` [-].

    Parameters
    ----------
    charge : int or ndarray
        Ion charge [-].
    ionic_strength : float or ndarray
        Ionic strength [mol/L].
    a : float or ndarray
        Debye-Hückel A [(kg/mol)^(1/2)].

    Examples
    --------
    >>> round(float(davies_log_gamma(1, 0.01, 0.5108)), 4)
    -0.0449
    """
    z = np.asarray(charge, dtype=float)
    return -z**2 * davies_unit(ionic_strength, a)


def davies_unit(ionic_strength, a):
    """The Davies term per unit squared charge: log10 γ_z = -z² × this [-].

    The solver computes it once per water and scales it by each species'
    charge instead of evaluating the equation per species.

    Examples
    --------
    >>> round(float(davies_unit(0.01, 0.5108)), 4)
    0.0449
    """
    i = np.maximum(np.asarray(ionic_strength, dtype=float), 0.0)
    s = np.sqrt(i)
    return a * (s / (1.0 + s) - DAVIES_LINEAR_COEFF * i)
