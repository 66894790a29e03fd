"""The simulator's model integrated by a general-purpose ODE solver.

``scipy.integrate.solve_ivp`` (LSODA) integrates one stage's tank balance,
probe lag and PI integral as plain ODEs, row by row of the influent (its
inputs jump between rows), with the pH solved by the engine inside the
right-hand side. No transport delay and no minimum pump rate here: the
reference the simulator's own exact-step loop is checked against (tests)
and timed against (``benchmarks/bench_simulate.py``).
"""

from __future__ import annotations

import numpy as np
from scipy.integrate import solve_ivp

from dosing.chem import solve_ph
from dosing.planning.simulate import INVARIANTS, mixture_of, reagent_invariants

__all__ = ["reference_ph", "no_delay"]

L_S_PER_M3_H = 1000.0 / 3600.0


def reference_ph(influent, design, reagent, raises_ph: bool, *, rtol=1e-8):
    """Times [s] and the tank's pH at the end of each influent row."""
    st = design.stages[0]
    r_inv, v_r = reagent_invariants(reagent), reagent.volume_l
    vol = st.volume_m3 * 1000.0
    sign = 1.0 if raises_ph else -1.0
    q0 = design.nominal_flow_m3_h * L_S_PER_M3_H
    c0 = (q0 * influent.state[0] + st.nominal_mol_s * r_inv) / (q0 + st.nominal_mol_s * v_r)
    y = np.concatenate([c0, [st.setpoint_ph, 0.0]])
    if not st.feedforward:
        y[-1] = 100.0 * st.ti_s / st.kc_pct_per_ph

    def rate(pm, integral, ratio):
        base = 100.0 * ratio if st.feedforward else 0.0
        e = sign * (st.setpoint_ph - pm)
        wanted = (base + st.kc_pct_per_ph * (e + integral / st.ti_s)) * 0.01 * st.nominal_mol_s
        return min(max(wanted, 0.0), st.pump_max_mol_s), wanted, e

    t_out, ph_out, t = [], [], 0.0
    for i in range(influent.t_s.size):
        q = influent.flow_m3_h[i] * L_S_PER_M3_H
        ratio = influent.flow_m3_h[i] / design.nominal_flow_m3_h
        c_in, temp = influent.state[i], influent.temperature_c[i]

        def rhs(_t, yy):
            c, pm, integral = yy[:INVARIANTS], yy[INVARIANTS], yy[INVARIANTS + 1]
            ph = float(solve_ph(mixture_of(c, temp, influent.activity,
                                           influent.unknown_pka))[0])
            u, wanted, e = rate(pm, integral, ratio)
            dc = (q * c_in + u * r_inv - (q + u * v_r) * c) / vol
            sat = (wanted >= st.pump_max_mol_s and e > 0) or (wanted <= 0 and e < 0)
            return np.concatenate([dc, [(ph - pm) / st.probe_lag_s, 0.0 if sat else e]])

        sol = solve_ivp(rhs, (t, t + influent.dt_s[i]), y, method="LSODA", rtol=rtol,
                        atol=np.concatenate([np.full(INVARIANTS, 1e-14), [1e-8, 1e-6]]))
        y, t = sol.y[:, -1], t + influent.dt_s[i]
        t_out.append(t)
        ph_out.append(float(solve_ph(mixture_of(y[:INVARIANTS], temp, influent.activity,
                                                influent.unknown_pka))[0]))
    return np.array(t_out), np.array(ph_out)


def no_delay(design):
    """The same design without a transport delay or a minimum pump rate."""
    from dataclasses import replace
    return replace(design, stages=tuple(replace(s, delay_s=0.0, pump_min_mol_s=0.0)
                                        for s in design.stages))


