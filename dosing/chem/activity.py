"""Activity models: log10 of an ion's activity coefficient at an ionic strength.

An activity model is an object (:class:`ActivityModel`): the engine passes
it where a water is described and asks it one question, log10 γ of each
species at the solution's ionic strength and temperature. Two models are
here:

* :data:`IDEAL` - every γ is 1 (a check, and the textbook case);
* :data:`DAVIES` - the Davies equation,

  .. math::
      \\log_{10}\\gamma_i = -A z_i^2\\left(\\frac{\\sqrt{I}}{1+\\sqrt{I}}
      - 0.3 I\\right)

  with the 0.3 coefficient of Davies (1962); some texts use 0.2 (Davies
  1938). It is commonly trusted up to I of about 0.5 mol/L; above that the
  planner still computes but the plan carries a warning.

Both depend on the charge alone, log γ_z = -z² f(I, T): the solvers then
compute f once per water and scale it by each species' charge
(:meth:`ActivityModel.charge_term`). A model whose γ depends on the
species' identity says so with ``charge_only = False``.

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

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from .water import density

__all__ = ["ActivityModel", "Ideal", "Davies", "IDEAL", "DAVIES", "MODELS",
           "DEFAULT_MODEL", "activity_model", "DAVIES_LINEAR_COEFF", "DAVIES_I_LIMIT",
           "debye_huckel_a", "davies_unit"]

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


def davies_unit(ionic_strength, a):
    """The Davies term per unit squared charge: log10 γ_z = -z² × this [-].

    Examples
    --------
    >>> round(float(davies_unit(0.01, 0.5108)), 4)
    0.0449
    """
    i = np.maximum(np.asarray(ionic_strength, dtype=float), 0.0)
    s = np.sqrt(i)
    return a * (s / (1.0 + s) - DAVIES_LINEAR_COEFF * i)


@dataclass(frozen=True)
class ActivityModel:
    """What every activity model answers.

    Attributes
    ----------
    name : str
        The name a scenario gives it (``[model] activity``).
    label : str
        How a sheet names it.
    ideal : bool
        Every γ is 1: the solvers skip the ionic-strength fixed point.
    charge_only : bool
        log γ depends on the charge alone, log γ_z = -z² f(I, T).
    limit_mol_l : float
        Ionic strength up to which the model is trusted [mol/L].
    """

    name: str
    label: str
    ideal: bool
    charge_only: bool
    limit_mol_l: float

    def charge_term(self, ionic_strength, a):
        """f(I, T) of log γ_z = -z² f, per water [-]; None for an ideal solution.

        Parameters
        ----------
        ionic_strength : ndarray
            Ionic strength [mol/L].
        a : ndarray
            Debye-Hückel A at the water's temperature [(kg/mol)^(1/2)]
            (:func:`debye_huckel_a`, computed once with the constants).
        """
        raise NotImplementedError

    def log_gamma(self, charge, ionic_strength, a):
        """log10 γ of an ion of ``charge`` [-] (broadcast over the arrays).

        This is the one place an activity coefficient is computed; the
        solvers use :meth:`charge_term` for the same numbers, once per water.
        """
        z = np.asarray(charge, dtype=float)
        f = self.charge_term(ionic_strength, a)
        if f is None:
            return np.zeros(np.broadcast(z, np.asarray(ionic_strength, dtype=float)).shape)
        return -z * z * f

    def log_gamma_at(self, charge, ionic_strength, temperature_c):
        """log10 γ at a temperature [°C] instead of a Debye-Hückel A [-]."""
        return self.log_gamma(charge, ionic_strength, debye_huckel_a(temperature_c))


@dataclass(frozen=True)
class Ideal(ActivityModel):
    """An ideal solution: every activity coefficient is 1."""

    name: str = "ideal"
    label: str = "ideal"
    ideal: bool = True
    charge_only: bool = True
    limit_mol_l: float = math.inf

    def charge_term(self, ionic_strength, a):
        return None


@dataclass(frozen=True)
class Davies(ActivityModel):
    """The Davies equation (0.3 coefficient), trusted to about 0.5 mol/L.

    Examples
    --------
    >>> round(float(DAVIES.log_gamma(1, 0.01, 0.5108)), 4)
    -0.0449
    """

    name: str = "davies"
    label: str = "Davies"
    ideal: bool = False
    charge_only: bool = True
    limit_mol_l: float = DAVIES_I_LIMIT

    def charge_term(self, ionic_strength, a):
        return davies_unit(ionic_strength, a)


IDEAL = Ideal()
DAVIES = Davies()
#: The models a scenario may name, by name.
MODELS: dict[str, ActivityModel] = {m.name: m for m in (DAVIES, IDEAL)}
#: The model a scenario gets when it names none.
DEFAULT_MODEL = DAVIES


def activity_model(name: str | ActivityModel) -> ActivityModel:
    """The model of that name (a model is returned as it is).

    Raises
    ------
    InputError
        Naming ``activity`` and the models there are.
    """
    if isinstance(name, ActivityModel):
        return name
    try:
        return MODELS[name]
    except (KeyError, TypeError):
        raise InputError("activity", f"{name!r} is not a model; allowed: "
                         + " or ".join(repr(k) for k in MODELS)) from None
