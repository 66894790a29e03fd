"""The discharge checks of a train: the water leaving its last step against the window and the permit.

Permits usually cap *total* metals: what is dissolved plus what the
separation let through as suspended solids. Each metal cap is checked on
that basis by default (``[permit] metals_basis = "dissolved"`` checks the
dissolved metal only), and the sheet says which. The ions a permit caps
come from the same water: sodium, potassium, chloride and nitrate as
carried through the train with what each dose added, calcium, magnesium
and sulfate as dissolved in the final equilibrium; the rise of dissolved
solids is the sum over the doses.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

from ..chem import METAL_COLUMNS, speciate, system_index
from ..chem.metals import METALS, label
from ..chem.species import MOLAR_MASS
from .basis import Target
from .effluent import Water
from .findings import Finding, Q
from .hazards import ION_PERMIT_KEYS

__all__ = ["MetalCap", "Discharge", "discharge_of", "METAL_BASES"]

METAL_BASES = ("total", "dissolved")


@dataclass(frozen=True)
class MetalCap:
    """One metal cap against the discharged water [mg/L as the element]."""

    metal: str
    cap_mg_l: float
    dissolved_mg_l: float
    suspended_mg_l: float
    basis: str                      #: "total" or "dissolved"

    @property
    def value_mg_l(self) -> float:
        return self.dissolved_mg_l + (self.suspended_mg_l if self.basis == "total" else 0.0)

    @property
    def met(self) -> bool:
        return self.value_mg_l <= self.cap_mg_l


@dataclass(frozen=True)
class Discharge:
    """The discharged water against the window and every cap."""

    ph: float
    in_window: bool
    metals: tuple[MetalCap, ...]
    checks: tuple[Finding, ...]

    @property
    def met(self) -> bool:
        """Window and every cap met."""
        return self.in_window and not any(c.level == "danger" for c in self.checks)


def discharge_of(final: Water, target: Target, permit: Mapping[str, float],
                 tds_added_mg_l: float, metals_basis: str = "total") -> Discharge:
    """The checks of the water leaving the last step."""
    sp = speciate(final.mixture(air_equilibrium=False), np.array([final.ph]))
    inside = target.contains(final.ph)
    checks = [Finding("discharge-ph", "info" if inside else "danger",
                      "discharged at pH {ph:.2f}, " + ("inside" if inside else "OUTSIDE")
                      + " the window {ph_min:g} to {ph_max:g}",
                      {"ph": Q(final.ph, "pH"), "ph_min": Q(target.ph_min, "pH"),
                       "ph_max": Q(target.ph_max, "pH")})]
    metals = []
    for m, col in zip(METALS, METAL_COLUMNS):
        key = f"{m.id}_mg_l"
        if key not in permit:
            continue
        mg = m.molar_mass_g_mol * 1000.0
        cap = MetalCap(m.id, float(permit[key]), float(sp.totals_mol_l[0, col]) * mg,
                       float(sp.solids_mol_l[0, col]) * mg, metals_basis)
        metals.append(cap)
        checks.append(_metal_check(cap))
    checks += _ion_checks(final, sp, permit, tds_added_mg_l)
    return Discharge(final.ph, inside, tuple(metals), tuple(checks))


def _metal_check(c: MetalCap) -> Finding:
    how = ("{dissolved_mg_l} dissolved + {suspended_mg_l} in the solids let through"
           if c.basis == "total" else "{dissolved_mg_l} dissolved")
    return Finding(f"permit-{c.metal}_mg_l", "info" if c.met else "danger",
                   "permit cap {metal} {cap_mg_l:g} ({basis}): " + how
                   + (" - within the cap" if c.met else " - EXCEEDS THE CAP"),
                   {"cap_mg_l": Q(c.cap_mg_l, "mg/L"), "value_mg_l": Q(c.value_mg_l, "mg/L"),
                    "dissolved_mg_l": Q(c.dissolved_mg_l, "mg/L"),
                    "suspended_mg_l": Q(c.suspended_mg_l, "mg/L")},
                   {"metal": label(c.metal), "basis": c.basis})


def _ion_checks(final: Water, sp, permit: Mapping[str, float], tds: float) -> list[Finding]:
    """The permit's ion caps on the discharged water."""
    after = {k: v for k, v in final.ions_mg_l.items()}
    for name, formula in (("calcium", "Ca"), ("magnesium", "Mg")):
        after[name] = float(sp.totals_mol_l[0, system_index(name)]) * MOLAR_MASS[formula] * 1e3
    after["sulfate"] = float(sp.totals_mol_l[0, system_index("sulfate")]) * MOLAR_MASS["SO4"] * 1e3
    out = []
    for key, cap in permit.items():
        if key not in ION_PERMIT_KEYS:
            continue
        value = tds if key == "tds_increase_mg_l" else after.get(key.removesuffix("_mg_l"), 0.0)
        over = value > cap
        out.append(Finding(f"permit-{key}", "danger" if over else "info",
                           "permit cap {what} {cap_mg_l:g}: {value_mg_l} in the discharge"
                           + (" - EXCEEDS THE CAP" if over else " - within the cap"),
                           {"value_mg_l": Q(value, "mg/L"), "cap_mg_l": Q(cap, "mg/L")},
                           {"what": label(key.removesuffix("_mg_l"))}))
    return out
