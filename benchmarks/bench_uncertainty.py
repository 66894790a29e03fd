"""Speed of the dose uncertainty and the staged dose (issue 13).

Prints figures; asserts nothing. For each demo: the 2,000-sample uncertainty
of one plan (one vectorised inference, dose solve and forward solve) and the
staged dose with its trim table, against the simple baseline of the same
number of waters planned one at a time (``infer_water`` + ``dose_to_ph`` in
a loop; timed on 40 and scaled).

    python benchmarks/bench_uncertainty.py
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np

from _timing import best_of
from dosing.planning.effluent import infer_water
from dosing.chem import dose_to_ph
from dosing.io.scenario import load_scenario
from dosing.planning.job import make_plan
from dosing.planning.uncertainty import Spread, dose_uncertainty, staged_dose, trim_doses

ROOT = Path(__file__).resolve().parents[1]
DEMOS = ("plating-rinse-metals", "pickling-ferrous-rinse", "alum-rinse", "magnesia-acid-rinse",
         "food-acetate-stream", "hard-wash-lime", "lime-acid-batch", "etch-rinse-ammonia",
         "electroless-edta-rinse")


def main() -> None:
    spread = Spread(samples=2000)
    print(f"{'demo':<22}{'2,000 samples':>14}{'staging':>10}{'20-row trim':>13}"
          f"{'loop of 2,000':>15}{'ratio':>7}")
    for name in DEMOS:
        s = load_scenario(str(ROOT / "scenarios" / f"{name}.toml"))
        plan = make_plan(s)
        inputs = replace(s.measurements, calcite=plan.water.calcite)
        t_unc, unc = best_of(lambda: dose_uncertainty(inputs, plan, spread))
        t_stage, st = best_of(lambda: staged_dose(plan, unc, spread))
        readings = np.linspace(plan.water.ph, plan.target.ph_aim, 20)
        first = st.first_mol_l if st is not None else 0.8 * plan.dose_mol_l
        t_trim, _ = best_of(lambda: trim_doses(plan, first, readings))
        rng = np.random.default_rng(1)
        phs = inputs.ph + 0.05 * rng.standard_normal(40)
        r = plan.reagent.vector()

        def loop():
            for ph in phs:
                try:
                    w = infer_water(replace(inputs, ph=float(ph)))
                except ValueError:
                    continue          # an impossible variant (the sample skips it too)
                dose_to_ph(w.mixture(), r, plan.target.ph_aim)
        t_loop, _ = best_of(loop, 1)
        t_loop *= 2000 / 40
        print(f"{name:<22}{t_unc * 1000:>11.0f} ms{t_stage * 1000:>7.0f} ms"
              f"{t_trim * 1000:>10.0f} ms{t_loop * 1000:>12.0f} ms{t_loop / t_unc:>6.0f}x")
    print("staging = first dose, 20-row trim table, and following the table in each of the")
    print("2,000 waters to state how often it lands in the window (two forward solves)")
    print("targets (issue 13): 2,000 samples under 100 ms, a 20-row trim table under 50 ms;")
    print("(issue 24): a plan with ligands and ion pairs (the etch and electroless demos)")
    print("under 200 ms; the samples include the model's constants since issue 24")


if __name__ == "__main__":
    main()
