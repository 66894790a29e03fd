"""Speed of the vectorised core: waters per second.

Prints figures; asserts nothing (machines here are shared and noisy).
Compares the vectorised solvers with a plain per-water scalar root find
(scipy brentq on the same charge balance), written here as the baseline.

    python benchmarks/bench_solver.py [N]
"""

from __future__ import annotations

import math
import sys
import time

import numpy as np
from scipy.optimize import brentq

from dosing.chem.activity import DAVIES, IDEAL, ActivityModel
from dosing.chem import (N_SYSTEMS, Mixture, constants_at, dose_to_ph, solve_ph,
                                system_index)
from dosing.planning.reagents import get_reagent


def waters(n: int, activity: ActivityModel, seed: int = 7, metals: bool = False) -> Mixture:
    rng = np.random.default_rng(seed)
    tot = np.zeros((n, N_SYSTEMS))
    if metals:
        # An acid mine or plating water: iron, aluminium, zinc, manganese,
        # calcium, all precipitating somewhere between pH 4 and 11.
        for mid, hi in (("iron_iii", 2e-3), ("aluminium", 2e-3), ("zinc", 1e-3),
                        ("manganese", 2e-4), ("calcium", 5e-3)):
            tot[:, system_index(mid)] = rng.uniform(0.0, hi, n)
    tot[:, system_index("carbonate")] = rng.uniform(0.0, 0.01, n)
    tot[:, system_index("sulfate")] = rng.uniform(0.0, 0.01, n)
    tot[:, system_index("acetate")] = rng.uniform(0.0, 0.005, n)
    tot[:, system_index("ammonia")] = rng.uniform(0.0, 0.002, n)
    s = rng.uniform(-0.01, 0.02, n)
    t = rng.uniform(5.0, 45.0, n)
    return Mixture.build(tot, s, 0.5 * np.abs(s), t, math.nan, activity)


def timed(fn, repeat=3):
    best = math.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def scalar_baseline(mix: Mixture, rows: int) -> float:
    """Per-water brentq on the ideal charge balance (plain Python loop)."""
    const = constants_at(mix.temperature_c[:rows])
    cols = [system_index(k) for k in ("carbonate", "sulfate", "acetate", "ammonia")]
    z0 = {system_index("sulfate"): -1, system_index("ammonia"): 1}

    def resid(ph, i):
        h = 10.0 ** -ph
        r = mix.strong_eq_l[i] + h - const.kw[i] / h
        for j in cols:
            k = const.k[i, j]
            terms = [1.0]
            for kk in k:
                terms.append(terms[-1] * kk / h if kk > 0 else 0.0)
            tot = sum(terms)
            q = sum((z0.get(j, 0) - m) * t / tot for m, t in enumerate(terms))
            r += mix.totals_mol_l[i, j] * q
        return r

    t0 = time.perf_counter()
    for i in range(rows):
        brentq(resid, -1.5, 15.5, args=(i,), xtol=1e-12)
    return (time.perf_counter() - t0) / rows


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
    caustic = get_reagent("caustic-50").vector()
    target = np.full(n, 7.5)
    print(f"waters: {n:,}")
    per_row_scalar = scalar_baseline(waters(2000, IDEAL), 2000)
    print(f"scalar brentq baseline (ideal):  {1 / per_row_scalar:12,.0f} waters/s")
    base = {}
    for model, metals in ((IDEAL, False), (DAVIES, False), (IDEAL, True), (DAVIES, True)):
        mix = waters(n, model, metals=metals)
        label = f"{model.label:<6}" + (" +metals" if metals else "")
        t_ph = timed(lambda: solve_ph(mix))
        t_dose = timed(lambda: dose_to_ph(mix, caustic, target))
        if not metals:
            base[model.name] = t_dose
        else:
            print(f"{label}: dose solve keeps {base[model.name] / t_dose:.0%} of the "
                  "metal-free rate (issue 16 asks for at least 33 %)")
        print(f"{label} forward pH solve:        {n / t_ph:12,.0f} waters/s"
              f"  ({t_ph * 1000:.0f} ms; x{per_row_scalar * n / t_ph:,.0f} vs scalar)")
        print(f"{label} dose to pH 7.5 (direct): {n / t_dose:12,.0f} waters/s"
              f"  ({t_dose * 1000:.0f} ms; x{per_row_scalar * n / t_dose:,.0f} vs scalar)")


if __name__ == "__main__":
    main()
