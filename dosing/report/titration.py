"""A bench titration's two doses side by side, as JSON and as text.

Both read the typed :class:`~dosing.planning.titration.Comparison`: the
direct scaling of the curve, the fitted water (simple fit or buffer
spectrum), the plan made from it, and the findings that go with them.
"""

from __future__ import annotations

from typing import Any

from ..planning.basis import Flow
from ..planning.water_fit import FIT_LABELS
from .numbers import fmt
from .plan_json import sheet_dict
from .sheet import render_sheet
from .text import hanging, wrap
from .units import product_text
from .words import texts, words

__all__ = ["titration_dict", "render_titration", "spectrum_bars"]


def titration_dict(c) -> dict[str, Any]:
    """The comparison as plain data (SI units, JSON-ready, stable keys)."""
    curve, direct, fit, spec, a = c.curve, c.direct, c.fit, c.spectrum, c.direct_amounts
    per = "per_h" if isinstance(c.scenario.basis, Flow) else "per_batch"
    return {
        "sample_ml": curve.sample_ml, "titrant": curve.titrant.label,
        "points": int(curve.ph.size),
        "direct": {
            "ml_titrant_at_aim": direct.ml_at_aim,
            "ml_titrant_at_window": list(direct.ml_at_edges),
            "titrant_eq_per_l_effluent": direct.eq_per_l,
            "dose_mmol_per_l": None if direct.dose_mol_l is None else direct.dose_mol_l * 1000,
            f"kg_product_{per}": None if a is None else a.kg_product,
            f"litres_product_{per}": None if a is None else a.litres_product,
            "band_mmol_per_l": [None if b is None else b * 1000 for b in direct.band_mol_l],
        },
        "trusted": c.trusted,
        "model": {"fitted": fit.params, "stderr": fit.stderr, "rms_ph": c.rms_ph,
                  "rms_ph_simple_fit": fit.rms_ph,
                  "unknown_acid": fit.unknown_acid,
                  "residual_ml": [float(r) for r in fit.residual_ml],
                  "used": c.used,
                  "plan": None if c.plan is None else sheet_dict(c.scenario, c.plan)},
        "spectrum": None if spec is None else _spectrum_dict(spec),
        "gap_model_vs_direct": c.gap,
        "warnings": texts(c.warnings),
        "cautions": list(c.cautions),
    }


def _spectrum_dict(spec) -> dict[str, Any]:
    return {"rms_ph": spec.rms_ph, "strong_ion_balance_meq_l": spec.strong_eq_l * 1000,
            "carbonate_mmol_l": spec.carbonate_mol_l * 1000,
            "titrated_ph_range": list(spec.ph_range),
            "sites": [{"pka": float(p), "mmol_per_l": float(x) * 1000}
                      for p, x in zip(spec.site_pka, spec.site_mol_l)],
            "regions": [{"pka": r.pka, "mmol_per_l": r.mmol_l, "sd_mmol_per_l": r.sd_mmol_l,
                         "guess": r.guess, "at_edge": r.edge, "words": words(r.finding())}
                        for r in spec.regions]}


def _plus_minus(value: float, err: float | None, unit: str) -> str:
    """'1.20 ± 0.12 mmol/L', or a note in place of the error when the curve cannot tell it."""
    shown = fmt(value, zero_below=1e-4)         # below 0.1 µmol/L: nothing the curve resolves
    unit = f" {unit}" if unit else ""
    if err is None:
        return f"{shown}{unit} (not determined)"
    return f"{shown} ± {fmt(err, 2)}{unit}"


def render_titration(scenario, c, units: str = "metric", width: int = 78) -> str:
    """Both titration methods side by side (a :class:`~dosing.planning.titration.Comparison`),
    then the model plan's sheet."""
    direct, plan, curve = c.direct, c.plan, c.curve
    label = c.scenario.basis.per
    da = c.direct_amounts
    scaled = (f"{fmt(direct.dose_mol_l * 1000)} mmol/L, "
              f"{product_text(da.kg_product, da.litres_product, units)} {label}"
              if direct.dose_mol_l is not None
              else "no dose by equivalents for this reagent (see the warnings)")
    out = wrap(f"BENCH TITRATION  {curve.ph.size} points, {fmt(curve.sample_ml)} mL "
               f"sample, titrant {curve.titrant.label}", width, "") + ["=" * 40]
    if c.trusted == "direct" and direct.dose_mol_l is not None:
        out += wrap(f"DOSE BY DIRECT SCALING {scaled}: the fitted water misses the curve "
                    f"by {c.rms_ph:.2f} pH, so the curve itself is the better guide; the "
                    "plan below rests on the fit and is shown for its checks", width, "")
        out.append("")
    out += hanging("direct scaling", f"{fmt(direct.ml_at_aim)} mL titrant to pH "
                   f"{c.scenario.target.ph_aim:g} -> {scaled}", width)
    if plan is None:
        out += hanging("model fit", f"no dose: the fit misses the curve by {c.rms_ph:.2f} pH "
                       "RMS (see the warnings)", width)
    else:
        a = plan.amounts()
        out += hanging("model fit", f"{fmt(a.mmol_per_l)} mmol/L, "
                       f"{product_text(a.kg_product, a.litres_product, units)} {label}", width)
    if c.gap is not None:
        out += hanging("", f"the model is {c.gap:+.1%} against the direct scaling", width)
    spec = c.spectrum
    if c.used == "spectrum" and spec is not None:
        out.extend(wrap(f"buffer spectrum strong-ion balance {fmt(spec.strong_eq_l * 1000)} "
                        f"meq/L, carbonate {fmt(spec.carbonate_mol_l * 1000, floor=1e-4)} "
                        f"mmol/L; pH misfit {spec.rms_ph:.3f} RMS (the simple fit misses by "
                        f"{c.fit.rms_ph:.3f})", width, "                "))
        for r in spec.regions:
            out.extend(wrap(words(r.finding(), units), width, "                  - "))
        out.extend(spectrum_bars([(float(p), float(x) * 1000)
                                  for p, x in zip(spec.site_pka, spec.site_mol_l)]))
    else:
        m = c.fit
        out += hanging("fitted water", ", ".join(
            f"{FIT_LABELS[k][0]} {_plus_minus(v, m.stderr[k], FIT_LABELS[k][1])}"
            for k, v in m.params.items()) + f"; pH misfit {m.rms_ph:.3f} RMS", width)
    if c.warnings:
        out += ["", "TITRATION WARNINGS"]
        for w in texts(c.warnings, units):
            out.extend(wrap(w, width, "  ! "))
    if plan is None:
        out += ["", "CAUTIONS"]
        for line in c.cautions:
            out.extend(wrap(line, width, "  - "))
        return "\n".join(out) + "\n"
    out += ["", "PLAN WITH THE FITTED WATER", ""]
    out.append(render_sheet(c.scenario, plan, units, width))
    return "\n".join(out)


def spectrum_bars(sites: list[tuple[float, float]], bar: int = 30) -> list[str]:
    """The fitted sites (pKa, mmol/L) as a text bar chart (for the sheet and the view)."""
    if not sites:
        return []
    top = max(x for _, x in sites) or 1.0
    out = ["", "buffer spectrum (fitted sites, mmol/L)"]
    for pka, x in sites:
        n = max(1, round(bar * x / top))
        out.append(f"  pKa {pka:>4.1f}  {'█' * n:<{bar}}  {fmt(x)}")
    return out
