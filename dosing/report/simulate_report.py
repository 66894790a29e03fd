"""A simulation of continuous neutralisation as text and as JSON.

Read from :class:`~dosing.planning.simulate_design.Simulation`: one table
row per design (time outside the window, the worst excursion, reagent
against the static replay's figure), then each design's stages (set-point,
tuning, time at the pump's limits), what the model assumes, the cautions.
"""

from __future__ import annotations

from ..planning.reagents import GENERAL_CAUTION
from .numbers import fmt
from .text import hanging, wrap
from .units import UNIT_SYSTEMS

__all__ = ["render_simulation", "render_fleet_simulation", "simulation_dict", "ASSUMPTIONS",
           "control_check_text"]

#: What every simulation assumes, said on the sheet and in the JSON.
ASSUMPTIONS = (
    "each tank well mixed and closed to air; precipitation instant; the reagent mixes at once",
    "the probe reads through a first-order lag after its transport delay, with the "
    "drift and noise given (none unless asked for); no fouling",
    "the influent holds each row's reading until the next; a missing or implausible row "
    "holds the one before",
    "metals, their complexes and solids are at the engine's equilibrium at every step: "
    "no slow solid, no ageing",
    "controller tuned by the SIMC rule (Skogestad 2003) at each stage's set-point; the "
    "pump meters between its minimum (1/100 of its maximum) and its maximum, or stops",
)


def _kg(sim, mol: float) -> float | None:
    k = sim.reagent.kg_product_per_mol
    return None if k is None else mol * k


def _minutes(seconds: float) -> str:
    return f"{fmt(seconds / 60.0)} min" if seconds < 5400 else f"{fmt(seconds / 3600.0)} h"


def _clock(seconds: float) -> str:
    """Time from the record's start as d hh:mm."""
    m = int(round(seconds / 60.0))
    return f"day {m // 1440 + 1} {m % 1440 // 60:02d}:{m % 60:02d}"


def _design_dict(sim, run) -> dict:
    worst = max(run.excursions, key=lambda e: abs(e.peak_ph - sim.aim), default=None)
    kg = _kg(sim, run.reagent_mol)
    stages = []
    for k, st in enumerate(run.design.stages):
        at_max, stopped = run.at_limit_s(k)
        stages.append({"setpoint_ph": st.setpoint_ph, "volume_m3": st.volume_m3,
                       "residence_s": st.volume_m3 * 3600.0 / run.design.nominal_flow_m3_h,
                       "tuning": st.tuning, "kc_percent_per_ph": st.kc_pct_per_ph,
                       "ti_s": st.ti_s, "process_gain_ph_per_percent": st.gain_ph_per_pct,
                       "feedforward": st.feedforward, "probe_lag_s": st.probe_lag_s,
                       "delay_s": st.delay_s, "pump_max_mol_s": st.pump_max_mol_s,
                       "probe_noise_ph": st.probe_noise_ph,
                       "probe_drift_ph_per_day": st.probe_drift_ph_per_h * 24.0,
                       "pump_at_max_fraction": at_max / run.total_s,
                       "pump_stopped_fraction": stopped / run.total_s,
                       "ph_min": float(run.ph[k].min()), "ph_max": float(run.ph[k].max())})
    return {"name": run.design.name, "outside_fraction": run.outside_s / run.total_s,
            "outside_h": run.outside_s / 3600.0, "excursions": len(run.excursions),
            "worst_excursion": None if worst is None else {
                "start_s": worst.start_s, "duration_s": worst.duration_s,
                "peak_ph": worst.peak_ph},
            "reagent_mol": run.reagent_mol, "reagent_kg_product": kg,
            "reagent_vs_static": run.reagent_mol / sim.static_mol if sim.static_mol > 0
            else None,
            "stages": stages}


def simulation_dict(sim) -> dict:
    """The simulation with stable keys, for ``--json``."""
    cautions = list(sim.reagent.cautions) + [GENERAL_CAUTION]
    return {"title": sim.title, "source": sim.source, "hours": sim.hours,
            "step_s": sim.step_s, "rows": sim.rows, "rows_held": sim.rows_held,
            "window_ph": list(sim.window), "aim_ph": sim.aim, "reagent": sim.reagent.id,
            "static_reagent_mol": sim.static_mol,
            "static_reagent_kg_product": _kg(sim, sim.static_mol),
            "designs": [_design_dict(sim, r) for r in sim.runs],
            "assumptions": list(ASSUMPTIONS), "cautions": cautions}


def render_simulation(sim, units: str = "metric", width: int = 78) -> str:
    """The comparison as text for the engineer."""
    u = UNIT_SYSTEMS[units]
    data = simulation_dict(sim)
    lo, hi = sim.window
    out = wrap(f"SIMULATION  {sim.title}  [{sim.reagent.id}]", width, "")
    out += ["=" * min(40, width)]
    out += hanging("influent", f"{sim.source}: {sim.rows:,} rows over {fmt(sim.hours)} h"
                   + (f", {sim.rows_held:,} held from the row before" if sim.rows_held
                      else "") + f"; step {fmt(sim.step_s)} s", width, indent=10)
    out += [f"window    pH {fmt(lo)} to {fmt(hi)}, aim {fmt(sim.aim)}", ""]
    out += _table(data, u, width)
    for d in data["designs"]:
        out += ["", d["name"].upper()]
        for k, st in enumerate(d["stages"], start=1):
            out += hanging(f"  stage {k}", _stage_text(st, u), width, indent=12)
        w = d["worst_excursion"]
        if w:
            out += hanging("  worst", f"pH {fmt(w['peak_ph'], 3)} at {_clock(w['start_s'])}, "
                           f"outside for {_minutes(w['duration_s'])}", width, indent=12)
    out += ["", "WHAT THE SIMULATION ASSUMES"]
    for a in data["assumptions"]:
        out += wrap(a, width, "  - ")
    out += ["", "CAUTIONS"]
    for c in data["cautions"]:
        out += wrap(c, width, "  - ")
    return "\n".join(out) + "\n"


def _table(data, u, width: int = 78) -> list[str]:
    """One line per design: time outside, excursions, reagent (two lines
    each where the columns do not fit the width)."""
    exact = "dosed exactly (replay)"
    w = max([len(d["name"]) for d in data["designs"]] + [len(exact)])
    if w + 41 > width:
        return _narrow_table(data, u, width)
    rows = [f"  {'design':<{w}} {'outside':>8} {'events':>6} {'reagent ' + u.mass:>11} "
            f"{'vs exact':>8}"]
    for d in data["designs"]:
        kg = d["reagent_kg_product"]
        reagent = fmt(kg * u.mass_per_kg) if kg is not None else "n/a"
        ratio = f"{d['reagent_vs_static']:.3f}" if d["reagent_vs_static"] else "n/a"
        rows.append(f"  {d['name']:<{w}} {d['outside_fraction']:>8.2%} "
                    f"{d['excursions']:>6} {reagent:>11} {ratio:>8}")
    kg = data["static_reagent_kg_product"]
    rows.append(f"  {exact:<{w}} {'':>8} {'':>6} "
                f"{fmt(kg * u.mass_per_kg) if kg is not None else 'n/a':>11} {'1.000':>8}")
    return rows


def _narrow_table(data, u, width: int) -> list[str]:
    """The comparison for a narrow pane: each design's name, then its figures."""
    rows = []
    for d in data["designs"]:
        kg = d["reagent_kg_product"]
        reagent = f"{fmt(kg * u.mass_per_kg)} {u.mass}" if kg is not None else "n/a"
        ratio = f" ({d['reagent_vs_static']:.3f} of exact)" if d["reagent_vs_static"] else ""
        rows.append(f"  {d['name']}")
        rows += wrap(f"outside {d['outside_fraction']:.2%}, {d['excursions']} events, "
                     f"{reagent}{ratio}", width, "      ")
    kg = data["static_reagent_kg_product"]
    if kg is not None:
        rows += ["  dosed exactly (replay)", f"      {fmt(kg * u.mass_per_kg)} {u.mass}"]
    return rows


def _stage_text(st: dict, u) -> str:
    vol = fmt(st["volume_m3"] * u.water_volume_per_m3)
    return (f"set-point pH {fmt(st['setpoint_ph'], 3)}, tank {vol} {u.water_volume} "
            f"({st['residence_s'] / 60.0:.1f} min), {st['tuning']}: Kc "
            f"{fmt(st['kc_percent_per_ph'])} % per pH, Ti {fmt(st['ti_s'])} s (process gain "
            f"{fmt(st['process_gain_ph_per_percent'])} pH per %); "
            f"{'ratio feedforward from the flow; ' if st['feedforward'] else ''}"
            f"{_probe_text(st)}"
            f"pump at its maximum {st['pump_at_max_fraction']:.1%} of the time, stopped "
            f"{st['pump_stopped_fraction']:.1%}; pH {fmt(st['ph_min'], 3)} to "
            f"{fmt(st['ph_max'], 3)}")


def _probe_text(st: dict) -> str:
    """The probe's drift and noise, when there are any."""
    parts = []
    if st["probe_drift_ph_per_day"]:
        parts.append(f"probe drifting {fmt(st['probe_drift_ph_per_day'])} pH a day")
    if st["probe_noise_ph"]:
        parts.append(f"reading noise {fmt(st['probe_noise_ph'])} pH")
    return "; ".join(parts) + "; " if parts else ""


def render_fleet_simulation(fleet: str, results: dict, units: str = "metric",
                            width: int = 78) -> str:
    """Every site's comparison table, then what the simulation assumes and
    the cautions once (``results``: site name -> :func:`simulation_dict`)."""
    u = UNIT_SYSTEMS[units]
    out = wrap(f"FLEET SIMULATION  {fleet}: {len(results)} sites", width, "")
    out += ["=" * min(40, width)]
    cautions: list[str] = []
    for name, data in results.items():
        out += ["", f"SITE {name}: {data['title']}"]
        out += hanging("  influent", f"{data['source']}: {data['rows']:,} rows over "
                       f"{fmt(data['hours'])} h" + (f", {data['rows_held']:,} held"
                                                    if data["rows_held"] else ""),
                       width, indent=12)
        out += _table(data, u, width)
        cautions += [c for c in data["cautions"] if c not in cautions]
    out += ["", "WHAT THE SIMULATION ASSUMES"]
    for a in ASSUMPTIONS:
        out += wrap(a, width, "  - ")
    out += ["", "CAUTIONS"]
    for c in sorted(cautions, key=lambda c: "final word" in c):
        out += wrap(c, width, "  - ")
    return "\n".join(out) + "\n"


def control_check_text(sim, units: str = "metric", width: int = 78) -> str:
    """A flow plan's control design simulated, for the foot of its sheet."""
    u = UNIT_SYSTEMS[units]
    data = simulation_dict(sim)
    d = data["designs"][0]
    out = ["SIMULATED CONTROL (dosing simulate compares more designs)"]
    out += hanging("  design", f"{d['name']}, over {data['source']}, {fmt(data['hours'])} h",
                   width, indent=12)
    w = d["worst_excursion"]
    text = (f"the discharge is outside the window {d['outside_fraction']:.2%} of the time "
            f"in {d['excursions']} excursion{'s' if d['excursions'] != 1 else ''}"
            + (f", the worst to pH {fmt(w['peak_ph'], 3)} for {_minutes(w['duration_s'])}"
               if w else ""))
    out += hanging("  result", text, width, indent=12)
    if d["reagent_kg_product"] is not None and data["static_reagent_kg_product"]:
        out += hanging("  reagent", f"{fmt(d['reagent_kg_product'] * u.mass_per_kg)} "
                       f"{u.mass} against {fmt(data['static_reagent_kg_product'] * u.mass_per_kg)}"
                       f" {u.mass} dosed exactly", width, indent=12)
    out += hanging("  assumes", "; ".join(ASSUMPTIONS), width, indent=12)
    return "\n".join(out) + "\n"
