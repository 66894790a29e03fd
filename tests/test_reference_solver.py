"""The vectorised dose solve against a plain scalar reference, water by water.

The reference below is written for reading, not speed: for one water it
builds every species fraction from the constants with ``math``, caps each
metal at its hydroxide's solubility, finds the pH by ``scipy.optimize.brentq``
on the charge balance at a fixed ionic strength, settles the ionic strength
by plain repetition, and finds the dose by ``brentq`` on that forward pH. It
shares only the constants (``constants_at``) and the activity models with
the engine. Hypothesis draws random waters (weak acids, hydrolysing metals
that precipitate, either activity model, 5-45 °C); the engine's direct
dose solve must agree to 1e-6 relative (the habit of fuzzing the fast code
against a naive version, as ChEDL ``chemicals`` does in its tests).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st
from scipy.optimize import brentq

from dosing.chem import Mixture, add_dose, constants_at, dose_to_ph, solve_ph, system_index
from dosing.chem.activity import DAVIES, IDEAL
from dosing.chem.columns import COLUMN_IDS, N_SYSTEMS, SOLID_Z, Z
from dosing.planning.reagents import get_reagent

pytestmark = pytest.mark.slow


def _fractions(ah, ks, charges, g):
    """Fractions of one system's forms at activity ``ah``: step i takes form i-1
    (charge z) to form i (charge z - 1), [A_i]/[A_(i-1)] = K_i γ(z) / (a_H γ(z-1))."""
    ratios = [1.0]
    for i, k in enumerate(ks):
        ratios.append(ratios[-1] * k * g(charges[i]) / (ah * g(charges[i + 1])))
    s = sum(ratios)
    return [r / s for r in ratios]


def _balance(tot, strong, strong_i, const, model, ph, ionic):
    """(charge residual [eq/L], ionic strength it implies [mol/L]) of one water."""
    f = model.charge_term(min(ionic, 20.0), float(const.a[0]))
    g = (lambda z: 1.0) if f is None else (lambda z: 10.0 ** (-z * z * f))
    ah = 10.0 ** -ph
    h, oh = ah / g(1), float(const.kw[0]) / (ah * g(1))
    resid, i2 = strong + h - oh, h + oh
    for j in range(N_SYSTEMS):
        if tot[j] == 0.0:
            continue
        steps = [k for k in const.k[0, j] if k > 0]
        charges = [float(Z[j, i]) for i in range(len(steps) + 1)]
        alpha = _fractions(ah, steps, charges, g)
        total = tot[j]
        z = SOLID_Z[j]
        if z > 0 and math.isfinite(const.log_ks0[0, j]):
            free = 10.0 ** const.log_ks0[0, j] * ah ** z / g(z)   # Me(OH)z(s) + z H+ = Me + z H2O
            total = min(total, free / alpha[0])
        resid += total * sum(a * c for a, c in zip(alpha, charges))
        i2 += total * sum(a * c * c for a, c in zip(alpha, charges))
    return resid, 0.5 * i2 + strong_i


def reference_ph(tot, strong, strong_i, t, model) -> float:
    """pH of one water: brentq at a fixed ionic strength, the strength repeated to rest."""
    const = constants_at(t, None)
    ionic, ph = strong_i, 7.0
    for _ in range(400):
        ph = brentq(lambda p: _balance(tot, strong, strong_i, const, model, p, ionic)[0],
                    -1.5, 15.5, xtol=1e-14, maxiter=400)
        new = _balance(tot, strong, strong_i, const, model, ph, ionic)[1]
        if model.ideal or abs(new - ionic) <= 1e-14 + 1e-12 * new:
            return ph
        ionic = new
    raise AssertionError("the reference ionic strength did not settle")


def reference_dose(tot, strong, strong_i, t, model, reagent, target) -> float:
    """Dose [mol/L] that brings one water to ``target``: brentq on the forward pH."""
    r = reagent.vector()

    def ph_after(d):
        f = 1.0 / (1.0 + d * r.volume_l)
        return reference_ph(f * (tot + d * r.totals_mol), f * (strong + d * r.strong_eq),
                            f * (strong_i + d * r.ionic_strength), t, model)
    way = 1.0 if reagent.raises_ph else -1.0
    return brentq(lambda d: way * (ph_after(d) - target), 0.0, 2.0, xtol=1e-15, rtol=1e-12)


@st.composite
def waters(draw):
    tot = np.zeros(N_SYSTEMS)
    for sid, hi in (("carbonate", 8e-3), ("phosphate", 2e-3), ("acetate", 5e-3),
                    ("ammonia", 2e-3), ("sulfate", 1e-2)):
        if draw(st.booleans()):
            tot[COLUMN_IDS.index(sid)] = draw(st.floats(1e-5, hi))
    for mid, hi in (("iron_iii", 1e-3), ("aluminium", 1e-3), ("zinc", 5e-4)):
        if draw(st.booleans()):
            tot[system_index(mid)] = draw(st.floats(1e-6, hi))
    strong = draw(st.floats(-0.01, 0.005))
    return (tot, strong, 0.5 * abs(strong), draw(st.floats(5.0, 45.0)),
            draw(st.sampled_from([IDEAL, DAVIES])))


@settings(max_examples=120, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(water=waters(), rise=st.floats(0.3, 3.5), rid=st.sampled_from(["caustic-50", "sulfuric-98"]))
def test_vectorised_dose_equals_the_plain_reference(water, rise, rid):
    tot, strong, strong_i, t, model = water
    reagent = get_reagent(rid)
    ph0 = reference_ph(tot, strong, strong_i, t, model)
    target = ph0 + rise if reagent.raises_ph else ph0 - rise
    if not 2.5 <= target <= 11.5:
        return                                  # outside what these products are used for
    # The reference is the one-component model (no complexes, no ion pairs).
    mix = replace(Mixture.build(tot, strong, strong_i, t, math.nan, model), complexes=False)
    assert float(solve_ph(mix)[0]) == pytest.approx(ph0, abs=1e-8)
    dose, _ = dose_to_ph(mix, reagent.vector(), target)
    ref = reference_dose(tot, strong, strong_i, t, model, reagent, target)
    assert float(dose[0]) == pytest.approx(ref, rel=1e-6, abs=1e-12)
    # and the forward solve of the engine lands on the target with its own dose
    after = solve_ph(add_dose(mix, reagent.vector(), float(dose[0])))
    assert float(after[0]) == pytest.approx(target, abs=1e-7)


def test_the_reference_matches_a_textbook_buffer():
    """0.01 M acetic acid + 0.01 M sodium acetate, ideal, 25 °C: pH = pKa =
    4.756 to within the water's own contribution (Goldberg et al. 2002 pKa,
    from memory; the same case as the chempy check in test_equilibrium)."""
    tot = np.zeros(N_SYSTEMS)
    tot[COLUMN_IDS.index("acetate")] = 0.02
    assert reference_ph(tot, 0.01, 0.0, 25.0, IDEAL) == pytest.approx(4.7575, abs=2e-4)
