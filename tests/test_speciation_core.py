"""The speciation core (dosing.chem.coupled): hand calculations, and its own balances.

Each hand calculation names its constants and their source; the random-water
tests recompute, from the speciation's own output and the catalogue alone,
every mass balance, every complex's mass action, every solid's saturation
and the charge balance.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from dosing.chem import Mixture, add_dose, dose_to_ph, solve_ph, speciate, system_index
from dosing.chem.activity import DAVIES, IDEAL, debye_huckel_a
from dosing.chem.complexes import COMPLEXES
from dosing.chem.coupled import ref_forms
from dosing.chem.columns import COLUMN_IDS, Z
from dosing.chem.phases import PHASES
from dosing.planning.reagents import get_reagent
from tests.helpers import totals

_CX = {c.id: c for c in COMPLEXES}
_PH = {p.id: p for p in PHASES}
_REF = ref_forms()


def test_copper_ammine_by_hand():
    # 50 mg/L Cu and 200 mg/L NH3-N at pH 9 (ideal, 25 °C), Cu(OH)2 present:
    # uncomplexed copper U is fixed by the hydroxide; the ammines add
    # Cu2+ x sum beta_j [NH3]^j (log beta 4.13, 7.61, 10.48, 12.59, Smith &
    # Martell, from memory), [NH3] = N alpha (pKa 9.245, Goldberg et al. 2002,
    # from memory), Cu2+ = U alpha_0 (hydrolysis *beta 10^-7.95, -16.23,
    # -26.60, -39.74: Powell et al. 2007, from memory).
    ph = 9.0
    sp = speciate(Mixture.build(totals(copper=50 / 63546, ammonia=200 / 14007), 0.0, 0.0,
                                25.0, math.nan, IDEAL), np.array([ph]))
    betas = (4.13, 7.61, 10.48, 12.59)
    a0 = 1 / (1 + sum(10 ** (b + ph * j) for j, b in
                      enumerate((-7.95, -16.23, -26.60, -39.74), start=1)))
    cu = system_index("copper")
    u = sp.free[0, cu]
    n_total, bound_n = 200 / 14007, 0.0
    for _ in range(5):                     # the ammonia the complexes hold, by hand
        nh3 = (n_total - bound_n) / (1 + 10 ** (9.245 - ph))
        terms = [10 ** b * nh3 ** j * u * a0 for j, b in enumerate(betas, start=1)]
        bound_n = sum(j * c for j, c in enumerate(terms, start=1))
    assert sp.totals_mol_l[0, cu] == pytest.approx(u + sum(terms), rel=1e-6)
    assert sp.totals_mol_l[0, cu] * 63546 > 50 * 0.002    # the hydroxide-only figure: 0.002


@pytest.mark.parametrize("metal", ["copper", "nickel", "zinc", "cadmium", "lead"])
def test_equimolar_edta_keeps_the_metal_dissolved_at_ph_9(metal):
    # A metal with as much EDTA (log K 16.5 to 18.8, Smith & Martell, from
    # memory): at pH 9 the chelate holds it; no hydroxide forms (any sound
    # set of constants agrees).
    sp = speciate(Mixture.build(totals(**{metal: 1e-3, "edta": 1e-3}), 0.0, 0.0, 25.0,
                                math.nan, DAVIES), np.array([9.0]))
    assert sp.totals_mol_l[0, system_index(metal)] == pytest.approx(1e-3, rel=1e-3)
    assert sp.solids_mol_l[0, system_index(metal)] < 1e-6


def test_siderite_by_hand():
    # 50 mg/L Fe(II), 2.5 mmol/L carbonate, pH 8.5, ideal: with siderite
    # present Fe2+ CO3 2- = Ksp (10^-10.45, Bruno et al. 1992, from memory);
    # FeHCO3+ (log K 2.0 with HCO3-, Nordstrom et al. 1990, from memory) holds
    # P = Ksp 10^(2.0 + pK2 - pH); the quadratic is that of calcite.
    ph, fe, c = 8.5, 50 / 55845, 2.5e-3
    h = 10 ** -ph
    k1, k2 = 10 ** -6.352, 10 ** -10.329
    a2 = k1 * k2 / (h * h + k1 * h + k1 * k2)
    a_fe = 1 / (1 + sum(10 ** (b + ph * j) for j, b in
                        enumerate((-9.5, -20.57, -31.0), start=1)))
    ksp = 10 ** -10.45
    pair = ksp * 10 ** (2.0 + 10.329 - ph)
    x = 0.5 * ((fe + c - 2 * pair) - math.sqrt((fe - c) ** 2 + 4 * ksp / (a_fe * a2)))
    sp = speciate(Mixture.build(totals(iron_ii=fe, carbonate=c), 0.0, 0.0, 25.0, math.nan,
                                IDEAL), np.array([ph]))
    got = dict(zip(sp.phase_ids, sp.phase_mol_l[0]))
    assert got["siderite"] == pytest.approx(x, rel=1e-3)
    assert got["iron_ii_hydroxide"] == 0.0


# ------------------------------------------------------- own balances --
_COMPONENTS = ("carbonate", "sulfate", "ammonia", "citrate", "fluoride", "calcium",
               "magnesium", "copper", "zinc", "nickel", "iron_iii", "aluminium", "iron_ii")


@st.composite
def waters(draw):
    tot = totals()
    for cid in _COMPONENTS:
        if draw(st.booleans()):
            tot[system_index(cid)] = draw(st.floats(1e-5, 5e-3))
    return tot, draw(st.floats(-0.01, 0.01)), draw(st.floats(5.0, 45.0)), \
        draw(st.sampled_from([IDEAL, DAVIES]))


def _log_gamma(model, z, ionic, t_c):
    return float(model.log_gamma(z, ionic, float(debye_huckel_a(t_c))))


def _ref_activity(sp, cid, model, t_c):
    """log10 activity of a component's reference form, from the speciation's output."""
    j = system_index(cid)
    r = _REF[j]
    conc = sp.free[0, j] * sp.alpha[0, j, r]
    return math.log10(conc) + _log_gamma(model, Z[j, r], float(sp.ionic_strength[0]), t_c)


@settings(max_examples=80, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(water=waters(), ph=st.floats(4.0, 11.0))
def test_mass_action_mass_balance_and_charge_hold(water, ph):
    tot, strong, t_c, model = water
    mix = Mixture.build(tot, strong, 0.5 * abs(strong), t_c, math.nan, model)
    sp = speciate(mix, np.array([ph]))
    if not sp.complex_ids:
        return
    log_ah, ionic = -ph, float(sp.ionic_strength[0])
    # Each complex obeys its mass action (constant at this temperature).
    inv = 1 / (t_c + 273.15) - 1 / 298.15
    for cid, c in zip(sp.complex_ids, sp.complex_mol_l[0]):
        cx = _CX[cid]
        if any(tot[system_index(p)] == 0 for p, _ in cx.parts) or c <= 1e-300:
            continue
        log_k = cx.log_k25 - (cx.enthalpy_kj_mol or 0.0) * 1000 / (8.314462618 * math.log(10)) \
            * inv
        z = sum(Z[system_index(p), _REF[system_index(p)]] * n for p, n in cx.parts) + cx.h
        expect = (log_k + sum(n * _ref_activity(sp, p, model, t_c) for p, n in cx.parts)
                  + cx.h * log_ah - _log_gamma(model, z, ionic, t_c))
        assert math.log10(c) == pytest.approx(expect, abs=1e-7), cid
    # Mass balance of every component: dissolved (complexes in) + solids = total.
    for cid in _COMPONENTS:
        j = system_index(cid)
        if tot[j] > 0:
            assert sp.totals_mol_l[0, j] + sp.solids_mol_l[0, j] == pytest.approx(
                tot[j], rel=1e-9, abs=1e-18), cid
    # Charge balance recomputed species by species.
    charge = strong + sp.h_mol_l[0] - sp.oh_mol_l[0]
    for j in range(len(COLUMN_IDS)):
        if sp.free[0, j] > 0:
            charge += sp.free[0, j] * float(np.dot(sp.alpha[0, j], Z[j]))
    for cid, c in zip(sp.complex_ids, sp.complex_mol_l[0]):
        cx = _CX[cid]
        charge += c * (sum(Z[system_index(p), _REF[system_index(p)]] * n
                           for p, n in cx.parts) + cx.h)
    scale = abs(strong) + tot.sum()
    assert sp.charge_residual_eq_l[0] == pytest.approx(charge, abs=1e-10 * scale + 1e-15)


@settings(max_examples=40, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(water=waters(), rise=st.floats(0.5, 3.0), rid=st.sampled_from(["caustic-50", "lime",
                                                                     "sulfuric-98"]))
def test_dose_and_forward_solve_agree_when_components_couple(water, rise, rid):
    tot, strong, t_c, model = water
    mix = Mixture.build(tot, strong, 0.5 * abs(strong), t_c, math.nan, model)
    r = get_reagent(rid)
    ph0 = float(solve_ph(mix)[0])
    target = ph0 + rise if r.raises_ph else ph0 - rise
    if not 3.0 <= target <= 11.0:
        return
    d, grip = dose_to_ph(mix, r.vector(), np.array([target]))
    if not (np.isfinite(d[0]) and abs(grip[0]) > 1e-9):
        return
    back = solve_ph(add_dose(mix, r.vector(), d), ph_guess=np.array([target]))
    assert back[0] == pytest.approx(target, abs=1e-6)


def test_the_one_component_model_is_kept_when_asked():
    """complexes=False gives the hydroxide-only model (what the old hand
    calculations describe): copper with ammonia precipitates to 0.002 mg/L."""
    from dataclasses import replace
    mix = replace(Mixture.build(totals(copper=50 / 63546, ammonia=200 / 14007), 0.0, 0.0,
                                25.0, math.nan, IDEAL), complexes=False)
    sp = speciate(mix, np.array([9.0]))
    assert sp.totals_mol_l[0, system_index("copper")] * 63546 == pytest.approx(0.00204,
                                                                               rel=0.02)
    assert _PH["copper_hydroxide"].parts == (("copper", 1),)


# ------------------------------------------- compiled kernel vs numpy --
@settings(max_examples=60, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(water=waters(), ph=st.floats(4.0, 11.0))
def test_compiled_kernel_agrees_with_the_numpy_reference(water, ph):
    """The per-water compiled loop (chem/coupled_kernel.py) and the numpy
    reference (coupled.equilibrate_reference) solve the same equations to
    the same tolerances: every dissolved total, solid and complex agrees to
    the solvers' own resolution (mass balances to 1e-11 of each total)."""
    from dosing.chem import coupled
    tot, strong, t_c, model = water
    mix = Mixture.build(np.vstack([tot, tot * 1.3, tot * 0.2]), strong, 0.5 * abs(strong),
                        t_c, math.nan, model)
    phs = np.array([ph, ph + 0.3, ph - 0.5])
    coupled.KERNEL.on = True
    try:
        fast = speciate(mix, phs)
        coupled.KERNEL.on = False
        ref = speciate(mix, phs)
    finally:
        coupled.KERNEL.on = True
    scale = tot.sum() * 1.3 + 1e-30
    np.testing.assert_allclose(fast.totals_mol_l, ref.totals_mol_l, rtol=1e-8, atol=1e-10 * scale)
    np.testing.assert_allclose(fast.solids_mol_l, ref.solids_mol_l, rtol=1e-8, atol=1e-10 * scale)
    if ref.complex_mol_l is not None:
        np.testing.assert_allclose(fast.complex_mol_l, ref.complex_mol_l, rtol=1e-7,
                                   atol=1e-10 * scale)
    np.testing.assert_allclose(fast.charge_residual_eq_l, ref.charge_residual_eq_l,
                               atol=1e-10 * (scale + abs(strong)))


def test_kernel_rows_started_from_their_neighbour_match_cold_starts():
    """Rows that are variants of one water start from the row before (the
    continuation start of the kernel); each answer equals that water solved
    alone from a cold start."""
    rng = np.random.default_rng(11)
    base = totals(copper=5e-4, nickel=2e-4, zinc=5e-4, ammonia=2e-3, sulfate=5e-3,
                  carbonate=1e-3, calcium=1e-3)
    many = base[None, :] * rng.uniform(0.9, 1.1, (40, base.size))
    mix = Mixture.build(many, -0.004, 0.002, 20.0, math.nan, DAVIES)
    together = speciate(mix, np.full(40, 9.0))
    for i in (0, 7, 39):
        alone = speciate(mix.take(np.array([i])), np.array([9.0]))
        np.testing.assert_allclose(together.totals_mol_l[i], alone.totals_mol_l[0],
                                   rtol=1e-8, atol=1e-14)
        np.testing.assert_allclose(together.solids_mol_l[i], alone.solids_mol_l[0],
                                   rtol=1e-7, atol=1e-13)


@pytest.mark.parametrize("t_c", [5.0, 40.0, 60.0])
def test_solids_move_with_temperature_as_van_t_hoff_says(t_c):
    # van 't Hoff: ln K(T) = ln K(298.15 K) - dH/R (1/T - 1/298.15), dH the
    # enthalpy of the reaction K describes (dissolution for a solid). The
    # coupled core's constants of every solid with an enthalpy must be the
    # same as the direct solver's hydroxide constants and this formula; a
    # sign turned once made brucite 65 times too soluble at 40 °C.
    from dosing.chem.columns import constants_at
    from dosing.chem.coupled import tableau_for
    cols = np.arange(len(COLUMN_IDS))
    tab = tableau_for(cols, solids=True, calcite=False)
    _, lp = tab.log_k(np.array([t_c]))
    direct = constants_at(np.array([t_c]))
    inv = 1.0 / (t_c + 273.15) - 1.0 / 298.15
    for p, pid in enumerate(tab.phase_ids):
        phase = next((x for x in PHASES if x.id == pid), None)
        if phase is None or phase.enthalpy_kj_mol is None:
            continue                # CO2 from air; a solid with no enthalpy at hand
        expect = phase.log_k25 - phase.enthalpy_kj_mol * 1000.0 / (8.314462618 * math.log(10)) * inv
        assert lp[0, p] == pytest.approx(expect, abs=1e-9), pid
        if pid.endswith("_hydroxide"):
            col = COLUMN_IDS.index(pid.removesuffix("_hydroxide"))
            assert lp[0, p] == pytest.approx(direct.log_ks0[0, col], abs=1e-9), pid
    # Brucite, exothermic to dissolve: less soluble warm than cold.
    mg = tab.phase_ids.index("magnesium_hydroxide")
    assert (lp[0, mg] < 16.84) == (t_c > 25.0)
