"""Many variants of one set of measurements, inferred at once.

The precision check moves one reading at a time and the uncertainty sample
moves all of them; both need the waters behind thousands of variants of the
same measurements. :func:`infer_many` takes the steps of
:func:`dosing.planning.effluent.infer_water`, vectorised: carbonate from the
lab value (or from air, or as given), then the strong-ion balance from the
pH, with a mask of the variants a real water can be.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from ..chem import (CARBONATE, N_ACIDS, Mixture, carbonate_for_alkalinity, co2_in_air_mol_l,
                    speciate, strong_balance_at_ph)
from ..chem.mixture import LogKShift
from .effluent import (FULL_EXCHANGE, MAX_AIR_CARBONATE_MOL_L, MAX_CARBONATE_MOL_L,
                       MAX_IONIC_STRENGTH, aerate, air_exchange_fraction)
from .measurements import (CACO3_MG_PER_MEQ, LAB_PRECISION, LOW_READING_MG_L, Checked,
                           Measurements, check)

__all__ = ["Perturbation", "infer_many"]


@dataclass(frozen=True)
class Perturbation:
    """Many variants of one set of measurements, for :func:`infer_many` (arrays (n,))."""

    ph: np.ndarray
    temperature_c: np.ndarray
    lab_mg_l: np.ndarray         #: lab alkalinity or acidity [mg/L as CaCO3] (ignored if none)
    solute_factor: np.ndarray    #: each listed solute over its value given [-]
    metal_factor: np.ndarray     #: each metal over its value given [-]
    shift: LogKShift | None = None   #: the model's constants moved per variant


def _many_carbonate(job: Checked, given_c: bool, open_to_air: bool,
                    v: Perturbation, vec: np.ndarray) -> np.ndarray:
    """Carbonate of each variant, written into ``vec``; the mask of possible ones."""
    n = v.ph.size
    ok = np.ones(n, dtype=bool)
    measured = job.lab
    if measured is not None:
        mg = np.maximum(v.lab_mg_l, 0.0)
        eq = measured.eq_l / measured.mg_l * mg if measured.mg_l > 0 else (
            measured.sign * mg / CACO3_MG_PER_MEQ / 1000.0)
        past = measured.at_or_past_end(v.ph)
        c, coef, _ = carbonate_for_alkalinity(
            vec, v.ph, v.temperature_c, eq, measured.endpoint_ph, activity=job.activity,
            extra_ionic_strength=job.known_i, unknown_pka=job.unknown_pka,
            ferrous_oxidised=measured.kind == "acidity", shift=v.shift)
        floor_mg = np.abs(eq - c * coef) * CACO3_MG_PER_MEQ * 1000.0
        slack = np.maximum(LOW_READING_MG_L, LAB_PRECISION * floor_mg)
        zero = (c < 0) & ((mg <= LOW_READING_MG_L) | (floor_mg - mg <= slack))
        # At or past the end point the lab finds nothing: 0 is right, more is not.
        none_left = past & (mg == 0)
        ok &= none_left | (~past & np.isfinite(c) & ((c >= 0) | zero)
                           & (c <= MAX_CARBONATE_MOL_L))
        vec[:, CARBONATE] = np.where(ok & ~none_left & (c > 0), c, 0.0)
    elif not given_c and open_to_air:
        co2 = co2_in_air_mol_l(v.temperature_c, job.pco2_uatm * 1e-6)
        probe = speciate(Mixture.build(vec, 0.0, job.known_i, v.temperature_c, co2,
                                       job.activity, job.unknown_pka, v.shift), v.ph,
                         solids=False)
        vec[:, CARBONATE] = probe.totals_mol_l[:, CARBONATE]
        ok &= vec[:, CARBONATE] <= MAX_AIR_CARBONATE_MOL_L
    return ok


def infer_many(measurements: Measurements, variants: Perturbation
               ) -> tuple[Mixture, np.ndarray]:
    """The waters behind many variants of one set of measurements, at once.

    The measurements are checked once; each variant moves the pH,
    temperature, lab value and totals. The same steps as
    :func:`infer_water`, vectorised: carbonate from the lab value (or from
    air, or as given), then the strong-ion balance from the pH.

    Returns the mixtures, ready for dosing as :meth:`Water.mixture` makes
    them (aerated iron, CO2 held by air when the water stands long enough,
    calcite as the measurements say), and a mask of the variants that a
    real water can be (a lab value below what the rest implies, beyond the
    lab's precision, or an unsettled ionic strength is not).
    """
    m = measurements
    job = check(m)
    air_equilibrium = bool(m.open_to_air) and air_exchange_fraction(
        job.hours_in_air, job.depth_m) >= FULL_EXCHANGE
    v = variants
    n = v.ph.size
    vec = np.repeat(job.vec[None, :], n, axis=0)
    vec[:, :N_ACIDS] *= v.solute_factor[:, None]
    vec[:, N_ACIDS:] *= v.metal_factor[:, None]
    ok = _many_carbonate(job, "carbonate" in job.totals, bool(m.open_to_air), v, vec)
    s, ionic = strong_balance_at_ph(vec, v.ph, v.temperature_c, activity=job.activity,
                                    extra_ionic_strength=job.known_i,
                                    unknown_pka=job.unknown_pka,
                                    known_strong_eq_l=job.known_eq, shift=v.shift)
    ok &= np.isfinite(s) & np.isfinite(ionic) & (ionic <= MAX_IONIC_STRENGTH)
    s = np.where(ok, s, 0.0)
    strong_i = job.known_i + 0.5 * np.abs(s - job.known_eq)
    co2 = (co2_in_air_mol_l(v.temperature_c, job.pco2_uatm * 1e-6) if air_equilibrium
           else np.full(n, math.nan))
    tank = aerate(vec) if m.oxidise_ferrous else vec
    mix = Mixture.build(tank, s, strong_i, v.temperature_c, co2, job.activity, job.unknown_pka,
                        v.shift)
    return replace(mix, calcite=m.calcite == "precipitates"), ok
