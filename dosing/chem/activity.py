"""Activity models: log10 of an ion's activity coefficient at an ionic strength.

An activity model is an object (:class:`ActivityModel`): the engine passes
it where a water is described and asks it one question, log10 γ of each
species at the solution's ionic strength and temperature. Three models are
here:

* :data:`IDEAL` - every γ is 1 (a check, and the textbook case);
* :data:`SIT` - the specific ion interaction model (Brønsted-Guggenheim-
  Scatchard; coefficients and the pair rule in :mod:`.sit`), for waters
  past the Davies range, to 3.5 mol/kg;
* :data:`DAVIES` - the Davies equation,

  .. math::
      \\log_{10}\\gamma_i = -A z_i^2\\left(\\frac{\\sqrt{I}}{1+\\sqrt{I}}
      - 0.3 I\\right)

  with the 0.3 coefficient of Davies (1962); some texts use 0.2 (Davies
  1938). It is commonly trusted up to I of about 0.5 mol/L; above that the
  planner still computes but the plan carries a warning.

Ideal and Davies depend on the charge alone, log γ_z = -z² f(I, T): the
solvers then compute f once per water and scale it by each species' charge
(:meth:`ActivityModel.charge_term`). SIT depends on the ion too: each water
carries an :class:`ActivityState` (f, the molality conversion and four sums
over the ions of the medium), and :meth:`ActivityModel.log_gamma_ion` gives
log γ of any ion from its charge and interaction coefficient ε; a model
like it says so with ``charge_only = False``. Concentrations stay in mol/L
in the engine; SIT converts to molality inside, with the water in a litre
taken as 1 - 0.019 I kg (I in mol/L; chloride solutions to 3 mol/kg from
the CRC density tables, within 0.5 %; for sulfate and hydroxide solutions
the conversion is overstated by up to 2 %).

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
from typing import NamedTuple

import numpy as np

from ..errors import InputError
from . import sit
from .water import density

__all__ = ["ActivityModel", "Ideal", "Davies", "SpecificIonInteraction", "IDEAL", "DAVIES",
           "SIT", "MODELS", "DEFAULT_MODEL", "activity_model", "DAVIES_LINEAR_COEFF",
           "DAVIES_I_LIMIT", "debye_huckel_a", "davies_unit", "ActivityState",
           "kg_water_per_l", "AUTO", "CHOICES", "DEFAULT_CHOICE"]

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


class ActivityState(NamedTuple):
    """What a model needs, per water, to give log γ of any ion (arrays of n).

    log10 γ of an ion of charge z and coefficient ε (against chloride for a
    cation, sodium for an anion; :mod:`.sit`) is
    -z² t + [z > 0] ((ε - ε_NaCl) m_an + e_an) + [z < 0] ((ε - ε_NaCl) m_cat
    + e_cat) + l0; for a charge-only model the sums and l0 are zero.
    """

    t: np.ndarray            #: charge term f(I) [-]
    l0: np.ndarray           #: log10 of the molality per molarity [-] (0: dilute)
    m_cat: np.ndarray        #: molality of all cations [mol/kg]
    e_cat: np.ndarray        #: their ε-weighted molality [-]
    m_an: np.ndarray         #: molality of all anions [mol/kg]
    e_an: np.ndarray         #: their ε-weighted molality [-]


def kg_water_per_l(ionic_strength):
    """Water in a litre of solution [kg/L], from its ionic strength [mol/L]
    (see the module notes; 1 for a dilute water)."""
    i = np.maximum(np.asarray(ionic_strength, dtype=float), 0.0)
    return np.maximum(1.0 - 0.019 * i, 0.5)


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

    def state(self, ionic_strength, a) -> ActivityState:
        """The state of waters at ``ionic_strength`` [mol/L] whose medium is
        taken as sodium chloride of that strength (what :meth:`log_gamma`
        assumes; the solvers refine the sums from the water's own ions)."""
        i = np.asarray(ionic_strength, dtype=float)
        f = self.charge_term(i, a)
        zero = np.zeros(i.shape)
        return ActivityState(zero if f is None else f, zero, zero, zero, zero, zero)

    def log_gamma_ion(self, charge, eps, state: ActivityState):
        """log10 γ of ions of ``charge`` and coefficient ``eps`` [kg/mol] in
        waters of ``state`` (arrays broadcast: state fields as (n, 1) against
        (k,) ions). The one formula every solver uses."""
        z = np.asarray(charge, dtype=float)
        return -z * z * state.t


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


@dataclass(frozen=True)
class SpecificIonInteraction(ActivityModel):
    """The specific ion interaction model, trusted to 3.5 mol/kg ([G97] in :mod:`.sit`).

    log10 γ_j = -z_j² D + Σ_k ε(j, k) m_k with D = A √I_m / (1 + 1.5 √I_m)
    on the molal scale, converted to mol/L by :func:`kg_water_per_l`.

    Examples
    --------
    Mean activity coefficient of NaCl at 1 mol/kg, 25 °C (0.657 in Robinson
    & Stokes 1959, appendix 8.10; from memory). By the conversion here a
    litre holds c = 1 / (1 + 0.019) mol; the model gives the coefficient
    on the molar scale, y = γ m / c:

    >>> c = 1 / 1.019
    >>> st = SIT.with_medium(SIT.state(c, 0.5108), c, 0.03 * c, c, 0.03 * c, c)
    >>> y = 10 ** SIT.log_gamma_ion(1, sit.EPS_NA_CL, st)      # Na+ and Cl- alike here
    >>> round(float(y / SIT.molal_per_molar(c)), 3)
    0.669
    """

    name: str = "sit"
    label: str = "specific ion interaction (SIT)"
    ideal: bool = False
    charge_only: bool = False
    limit_mol_l: float = sit.LIMIT_MOL_KG

    def charge_term(self, ionic_strength, a):
        i = np.maximum(np.asarray(ionic_strength, dtype=float), 0.0)
        s = np.sqrt(i / kg_water_per_l(i))
        return a * s / (1.0 + 1.5 * s)

    @staticmethod
    def molal_per_molar(ionic_strength):
        """mol/kg per mol/L of a solute in a water of that ionic strength [L/kg]."""
        return 1.0 / kg_water_per_l(ionic_strength)

    def state(self, ionic_strength, a) -> ActivityState:
        i = np.asarray(ionic_strength, dtype=float)
        st = super().state(i, a)
        return self.with_medium(st, i, sit.EPS_NA_CL * i, i, sit.EPS_NA_CL * i, i)

    def with_medium(self, state: ActivityState, m_cat, e_cat, m_an, e_an, ionic_strength
                    ) -> ActivityState:
        """``state`` with the medium's sums given in mol/L (converted here)."""
        k = self.molal_per_molar(ionic_strength)
        return state._replace(l0=np.log10(k), m_cat=m_cat * k, e_cat=e_cat * k,
                              m_an=m_an * k, e_an=e_an * k)

    def log_gamma(self, charge, ionic_strength, a):
        """log10 γ [-] of an ion of ``charge`` in a sodium chloride medium of
        that ionic strength [mol/L], ε estimated by charge (:func:`.sit.estimate`)."""
        z = np.asarray(charge, dtype=float)
        eps = np.vectorize(lambda q: sit.estimate(int(q)))(z) if z.ndim else \
            sit.estimate(int(z))
        return self.log_gamma_ion(z, eps, self.state(ionic_strength, a))

    def log_gamma_ion(self, charge, eps, state: ActivityState):
        z = np.asarray(charge, dtype=float)
        e = np.asarray(eps, dtype=float)
        cat = (e - sit.EPS_NA_CL) * state.m_an + state.e_an
        an = (e - sit.EPS_NA_CL) * state.m_cat + state.e_cat
        return -z * z * state.t + np.where(z > 0, cat, np.where(z < 0, an, 0.0)) + state.l0


IDEAL = Ideal()
DAVIES = Davies()
SIT = SpecificIonInteraction()
#: The models a scenario may name, by name.
MODELS: dict[str, ActivityModel] = {m.name: m for m in (DAVIES, IDEAL, SIT)}
#: The model the engine takes when none is given (a Mixture built bare).
DEFAULT_MODEL = DAVIES
#: What a scenario may name: a model, or "auto" (Davies where it is trusted,
#: SIT past its range; the planning layer decides per water and says which).
AUTO = "auto"
CHOICES: tuple[str, ...] = (AUTO,) + tuple(MODELS)
#: What a scenario gets when it names none.
DEFAULT_CHOICE = AUTO


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
                         + ", ".join(repr(k) for k in CHOICES)) from None
