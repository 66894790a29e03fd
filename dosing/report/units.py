"""Unit systems for what people read: metric and US customary, in one place.

Every amount the engine computes is SI (kg, L, m³, m³/h); a sheet in US
units shows pounds, gallons and gpm, converted here by exact factors.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from .numbers import fmt

__all__ = ["Units", "UnitSystem", "UNIT_SYSTEMS", "L_PER_US_GAL", "KG_PER_LB", "product_text"]

L_PER_US_GAL = 3.785411784     # exact by definition (NIST SP 811)
KG_PER_LB = 0.45359237         # exact by definition (NIST SP 811)


@dataclass(frozen=True)
class Units:
    """A unit system for the sheet."""

    name: str
    mass: str
    mass_per_kg: float
    product_volume: str
    product_volume_per_l: float
    water_volume: str
    water_volume_per_m3: float
    flow: str
    flow_per_m3_h: float


#: The unit systems by name (the keys of :data:`UNIT_SYSTEMS`).
UnitSystem = Literal["metric", "us"]

UNIT_SYSTEMS: dict[str, Units] = {
    "metric": Units("metric", "kg", 1.0, "L", 1.0, "m³", 1.0, "m³/h", 1.0),
    "us": Units("us", "lb", 1.0 / KG_PER_LB, "gal", 1.0 / L_PER_US_GAL,
                "gal", 1000.0 / L_PER_US_GAL, "gpm", 1000.0 / L_PER_US_GAL / 60.0),
}


def product_text(kg: float | None, litres: float | None, units: str = "metric",
                 digits: int = 3, *, per_hour: bool = False) -> str:
    """An amount of product as "16.8 kg = 11.0 L" in the unit system
    ("16.8 kg/h = 11.0 L/h" with ``per_hour``: a flow's amounts carry their
    time base everywhere).

    >>> product_text(16.8, 11.0), product_text(1.0, None, "us")
    ('16.8 kg = 11.0 L', '2.20 lb')
    """
    u = UNIT_SYSTEMS[units]
    h = "/h" if per_hour else ""
    parts = []
    if kg is not None:
        parts.append(f"{fmt(kg * u.mass_per_kg, digits)} {u.mass}{h}")
    if litres is not None:
        parts.append(f"{fmt(litres * u.product_volume_per_l, digits)} {u.product_volume}{h}")
    return " = ".join(parts) if parts else "n/a"


def volume_text(m3: float, units: str = "metric") -> str:
    """A volume of water or sludge: litres below one cubic metre (a cake of
    0.00686 m³ reads as 6.86 L), else m³; gallons in US units.

    >>> volume_text(0.00686), volume_text(12.5), volume_text(1.0, "us")
    ('6.86 L', '12.5 m³', '264 gal')
    """
    u = UNIT_SYSTEMS[units]
    if u.name == "metric" and m3 < 1.0:
        return f"{fmt(m3 * 1000.0)} L"
    return f"{fmt(m3 * u.water_volume_per_m3)} {u.water_volume}"


def money_text(amount: float, currency: str) -> str:
    """A cost with its currency ("7.05 EUR"); the bare number when the
    scenario names none (see :data:`NO_CURRENCY`).

    >>> money_text(7.05, "EUR"), money_text(7.05, "")
    ('7.05 EUR', '7.05')
    """
    return f"{fmt(amount)} {currency}" if currency else fmt(amount)


#: Said beside a cost when the scenario names no currency.
NO_CURRENCY = "(in the units the price is given in: no currency named)"
