"""The job's window and amount of water: a target pH window, a batch or a flow, and amounts.

:class:`Target` is the permitted pH window and the aim inside it;
:class:`Batch` a tank treated as one batch, :class:`Flow` a continuous
stream; :func:`amounts_for` turns a dose [mol of active compound per L of
water] into what an operator meters (kg and litres of product, per batch
or per hour).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..errors import InputError
from .reagents import Reagent

__all__ = ["Target", "Batch", "Flow", "Amounts", "amounts_for"]


@dataclass(frozen=True)
class Target:
    """The permitted pH window and the aim inside it [pH]."""

    ph_min: float
    ph_max: float
    ph_aim: float | None = None

    def __post_init__(self):
        for name in ("ph_min", "ph_max"):
            v = getattr(self, name)
            if not isinstance(v, (int, float)) or not math.isfinite(v) or not 0 <= v <= 14:
                raise InputError(f"target.{name}", f"{v!r} is not a pH; allowed: 0 to 14")
        if self.ph_min >= self.ph_max:
            raise InputError("target.ph_max", f"{self.ph_max:g} must be above "
                             f"ph_min {self.ph_min:g}")
        if self.ph_aim is None:
            object.__setattr__(self, "ph_aim", 0.5 * (self.ph_min + self.ph_max))
        elif not (self.ph_min <= self.ph_aim <= self.ph_max):
            raise InputError("target.ph_aim", f"{self.ph_aim:g} lies outside the "
                             f"window {self.ph_min:g} to {self.ph_max:g}")

    def contains(self, ph: float) -> bool:
        """True if ``ph`` lies inside the window."""
        return self.ph_min <= ph <= self.ph_max


@dataclass(frozen=True)
class Batch:
    """A tank treated as one batch."""

    volume_m3: float

    def __post_init__(self):
        if not (isinstance(self.volume_m3, (int, float)) and math.isfinite(self.volume_m3)
                and 1e-3 <= self.volume_m3 <= 1e6):
            raise InputError("batch.volume_m3", f"{self.volume_m3!r}; allowed: "
                             "above 0 (at least 0.001 m3, one litre) and up to 1,000,000 m3")

    @property
    def litres(self) -> float:
        """Water treated [L] (per batch)."""
        return self.volume_m3 * 1000.0

    #: What every amount of a batch is per, in words.
    per = "per batch"


@dataclass(frozen=True)
class Flow:
    """A continuous stream."""

    m3_per_h: float

    def __post_init__(self):
        if not (isinstance(self.m3_per_h, (int, float)) and math.isfinite(self.m3_per_h)
                and 1e-3 <= self.m3_per_h <= 1e5):
            raise InputError("flow.m3_per_h", f"{self.m3_per_h!r}; allowed: "
                             "above 0 (at least 0.001 m3/h, one litre an hour) and up to 100,000 m3/h")

    @property
    def litres(self) -> float:
        """Water treated [L] (per hour)."""
        return self.m3_per_h * 1000.0

    #: What every amount of a flow is per, in words.
    per = "per hour"


@dataclass(frozen=True)
class Amounts:
    """One dose in the units an operator uses.

    ``kg_product`` and ``litres_product`` are per batch for a
    :class:`Batch` and per hour for a :class:`Flow`; ``litres_product`` is
    None for a solid or a gas, ``kg_product`` None when a solution was given
    by molarity without a density.
    """

    mmol_per_l: float                #: active compound per L of water [mmol/L]
    mg_per_l_product: float | None   #: product per L of water [mg/L]
    kg_product: float | None         #: [kg] per batch or per hour
    litres_product: float | None     #: [L] per batch or per hour
    kg_active: float                 #: active compound [kg] per batch or hour


def amounts_for(dose_mol_l: float, reagent: Reagent, basis: Batch | Flow) -> Amounts:
    """Convert a dose [mol active per L of water] to :class:`Amounts`."""
    kg_per_mol = reagent.kg_product_per_mol
    l_per_mol = reagent.litres_product_per_mol
    mol = dose_mol_l * basis.litres
    return Amounts(
        mmol_per_l=dose_mol_l * 1000.0,
        mg_per_l_product=None if kg_per_mol is None else dose_mol_l * kg_per_mol * 1e6,
        kg_product=None if kg_per_mol is None else mol * kg_per_mol,
        litres_product=None if l_per_mol is None else mol * l_per_mol,
        kg_active=mol * reagent.compound.molar_mass_g_mol / 1000.0)
