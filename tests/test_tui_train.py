"""Trains in Tankside, driven by Textual's pilot: shown, edited, adopted, saved.

The figures are the engine's own (make_train on the same scenario); the view
must show them and keep the scenario's steps through edits and a save.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from dosing.io.scenario import load_scenario, parse_scenario
from dosing.planning.job import make_plan
from dosing.planning.train_job import make_train
from tests.tui_helpers import drive as run_in_tankside, settle
from tui.train_mode import moved, removed, steps_of, with_steps

ROOT = Path(__file__).resolve().parents[1]
LIME = str(ROOT / "scenarios" / "lime-then-caustic.toml")
PLATING = str(ROOT / "scenarios" / "plating-rinse-window69.toml")


def drive(coro_fn, path):
    run_in_tankside(coro_fn, path, show_timing=False)


def test_a_train_scenario_shows_its_train():
    async def check(app, pilot):
        expected = make_train(load_scenario(LIME))
        assert app.train is not None and not app.train.proposed
        assert [r.spec.kind for r in app.train.steps] == ["dose", "dose", "separate"]
        assert app.train.discharge.ph == pytest.approx(expected.discharge.ph, abs=1e-9)
        text = app.query_one("#dose-panel").plain_text
        assert "TREATMENT TRAIN" in text and "licensed engineer" in " ".join(text.split())
        await pilot.press("f9")
        assert app.query_one("#train-table").row_count == 3
    drive(check, LIME)


def test_editing_a_step_replans_the_train():
    async def check(app, pilot):
        await pilot.press("f9", "down", "enter")           # step 2, the caustic trim
        await pilot.pause()
        await pilot.press("tab", *"9.4", "enter")          # its pH aim
        await settle(app, pilot)
        assert app.steps[1]["ph_aim"] == 9.4
        assert app.train.steps[1].ph_out == pytest.approx(9.4, abs=1e-6)
    drive(check, LIME)


def test_the_proposal_is_shown_and_adopted():
    async def check(app, pilot):
        assert app.train is not None and app.train.proposed and app.steps is None
        await pilot.press("f9", "p")
        await settle(app, pilot)
        assert [s["kind"] for s in app.steps] == ["dose", "separate", "dose"]
        assert app.steps[0]["price_per_kg"] == 0.30        # the price goes with the dose
        assert app.train is not None and not app.train.proposed
        assert app.train.discharge.met
    drive(check, PLATING)


def test_saving_keeps_the_steps(tmp_path):
    out = tmp_path / "saved.toml"

    async def check(app, pilot):
        app.save_path(str(out))
        await pilot.pause()
    drive(check, LIME)
    again = make_train(load_scenario(str(out)))
    assert [r.spec.kind for r in again.steps] == ["dose", "dose", "separate"]


# ------------------------------------------------------ plain helpers --
def test_with_steps_leaves_out_what_a_train_does_not_read():
    form = {"effluent": {"ph": 3}, "batch": {"volume_m3": 5}, "reagent": {"id": "lime"},
            "target": {"ph_min": 6, "ph_max": 9}}
    assert "reagent" in with_steps(form, None)
    train = with_steps(form, [{"kind": "dose", "reagent": "lime"}])
    assert "reagent" not in train and "effluent" in train
    blend = with_steps(form, [{"kind": "blend"}, {"kind": "dose"}])
    assert not {"reagent", "effluent", "batch"} & set(blend)


def test_moving_keeps_a_blend_first_and_removing_the_last_step_is_one_dose():
    steps = [{"kind": "blend"}, {"kind": "dose"}, {"kind": "separate"}]
    assert moved(steps, 1, -1) == steps
    assert moved(steps, 1, +1)[1:] == [{"kind": "separate"}, {"kind": "dose"}]
    assert removed([{"kind": "dose"}], 0) is None


def test_a_proposal_as_steps_plans_the_same_train():
    s = load_scenario(PLATING)
    proposed = make_train(s, make_plan(s, sampled=False))
    from dosing.io.scenario import scenario_to_toml
    data = with_steps(dict(s.data), steps_of(tuple(r.spec for r in proposed.steps)))
    own = make_train(parse_scenario(scenario_to_toml(data)))
    assert own.discharge.ph == pytest.approx(proposed.discharge.ph, abs=1e-6)
    assert own.products[0].amounts.kg_product == pytest.approx(
        proposed.products[0].amounts.kg_product, rel=1e-6)


def test_a_train_shows_no_custom_product_rows():
    # A train scenario has no [reagent]; its steps name the products, so the
    # custom-product rows (compound, strength) are not shown either.
    async def check(app, pilot):
        rows = [w for w in app.query(".custom") if w.display]
        assert rows == []
    drive(check, str(ROOT / "scenarios" / "mine-water-train.toml"))
