"""Figures: the titration curve of a plan, as a PNG.

Uses matplotlib's non-interactive Agg backend; builds the figure in memory
and hands back bytes, so the caller decides where they are written.
"""

from __future__ import annotations

import io

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from ..io.outputs import PNG_SOFTWARE  # noqa: E402
from ..planning.plan import Plan  # noqa: E402
from .numbers import fmt  # noqa: E402
from .sheet import dose_axis  # noqa: E402
from .units import UNIT_SYSTEMS  # noqa: E402
from .words import words  # noqa: E402
from ..chem.metals import HARDNESS, label as metal_label  # noqa: E402
from ..planning.reagents import GENERAL_CAUTION  # noqa: E402

__all__ = ["plan_figure", "plan_figure_png", "replay_figure_png", "titration_figure_png",
           "train_figure_png"]

#: The line under every figure: the general caution, once (reagents.py).
FOOTER = f"Model estimate. {GENERAL_CAUTION}"


def _png(fig, cautions: tuple[str, ...] | list[str] = (), banner: str = "") -> bytes:
    """Add the reagent's cautions and the final-word footer (and a red
    ``banner`` across the top: a permit breach), lay out, render to PNG bytes
    and close. Every figure that shows a dose carries them."""
    import textwrap
    lines = [ln for c in cautions if c != FOOTER and "final word" not in c
             for ln in textwrap.wrap("Caution: " + c, 150)] + [FOOTER]
    fig.text(0.01, 0.005, "\n".join(lines), fontsize=6.5, color="0.3", va="bottom")
    # Room for the footer whatever the figure's height: about 9 pt a line.
    height = fig.get_figheight()
    footer = (len(lines) * 9.0 / 72.0 + 0.08) / height
    top = 1.0
    if banner:
        head = textwrap.wrap(banner, 95)
        fig.text(0.5, 1.0 - 0.06 / height, "\n".join(head), ha="center", va="top",
                 fontsize=9, fontweight="bold", color="white",
                 bbox={"facecolor": "tab:red", "edgecolor": "none", "pad": 4})
        top = 1.0 - (len(head) * 12.5 / 72.0 + 0.2) / height
    fig.tight_layout(rect=(0, footer, 1, top))
    buf = io.BytesIO()
    fig.savefig(buf, format="png", metadata={"Software": PNG_SOFTWARE})
    plt.close(fig)
    return buf.getvalue()


def plan_figure_png(plan: Plan, title: str = "", units: str = "metric", *,
                    engineer: bool = False, window: str = "target window") -> bytes:
    """PNG bytes of :func:`plan_figure`, with the cautions under it and a
    banner across the top when the plan breaks the permit."""
    return _png(plan_figure(plan, title, units, engineer=engineer, window=window),
                plan.cautions, _breach_banner(plan, units))


def _breach_banner(plan: Plan, units: str) -> str:
    """The first permit breach of a plan, in words ("" when none)."""
    from ..planning.plan_findings import permit_breaches
    found = permit_breaches(plan)
    if not found:
        return ""
    more = f" (and {len(found) - 1} more: see the sheet)" if len(found) > 1 else ""
    return "PERMIT BREACH: " + words(found[0], units) + more


def plan_figure(plan: Plan, title: str = "", units: str = "metric", *,
                engineer: bool = False, window: str = "target window"):
    """The figure of pH against dose of product, with the window and the plan.

    The x axis is product per batch (or per hour for a flow) in the unit
    system's mass unit, with litres (or gallons) along the top for a
    solution. ``engineer`` adds the buffer intensity of the dosed water on a
    second axis (it clutters the operator's figure). Metal and uncertainty
    panels follow when the plan has them.
    """
    u = UNIT_SYSTEMS[units]
    per = plan.basis.per
    scale, unit, xlabel = dose_axis(plan, units)
    metals = plan.water.tank_metals_mol_l
    panels = 1 + bool(metals) + (plan.uncertainty is not None)
    fig, axes = plt.subplots(panels, 1, figsize=(8.0, 5.6 + 4.4 * (panels - 1)), dpi=110,
                             squeeze=False)
    extra = list(axes[1:, 0])
    _curve_panel(axes[0, 0], plan, scale, unit, xlabel, engineer, window)
    _litres_axis(axes[0, 0], plan, u, per)
    axes[0, 0].set_title(title or "Titration curve", fontsize=11, pad=24 if
                         plan.reagent.form == "liquid" else 6)
    if metals:
        _metals_panel(extra.pop(0), plan, {k: v for k, v in metals.items()
                                           if k not in HARDNESS} or metals, label=window)
    if plan.uncertainty is not None:
        _uncertainty_panel(extra.pop(0), plan, scale, unit, per)
    return fig


def train_figure_png(train, title: str = "", units: str = "metric") -> bytes:
    """PNG of a treatment train: one titration panel per dose step, each on the
    water the step before left, then the metals of the first step that
    precipitates them; the cautions of every product under it."""
    doses = [(i, r) for i, r in enumerate(train.steps, start=1) if r.plan is not None]
    first = next((r.plan for _, r in doses if r.plan.dissolved is not None
                  and any(m not in HARDNESS for m in r.plan.dissolved.mg_l)), None)
    panels = len(doses) + (first is not None)
    fig, axes = plt.subplots(panels, 1, figsize=(8.0, 1.2 + 4.4 * panels), dpi=110,
                             squeeze=False)
    last = doses[-1][0]
    for ax, (i, r) in zip(axes[:, 0], doses):
        plan = r.plan
        scale, unit, xlabel = dose_axis(plan, units)
        _curve_panel(ax, plan, scale, unit, xlabel, False,
                     "permit window" if i == last else f"step {i} window")
        _litres_axis(ax, plan, UNIT_SYSTEMS[units], plan.basis.per)
        head = f"Step {i}, dose" + (f": {r.spec.label}" if r.spec.label else "")
        ax.set_title(f"{head} ({plan.reagent.name}), from pH {plan.ph_start:.2f}",
                     fontsize=10, pad=24 if plan.reagent.form == "liquid" else 6)
    if first is not None:
        caps = {c.metal: c.cap_mg_l for c in train.discharge.metals}
        _metals_panel(axes[-1, 0], first, {m: 1 for m in first.dissolved.mg_l
                                           if m not in HARDNESS}, caps,
                      (train.target.ph_min, train.target.ph_max))
    fig.suptitle(title or "Treatment train", fontsize=11)
    return _png(fig, train.cautions)


def _litres_axis(ax, plan: Plan, u, per: str) -> None:
    """The same doses in litres (gallons) along the top, for a solution
    measured by mass."""
    r = plan.reagent
    if r.form != "liquid" or r.kg_product_per_mol is None:
        return
    f = (r.litres_product_per_mol * u.product_volume_per_l) / (r.kg_product_per_mol
                                                               * u.mass_per_kg)
    top = ax.secondary_xaxis("top", functions=(lambda m: m * f, lambda v: v / f))
    top.set_xlabel(f"{u.product_volume} {per}", fontsize=9)


def _curve_panel(ax, plan: Plan, scale: float, unit: str, xlabel: str,
                 engineer: bool, window: str = "permit window") -> None:
    """pH against dose: the window, the doses that keep it, the aim, the plan."""
    c = plan.curve
    x = c.dose_mol_l * scale
    ax.axhspan(plan.target.ph_min, plan.target.ph_max, color="tab:green", alpha=0.13,
               label=f"{window} pH {plan.target.ph_min:g}–{plan.target.ph_max:g}")
    lo, hi = plan.band_mol_l
    band_hi = (hi if hi is not None else c.dose_mol_l[-1]) * scale
    ax.axvspan(lo * scale, band_hi, color="tab:green", alpha=0.10, hatch="//", lw=0,
               label="doses that keep pH in the window")
    # The band's edges as lines: a narrow band (a steep curve) stays visible.
    for edge in (lo * scale, band_hi):
        ax.axvline(edge, color="tab:green", lw=0.9, alpha=0.8)
    ax.plot(x, c.ph, color="tab:blue", lw=2.0, label="pH after dose (model)")
    ax.axhline(plan.target.ph_aim, color="tab:green", ls="--", lw=1.0,
               label=f"aim pH {plan.target.ph_aim:g}")
    d = plan.dose_mol_l * scale
    ax.plot([d], [plan.ph_end], "o", color="tab:red", ms=8, zorder=5,
            label=f"planned dose {fmt(d)} {unit} → pH {plan.ph_end:.2f}")
    ax.axvline(d, color="tab:red", lw=0.8, ls=":")
    ax.set_xlabel(xlabel)
    ax.set_ylabel("pH")
    ax.set_xlim(0, x[-1])
    lo_ph = min(np.min(c.ph), plan.target.ph_min) - 0.5
    hi_ph = max(np.max(c.ph), plan.target.ph_max) + 0.5
    ax.set_ylim(max(0.0, lo_ph), min(14.0, hi_ph))
    ax.grid(True, alpha=0.3)
    handles, labels = ax.get_legend_handles_labels()
    if engineer:
        ax2 = ax.twinx()
        ax2.plot(x, c.buffer_intensity_eq_l * 1000, color="tab:orange", lw=1.2, alpha=0.8,
                 label="buffer intensity β")
        ax2.set_ylabel("buffer intensity β, mmol/L per pH", color="tab:orange")
        ax2.tick_params(axis="y", colors="tab:orange")
        ax2.set_ylim(bottom=0)
        h2, l2 = ax2.get_legend_handles_labels()
        handles, labels = handles + h2, labels + l2
    ax.legend(handles, labels, loc="upper center", bbox_to_anchor=(0.5, -0.13),
              ncol=3, fontsize=8, frameon=False)


def _uncertainty_panel(ax, plan: Plan, scale: float, unit: str, per: str) -> None:
    """The dose each plausible water needs, with the plan, its 5-95 % range
    and (for a staged batch) the first dose."""
    unc = plan.uncertainty
    need = unc.needed_mol_l * scale
    ax.hist(need, bins=40, color="tab:blue", alpha=0.55,
            label=f"dose needed, {unc.valid:,} plausible waters")
    st = plan.staging
    # A staged first dose at the 95 % confidence is the 5th percentile
    # itself: one line, named as both, so neither hides the other.
    at_p05 = st is not None and abs(st.first_mol_l - unc.p05_mol_l) <= 0.005 * unc.p05_mol_l
    for q, mol in (("5th", unc.p05_mol_l), ("95th", unc.p95_mol_l)):
        if q == "5th" and at_p05:
            continue
        ax.axvline(mol * scale, color="0.3", ls="--", lw=1.0,
                   label=f"{q} percentile {fmt(mol * scale)} {unit}")
    d = plan.dose_mol_l * scale
    ax.axvline(d, color="tab:red", lw=1.6,
               label=f"planned dose {fmt(d)} {unit}: outside the window in "
                     f"{unc.p_outside:.0%}")
    if plan.staging is not None:
        f = plan.staging.first_mol_l * scale
        ax.axvline(f, color="tab:orange", lw=1.6,
                   label=f"staged first dose {fmt(f)} {unit} "
                         f"({plan.staging.confidence:.0%} short of the aim"
                         + (", the 5th percentile)" if at_p05 else ")"))
    ax.set_xlabel(f"{plan.reagent.name}, {unit.removesuffix('/h')} {per}")
    ax.set_ylabel("plausible waters")
    ax.grid(True, alpha=0.3)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.13), ncol=2, fontsize=8,
              frameon=False)
    import textwrap
    ax.set_title("\n".join(textwrap.wrap("How sure: " + words(unc.spread_finding()), 100)),
                 fontsize=9)


def _metals_panel(ax3, plan: Plan, metals, caps=None, window=None,
                  label: str = "permit window") -> None:
    """Dissolved metal against pH (log scale), with caps, window and aim
    (the plan's own curves, pH 4 to 13); ``caps`` and ``window`` default to
    the plan's own."""
    keep = (plan.dissolved.ph >= 4.0) & (plan.dissolved.ph <= 13.0)
    grid = plan.dissolved.ph[keep]
    curves = {mid: mg[keep] for mid, mg in plan.dissolved.mg_l.items() if mid in metals}
    lo, hi = window or (plan.target.ph_min, plan.target.ph_max)
    ax3.axvspan(lo, hi, color="tab:green", alpha=0.13, label=f"{label} pH")
    if caps is None:
        caps = {} if plan.cap_window is None else plan.cap_window.caps_mg_l
    for i, (mid, mg) in enumerate(curves.items()):
        color = f"C{i}"
        ax3.plot(grid, np.maximum(mg, 1e-6), color=color, lw=1.8,
                 label=f"{metal_label(mid)} dissolved")
        if mid in caps:
            ax3.axhline(caps[mid], color=color, ls="--", lw=1.0,
                        label=f"{metal_label(mid)} cap {caps[mid]:g} mg/L")
    ax3.axvline(plan.target.ph_aim, color="tab:red", ls=":", lw=1.0,
                label=f"aim pH {plan.target.ph_aim:g}")
    ax3.set_yscale("log")
    ax3.set_ylim(1e-4, None)
    ax3.set_xlim(grid[0], grid[-1])
    ax3.set_xlabel("pH")
    ax3.set_ylabel("dissolved metal, mg/L (log scale)")
    ax3.grid(True, which="both", alpha=0.25)
    ax3.legend(loc="upper center", bbox_to_anchor=(0.5, -0.12), ncol=3, fontsize=8,
               frameon=False)
    ax3.set_title("Metals left in solution at each pH, this water's ligands and solids "
                  "included (model estimate; "
                  "a jar test is the check)", fontsize=9)


def replay_figure_png(totals, report, units: str = "metric") -> bytes:
    """PNG bytes: hourly raw pH and dose rate over time, and daily reagent use."""
    import pandas as pd
    u = UNIT_SYSTEMS[units]
    hours = sorted(totals.hourly)
    fig, (a1, a3) = plt.subplots(2, 1, figsize=(9.0, 6.4), dpi=110, sharex=True,
                                 gridspec_kw={"height_ratios": [3, 2]})
    if hours:
        h = pd.to_datetime(hours)
        ph = np.array([totals.hourly[k].ph_mean for k in hours])
        conv = u.mass_per_kg if totals.rate_unit == "kg/h" else u.product_volume_per_l
        rate = np.array([totals.hourly[k].rate_mean for k in hours]) * conv
        frame = pd.DataFrame({"ph": ph, "rate": rate}, index=h)
        span_days = (h[-1] - h[0]).total_seconds() / 86400 if len(h) > 1 else 0
        if span_days > 14:
            # Long records: daily mean with the range of the hourly means.
            g = frame.resample("D")
            mean, lo, hi = g.mean(), g.min(), g.max()
            a1.fill_between(mean.index, lo["ph"], hi["ph"], color="tab:blue", alpha=0.2, lw=0)
            a1.plot(mean.index, mean["ph"], color="tab:blue", lw=1.0,
                    label="raw pH (daily mean, band: hourly range)")
            frame, what = mean, "daily mean"
        else:
            a1.plot(h, ph, color="tab:blue", lw=0.8, label="raw pH (hourly mean)")
            what = "hourly mean"
        a1.set_ylabel("raw pH")
        a2 = a1.twinx()
        a2.plot(frame.index, frame["rate"], color="tab:red", lw=1.0, alpha=0.85,
                label=f"dose rate ({what})")
        unit = f"{u.mass}/h" if totals.rate_unit == "kg/h" else f"{u.product_volume}/h"
        a2.set_ylabel(f"dose rate, {unit}", color="tab:red")
        a2.tick_params(axis="y", colors="tab:red")
        top = float(np.nanmax(frame["rate"])) if np.isfinite(frame["rate"]).any() else 1.0
        a2.set_ylim(0, top * 1.35 or 1.0)          # room above the lines for the legend
        l1, n1 = a1.get_legend_handles_labels()
        l2, n2 = a2.get_legend_handles_labels()
        # Below the axes, where it covers no line.
        a1.legend(l1 + l2, n1 + n2, loc="upper center", bbox_to_anchor=(0.5, 1.0),
                  ncol=2, fontsize=8, frameon=False)
        lo_ph, hi_ph = np.nanmin(ph), np.nanmax(ph)
        a1.set_ylim(lo_ph - 0.5, hi_ph + 0.25 * (hi_ph - lo_ph) + 0.8)
    where = " / ".join(x for x in (report.site, report.tank) if x)
    a1.set_title(f"{report.title}: {report.reagent_name}, {report.first[:10]} to "
                 f"{report.last[:10]}" + (f"\n{where}" if where else ""), fontsize=11)
    a1.grid(True, alpha=0.3)
    days = sorted(totals.daily_kg)
    if days:
        # Each bar spans its own day (matplotlib centres bars on the date).
        a3.bar(pd.to_datetime(days) + pd.Timedelta(hours=12),
               [totals.daily_kg[d] * u.mass_per_kg for d in days], width=0.9,
               color="tab:orange")
    a3.set_ylabel(f"{u.mass} product per day")
    a3.grid(True, axis="y", alpha=0.3)
    fig.autofmt_xdate()
    return _png(fig, report.cautions)


def titration_figure_png(curve, comparison, title: str = "") -> bytes:
    """PNG bytes of a :class:`~dosing.planning.titration.Comparison`: measured points,
    PCHIP interpolation, model curve, window, dose; with a buffer spectrum
    fitted, its sites as bars over pKa below."""
    direct = comparison.direct
    # The spectrum is drawn when the plan rests on it (not when the simple fit sufficed).
    spec = comparison.spectrum if comparison.used == "spectrum" else None
    water = comparison.water
    if spec is not None:
        fig, (ax, ax_s) = plt.subplots(2, 1, figsize=(8.0, 9.0), dpi=110,
                                       gridspec_kw={"height_ratios": [3, 2]})
    else:
        fig, ax = plt.subplots(figsize=(8.0, 5.4), dpi=110)
    t = comparison.scenario.target
    ax.axhspan(t.ph_min, t.ph_max, color="tab:green", alpha=0.13,
               label=f"window pH {t.ph_min:g}-{t.ph_max:g}")
    ax.axhline(t.ph_aim, color="tab:green", ls="--", lw=1.0, label=f"aim pH {t.ph_aim:g}")
    ph_grid = np.linspace(min(curve.ph), max(curve.ph), 400)
    ml = direct.interpolant(ph_grid)
    ax.plot(ml, ph_grid, color="0.4", lw=1.2, label="interpolation (PCHIP)")
    from ..planning.water_fit import model_curve
    v, ph_model = model_curve(curve, water)
    kind = "buffer spectrum" if comparison.used == "spectrum" else "model"
    ax.plot(v, ph_model, color="tab:blue", lw=1.8,
            label=(f"fitted water ({kind})" if comparison.plan is not None else
                   f"fitted water ({kind}): misses the curve, no model dose"))
    ax.plot(curve.added_ml, curve.ph, "o", color="k", ms=4, label="measured")
    ax.axvline(direct.ml_at_aim, color="tab:red", ls=":", lw=1.0,
               label=f"{direct.ml_at_aim:.2f} mL to the aim")
    ax.set_xlabel(f"titrant added ({curve.titrant.label}), mL into {curve.sample_ml:g} mL")
    ax.set_ylabel("pH")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8, loc="best")
    ax.set_title(title or "Bench titration", fontsize=11)
    if spec is not None:
        _spectrum_panel(ax_s, spec)
    return _png(fig, comparison.cautions)


def _spectrum_panel(ax, spec) -> None:
    """The fitted buffer sites as bars over pKa, regions named, titrated range shaded."""
    lo, hi = spec.ph_range
    ax.axvspan(lo, hi, color="0.85", alpha=0.5, label="titrated pH range")
    ax.bar(spec.site_pka, spec.site_mol_l * 1000, width=0.16, color="tab:purple",
           label="fitted site")
    if spec.carbonate_mol_l > 0:
        from ..chem.water import carbonate_pk
        pk1, pk2 = (float(x) for x in carbonate_pk(spec.water.temperature_c))
        ax.bar([pk1], [spec.carbonate_mol_l * 1000], width=0.16, color="tab:orange",
               label=f"carbonate (pK {pk1:.2f}, {pk2:.2f})")
    bars = spec.site_mol_l * 1000
    ymax = max(float(bars.max(initial=0.0)), spec.carbonate_mol_l * 1000) or 1.0
    for r in spec.regions:
        if r.edge or r.mmol_l < 0.05 * ymax:
            continue                      # small regions unlabelled: labels would collide
        near = bars[np.abs(spec.site_pka - r.pka) <= 0.5]
        y = float(near.max(initial=0.0)) + 0.04 * ymax
        ax.annotate(f"{r.mmol_l:.2g} mmol/L" + (f"\n{r.guess}?" if r.guess else ""),
                    (r.pka, y), ha="center", va="bottom", fontsize=7)
    ax.set_ylim(0, ymax * 1.35)
    ax.set_xlim(2.0, 12.2)
    ax.set_xlabel("pKa")
    ax.set_ylabel("site total, mmol/L")
    ax.grid(True, alpha=0.3)
    # Below the axes: inside, it would sit on the labels of high-pKa sites.
    ax.legend(fontsize=8, loc="upper center", bbox_to_anchor=(0.5, -0.18), ncol=3,
              frameon=False)
    ax.set_title(f"Buffer spectrum fitted to the curve (pH misfit {spec.rms_ph:.3f} RMS; "
                 "names are guesses from the pKa alone)", fontsize=9)
