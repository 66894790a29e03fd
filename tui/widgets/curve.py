"""The titration curve as a text plot (textual-plotext)."""

from __future__ import annotations

from textual_plotext import PlotextPlot

from dosing.planning.plan import Plan
from dosing.report.sheet import dose_axis
from dosing.report.units import UnitSystem

__all__ = ["CurvePlot", "TitrationPlot", "curve_axes"]


def curve_axes(plan: Plan, units: UnitSystem) -> tuple[list[float], list[float], str, float]:
    """x (product per batch or hour), pH, x label and the planned x."""
    scale, _, label = dose_axis(plan, units)
    x = [float(v) * scale for v in plan.curve.dose_mol_l]
    return x, [float(v) for v in plan.curve.ph], label, plan.dose_mol_l * scale


class CurvePlot(PlotextPlot):
    """pH against dose with the window edges, the aim and the planned dose."""

    def show(self, plan: Plan, units: UnitSystem) -> None:
        x, ph, label, planned = curve_axes(plan, units)
        p = self.plt
        p.clear_data()
        p.clear_figure()
        p.plot(x, ph, label="pH after dose", color="cyan")
        t = plan.target
        p.hline(t.ph_min, "green")
        p.hline(t.ph_max, "green")
        p.hline(t.ph_aim, "green+")
        p.vline(planned, "red")
        p.scatter([planned], [plan.ph_end], marker="●", color="red", label="planned dose")
        p.title(f"window pH {t.ph_min:g}-{t.ph_max:g} (green), planned dose (red)")
        p.xlabel(label)
        p.ylabel("pH")
        p.ylim(max(0.0, min(min(ph), t.ph_min) - 0.5), min(14.0, max(max(ph), t.ph_max) + 0.5))
        self.refresh()


class TitrationPlot(PlotextPlot):
    """A bench titration: the readings, and the fitted water's curve through them."""

    def show(self, curve, water, target) -> None:
        from dosing.planning.water_fit import model_curve
        v, ph = model_curve(curve, water, points=120)
        p = self.plt
        p.clear_data()
        p.clear_figure()
        p.plot([float(x) for x in v], [float(y) for y in ph], label="fitted water",
               color="cyan")
        p.scatter([float(x) for x in curve.added_ml], [float(y) for y in curve.ph],
                  marker="●", color="white", label="measured")
        p.hline(target.ph_min, "green")
        p.hline(target.ph_max, "green")
        p.hline(target.ph_aim, "green+")
        p.title("bench titration: measured (dots), fitted water (line), window (green)")
        p.xlabel(f"titrant {curve.titrant.label}, mL into {curve.sample_ml:g} mL")
        p.ylabel("pH")
        self.refresh()
