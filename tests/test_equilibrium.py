"""Equilibrium pH against textbook cases, a reference chemistry library and
plain reference code kept in this file."""

import math
import warnings
from collections import defaultdict

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.optimize import brentq

from dosing.chem.activity import DAVIES, IDEAL
from dosing.chem import (CARBONATE, Mixture, constants_at, dose_to_ph,
                                solve_ph, speciate, strong_balance_at_ph,
                                system_index)
from dosing.planning.reagents import get_reagent
from dosing.chem.species import SYSTEMS

from tests.helpers import totals


def ideal(tot, strong, t=25.0):
    return Mixture.build(tot, strong, 0.0, t, math.nan, activity=IDEAL)


# Ideal-solution textbook cases at 25 °C. Expected pH computed from the same
# constants (pKw 13.995, carbonate 6.352/10.329, HSO4- 1.99, acetic 4.756,
# NH4+ 9.245, phosphate 2.148/7.198/12.35) with chempy 0.10.2 and with an
# independent charge-balance solver. The textbook anchors: 0.1 M acetic acid
# about pH 2.88 and an equimolar acetate buffer at pH = pKa (Harris,
# Quantitative Chemical Analysis, monoprotic-acid chapter; from memory),
# 1e-8 M HCl just below 7, NaHCO3 near (pK1 + pK2)/2.
# Our pKw at 25 °C is 13.9945 (IAPWS) and pK1 6.3519, so the bar is 0.001.
CASES = [
    ("0.1 M acetic acid", totals(acetate=0.1), 0.0, 2.8809),
    ("0.01 M acetic + 0.01 M Na acetate", totals(acetate=0.02), 0.01, 4.7575),
    ("1e-8 M HCl", totals(), -1e-8, 6.9759),
    ("0.05 M NaHCO3", totals(carbonate=0.05), 0.05, 8.3395),
    ("0.01 M Na2CO3", totals(carbonate=0.01), 0.02, 11.1301),
    ("0.001 M H2SO4", totals(sulfate=0.001), 0.0, 2.7335),
    ("0.02 M NH4Cl", totals(ammonia=0.02), -0.02, 5.4718),
    ("0.01 M H3PO4", totals(phosphate=0.01), 0.0, 2.2521),
    ("0.005 M Na2HPO4", totals(phosphate=0.005), 0.01, 9.4014),
]


@pytest.mark.parametrize("name, tot, strong, expected", CASES, ids=[c[0] for c in CASES])
def test_textbook_ph(name, tot, strong, expected):
    ph = float(solve_ph(ideal(tot, strong))[0])
    assert ph == pytest.approx(expected, abs=1e-3)


def test_textbook_cases_in_one_vectorised_call():
    mix = Mixture.build(np.array([c[1] for c in CASES]), np.array([c[2] for c in CASES]),
                        0.0, 25.0, math.nan, activity=IDEAL)
    ph = solve_ph(mix)
    assert ph == pytest.approx([c[3] for c in CASES], abs=1e-3)
    assert np.all(np.abs(speciate(mix, ph).charge_residual_eq_l) < 1e-12)


def test_equimolar_buffer_at_pka_and_bicarbonate_midpoint():
    # Henderson-Hasselbalch: equal acid and base -> pH = pKa (ideal, large C).
    ph = float(solve_ph(ideal(totals(acetate=0.2), 0.1))[0])
    assert ph == pytest.approx(4.756, abs=0.002)
    # Amphiprotic salt: pH ~ (pK1 + pK2)/2 for concentrated NaHCO3.
    ph = float(solve_ph(ideal(totals(carbonate=0.5), 0.5))[0])
    assert ph == pytest.approx((6.352 + 10.329) / 2, abs=0.01)


def _textbook_monoprotic(c_acid, c_salt, pka, pkw):
    """The general equation for HA + NaA in water, solved with brentq.

    [Na+] + [H+] = [OH-] + [A-], [A-] = C Ka/(Ka + [H+]), C = c_acid + c_salt.
    Plain reference code for the fuzz test below.
    """
    ka, kw, c = 10 ** -pka, 10 ** -pkw, c_acid + c_salt
    f = lambda ph: c_salt + 10 ** -ph - kw / 10 ** -ph - c * ka / (ka + 10 ** -ph)
    return brentq(f, -2, 16, xtol=1e-13)


@settings(max_examples=60, deadline=None)
@given(c_acid=st.floats(1e-7, 1.0), c_salt=st.floats(0.0, 1.0),
       sid=st.sampled_from(["acetate", "formate", "fluoride", "borate", "cyanide"]))
def test_monoprotic_special_case_matches_the_general_equation(c_acid, c_salt, sid):
    const = constants_at(25.0)
    j = system_index(sid)
    pka = -math.log10(const.k[0, j, 0])
    pkw = -math.log10(const.kw[0])
    ref = _textbook_monoprotic(c_acid, c_salt, pka, pkw)
    ph = float(solve_ph(ideal(totals(**{sid: c_acid + c_salt}), c_salt))[0])
    assert ph == pytest.approx(ref, abs=1e-8)


# ---------------------------------------------------------------- chempy ----
chempy = pytest.importorskip("chempy")


def _chempy_ph(systems, strong_ions, pkw):
    """pH from chempy 0.10.2's EqSystem (an independent equilibrium solver).

    ``systems``: (fake element number, top charge, H on top form, pKa list,
    total, form the total is added as); ``strong_ions``: element -> (charge,
    mol/L). Each system gets its own fake element so chempy's mass balances
    stay separate. Water enters as H2O = H+ + OH- with K = Kw/55.5, since
    chempy keeps [H2O] in the quotient.
    """
    from chempy import Equilibrium
    from chempy.chemistry import Species
    from chempy.equilibria import EqSystem
    eqs = [Equilibrium({"H2O": 1}, {"H+": 1, "OH-": 1}, 10 ** -pkw / 55.5)]
    subs = [Species("H2O", composition={1: 2, 8: 1}),
            Species("H+", composition={0: 1, 1: 1}),
            Species("OH-", composition={0: -1, 1: 1, 8: 1})]
    c0 = defaultdict(float, {"H2O": 55.5, "H+": 1e-7, "OH-": 1e-7})
    for el, z0, h0, pks, total, start in systems:
        names = [f"X{el}_{k}" for k in range(len(pks) + 1)]
        for k, n in enumerate(names):
            comp = {el: 1}
            if h0 - k:
                comp[1] = h0 - k
            if z0 - k:
                comp[0] = z0 - k
            subs.append(Species(n, composition=comp))
        for i, pk in enumerate(pks):
            eqs.append(Equilibrium({names[i]: 1}, {"H+": 1, names[i + 1]: 1}, 10 ** -pk))
        c0[names[start]] += total
    charge = 0.0
    for el, z0, h0, pks, total, start in systems:
        charge += (z0 - start) * total
    for el, (z, c) in strong_ions.items():
        subs.append(Species(f"S{el}", composition={el: 1, 0: z}))
        c0[f"S{el}"] += c
        charge += z * c
    # Strong bases arrive as hydroxides, strong acids as H+: keep it neutral.
    c0["OH-" if charge > 0 else "H+"] += abs(charge)
    system = EqSystem(eqs, subs)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        x, _, sane = system.root(c0)
    assert sane
    return -math.log10(x[system.as_substance_index("H+")])


def _pks(sid):
    const = constants_at(25.0)
    j = system_index(sid)
    s = SYSTEMS[j]
    return [-math.log10(const.k[0, j, i]) for i in range(s.steps)]


# Mixed cases: (our totals, strong balance, chempy systems, chempy strong ions).
# Each system is added in its neutral (or NH4+) form with Na+/Cl- as given.
MIXED = [
    ("phosphate+carbonate+acetate+ammonia, Na/Cl",
     dict(phosphate=0.002, carbonate=0.003, acetate=0.004, ammonia=0.001),
     0.007 - 0.002,  # Na 0.007; Cl 0.002 (0.001 of it with the NH4+ as NH4Cl)
     [(15, 0, "phosphate", 0.002), (6, 0, "carbonate", 0.003),
      (101, 0, "acetate", 0.004), (7, 1, "ammonia", 0.001)],
     {11: (1, 0.007), 17: (-1, 0.002)}),
    ("sulfide + borate + silicate, caustic",
     dict(sulfide=0.001, borate=0.002, silicate=0.0005), 0.002,
     [(16, 0, "sulfide", 0.001), (5, 0, "borate", 0.002),
      (14, 0, "silicate", 0.0005)],
     {11: (1, 0.002)}),
    ("citrate + oxalate + fluoride, partly neutralised",
     dict(citrate=0.001, oxalate=0.0005, fluoride=0.002), 0.003,
     [(102, 0, "citrate", 0.001), (103, 0, "oxalate", 0.0005),
      (9, 0, "fluoride", 0.002)],
     {11: (1, 0.003)}),
    ("formate + cyanide + carbonate, alkaline",
     dict(formate=0.002, cyanide=0.0002, carbonate=0.004), 0.008,
     [(104, 0, "formate", 0.002), (105, 0, "cyanide", 0.0002),
      (6, 0, "carbonate", 0.004)],
     {11: (1, 0.008)}),
]


@pytest.mark.parametrize("name, tot, strong, csys, cions", MIXED, ids=[m[0] for m in MIXED])
def test_mixed_waters_against_chempy(name, tot, strong, csys, cions):
    # Our strong balance is Na - Cl; the chempy ions must say the same.
    assert sum(z * c for z, c in cions.values()) == pytest.approx(strong)
    mix = ideal(totals(**tot), strong)
    ours = float(solve_ph(mix)[0])
    pkw = -math.log10(constants_at(25.0).kw[0])
    ref = _chempy_ph([(el, z0, _h0(sid), _pks(sid), c, 0) for el, z0, sid, c in csys],
                     cions, pkw)
    assert ours == pytest.approx(ref, abs=1e-5)


def _h0(sid):
    # Number of H on the most protonated form, for chempy's hydrogen balance.
    return {"phosphate": 3, "carbonate": 2, "acetate": 1, "ammonia": 4,
            "sulfide": 2, "borate": 3, "silicate": 4, "citrate": 3,
            "oxalate": 2, "fluoride": 1, "formate": 1, "cyanide": 1}[sid]


# ----------------------------------------------------------- properties ----
_SOLUTES = [s.id for s in SYSTEMS]


@st.composite
def waters(draw):
    tot = np.zeros(len(SYSTEMS))
    for sid in draw(st.lists(st.sampled_from(_SOLUTES), min_size=0, max_size=5, unique=True)):
        tot[system_index(sid)] = draw(st.floats(1e-6, 0.05))
    strong = draw(st.floats(-0.05, 0.05))
    t = draw(st.floats(0.0, 60.0))
    activity = draw(st.sampled_from([IDEAL, DAVIES]))
    return Mixture.build(tot, strong, 0.5 * abs(strong), t, math.nan, activity)


@settings(max_examples=150, deadline=None)
@given(mix=waters())
def test_charge_balance_closes_at_the_solution(mix):
    ph = solve_ph(mix)
    sp = speciate(mix, ph)
    assert abs(float(sp.charge_residual_eq_l[0])) < 1e-10
    assert -1.5 < float(ph[0]) < 15.5


@settings(max_examples=100, deadline=None)
@given(mix=waters(), p1=st.floats(3.0, 11.0), p2=st.floats(3.0, 11.0),
       rid=st.sampled_from(["caustic-50", "lime", "soda-ash", "sulfuric-98",
                            "hydrochloric-32"]))
def test_dose_is_monotone_in_target_ph(mix, p1, p2, rid):
    reagent = get_reagent(rid)
    lo, hi = sorted((p1, p2))
    if hi - lo < 1e-3:
        return
    rep = Mixture.build(np.repeat(mix.totals_mol_l, 2, 0), np.repeat(mix.strong_eq_l, 2),
                        np.repeat(mix.strong_ionic_strength, 2),
                        np.repeat(mix.temperature_c, 2), math.nan, mix.activity)
    d, grip = dose_to_ph(rep, reagent.vector(), np.array([lo, hi]))
    # Only doses that can be given: both non-negative, reagent with grip.
    if not (np.all(d >= 0) and np.all(np.abs(grip) > 1e-9)):
        return
    if reagent.raises_ph:
        assert d[1] > d[0]
    else:
        assert d[1] < d[0]


@settings(max_examples=100, deadline=None)
@given(mix=waters(), target=st.floats(4.0, 10.5),
       rid=st.sampled_from(["caustic-50", "caustic-25", "soda-ash", "sulfuric-93",
                            "hydrochloric-32", "co2"]))
def test_dose_then_forward_solve_returns_the_target_and_conserves_mass(mix, target, rid):
    from dosing.chem import add_dose
    reagent = get_reagent(rid)
    vec = reagent.vector()
    d, grip = dose_to_ph(mix, vec, target)
    if not (np.isfinite(d[0]) and d[0] > 0 and abs(grip[0]) > 1e-6):
        return
    dosed = add_dose(mix, vec, d)
    # Mass of every total conserved: (T + d n) moles in (1 + d v) litres.
    f = 1.0 / (1.0 + d[0] * vec.volume_l)
    expect = f * (mix.totals_mol_l[0] + d[0] * vec.totals_mol)
    assert dosed.totals_mol_l[0] == pytest.approx(expect, rel=1e-12, abs=1e-18)
    assert float(dosed.strong_eq_l[0]) == pytest.approx(
        f * (mix.strong_eq_l[0] + d[0] * vec.strong_eq), rel=1e-12, abs=1e-18)
    ph = float(solve_ph(dosed)[0])
    assert ph == pytest.approx(target, abs=1e-7)


@settings(max_examples=80, deadline=None)
@given(mix=waters(), ph=st.floats(1.0, 13.0))
def test_strong_balance_from_ph_round_trips(mix, ph):
    s, ionic = strong_balance_at_ph(mix.totals_mol_l, ph, mix.temperature_c,
                                    activity=mix.activity)
    back = Mixture.build(mix.totals_mol_l, s, 0.5 * np.abs(s), mix.temperature_c,
                         math.nan, mix.activity)
    assert float(solve_ph(back)[0]) == pytest.approx(ph, abs=1e-8)


def test_open_to_air_holds_dissolved_co2():
    # Pure water under 420 µatm CO2 at 25 °C: pH about 5.6 (common knowledge
    # of rain water in today's air).
    from dosing.chem import co2_in_air_mol_l
    c0 = float(co2_in_air_mol_l(25.0, 420e-6))
    mix = Mixture.build(totals(), 0.0, 0.0, 25.0, c0, activity=IDEAL)
    ph = float(solve_ph(mix)[0])
    assert ph == pytest.approx(5.6, abs=0.05)
    sp = speciate(mix, ph)
    assert float(sp.concentration(CARBONATE, 0)[0]) == pytest.approx(c0, rel=1e-12)


def test_strong_balance_does_not_depend_on_the_starting_ionic_strength():
    # The replay starts the fixed point from the scenario's ionic strength to
    # save steps; the answer must be the one found from the usual start.
    import numpy as np
    from dosing.chem import strong_balance_at_ph
    tot = totals(carbonate=0.007, silicate=0.0006, borate=0.0002)
    ph = np.linspace(8.5, 11.5, 50)
    s0, i0 = strong_balance_at_ph(tot, ph, 32.0, activity=DAVIES)
    for guess in (0.0, 0.012, 0.3):
        s1, i1 = strong_balance_at_ph(tot, ph, 32.0, activity=DAVIES, ionic_guess=guess)
        np.testing.assert_allclose(s1, s0, rtol=1e-8)
        np.testing.assert_allclose(i1, i0, rtol=1e-8)


def test_the_fixed_point_tolerance_costs_the_dose_nothing_measurable(monkeypatch):
    # The ionic-strength fixed point stops at 1e-8 relative change (it saves
    # a pass); against a 1e-12 stop the dose moves by under 1e-9 relative,
    # far inside the 1e-4 of the outside-solver checks.
    import numpy as np
    import dosing.chem.solvers as eq
    tot = totals(carbonate=0.007, silicate=0.0006, borate=0.0002)
    ph = np.linspace(9.0, 11.0, 200)
    reagent = get_reagent("hydrochloric-32").vector()

    def doses():
        s, _ = eq.strong_balance_at_ph(tot, ph, 32.0, activity=DAVIES)
        mix = Mixture.build(tot, s, 0.5 * np.abs(s), 32.0, math.nan, DAVIES)
        return dose_to_ph(mix, reagent, 7.5)[0]
    loose = doses()
    monkeypatch.setattr(eq, "SETTLE_RTOL", 1e-12)
    np.testing.assert_allclose(loose, doses(), rtol=1e-9)
