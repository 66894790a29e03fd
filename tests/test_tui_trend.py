"""Tankside's Trend view (issue 26 item 4): a short simulation of the form's
design, drawn in a worker thread; the same simulation the command runs."""

from pathlib import Path

import pytest

from dosing.io.scenario import load_scenario
from dosing.planning.job import make_plan
from tests.tui_helpers import drive, settle
from tui.view_render import trend_simulation

ROOT = Path(__file__).resolve().parents[1]
FOOD = str(ROOT / "scenarios" / "food-acetate-stream.toml")
BATCH = str(ROOT / "scenarios" / "acid-rinse-caustic.toml")


def _text(app) -> str:
    return " ".join(str(app.query_one("#trend-text").render()).split())


def test_the_trend_view_simulates_the_form_s_stream():
    async def check(app, pilot):
        await pilot.press("f10")
        await settle(app, pilot)
        text = _text(app)
        assert "1 stage, tight" in text and "2 stages, tight" in text
        assert "licensed engineer have the final word" in text
        assert app.query_one("#trend-plot").display
        # The figures are the simulation's own, for the scenario as planned.
        s = load_scenario(FOOD)
        sim = trend_simulation(s, make_plan(s, sampled=False))
        run = sim.runs[0]
        reagent = f"{run.reagent_mol * s.reagent.kg_product_per_mol:.0f}"
        row = f"1 stage, tight {run.outside_s / run.total_s:.2%} {len(run.excursions)} {reagent}"
        assert row in text
    drive(check, FOOD, (120, 40), show_timing=False)


def test_a_batch_has_no_trend_and_says_why():
    async def check(app, pilot):
        await pilot.press("f10")
        await settle(app, pilot)
        assert "No trend: simulate needs a continuous stream" in _text(app)
        assert not app.query_one("#trend-plot").display
    drive(check, BATCH, (120, 40), show_timing=False)


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
def test_the_comparison_fits_the_pane(size):
    async def check(app, pilot):
        await pilot.press("f10")
        await settle(app, pilot)
        pane = app.query_one("#trend-text")
        lines = str(pane.render()).splitlines()
        assert lines and max(map(len, lines)) <= pane.size.width
    drive(check, FOOD, size, show_timing=False)


def test_a_units_change_redraws_the_trend_without_simulating_again():
    async def check(app, pilot):
        await pilot.press("f10")
        await settle(app, pilot)
        first = app._trend
        await pilot.press("f6")
        await settle(app, pilot)
        assert app._trend is first                         # the same simulation
        assert " lb" in _text(app)                          # shown in US units
        app.query_one("#f-effluent--ph").value = "3.7"     # a new stream: simulated anew
        await settle(app, pilot)
        assert app._trend is not first and app._trend[0] is app.scenario
    drive(check, FOOD, (120, 40), show_timing=False)
