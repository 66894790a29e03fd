"""Speed of the buffer-spectrum titration fit (issue 14).

Prints figures; asserts nothing. A 40-point synthetic titration of a water
with acetate, phosphate, ammonia and carbonate (0.01 pH noise), fitted by
the buffer spectrum (NNLS on a pKa grid, four refinement passes, 30
bootstrap resamples) and by the simple least-squares fit it replaces when
the curve needs it, in the same run.

    python benchmarks/bench_titration_fit.py
"""

from __future__ import annotations

import math

import numpy as np

from dosing.chem.activity import DAVIES, IDEAL
from dosing.planning.measurements import Measurements
from dosing import infer_water
from _timing import best_of
from dosing.planning.buffer_fit import fit_spectrum
from dosing.chem import N_SYSTEMS, Mixture, add_dose, solve_ph, system_index
from dosing.planning.bench import check_curve, parse_titrant
from dosing.planning.water_fit import fit_water


def curve_of(n: int = 40, t_c: float = 15.0):
    tot = np.zeros(N_SYSTEMS)
    for k, v in (("acetate", 2e-3), ("phosphate", 1e-3), ("carbonate", 1.5e-3),
                 ("ammonia", 0.8e-3)):
        tot[system_index(k)] = v
    tit = parse_titrant("0.1 M NaOH")
    v = np.linspace(0, 12, n)
    mix = Mixture.build(np.repeat(tot[None, :], n, 0), -0.004, 0.002, t_c, math.nan, DAVIES)
    ph = solve_ph(add_dose(mix, tit.vector(), v * tit.molarity_mol_l / 50.0))
    ph = ph + np.random.default_rng(3).normal(0, 0.01, n)
    return check_curve(50.0, tit, v, ph), infer_water(Measurements(float(ph[0]), t_c,
                                                      solutes_mmol_l={"carbonate": 0}))


def main() -> None:
    curve, base = curve_of()
    t_spec, spec = best_of(lambda: fit_spectrum(curve, base))
    t_simple, simple = best_of(lambda: fit_water(curve, base))
    print(f"40-point curve, 4 buffers: spectrum fit {t_spec * 1000:.0f} ms "
          f"(misfit {spec.rms_ph:.4f} pH RMS), simple fit {t_simple * 1000:.0f} ms "
          f"(misfit {simple.rms_ph:.3f}); ratio {t_spec / t_simple:.2f}")
    print("target (issue 14): under 200 ms for a 40-point curve")


if __name__ == "__main__":
    main()
