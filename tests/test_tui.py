"""The terminal view (Tankside) driven by Textual's pilot."""

import asyncio
from pathlib import Path

import pytest

from dosing.io.scenario import load_scenario, parse_scenario
from dosing.planning.job import make_plan
from tests.tui_helpers import drive as run_in_tankside, settle
from tui.app import make_app
from tui.form import field_id
from tui.screens.ask import TitrationAnswer

ROOT = Path(__file__).resolve().parents[1]
CIP = str(ROOT / "scenarios" / "cip-sulfuric.toml")


def drive(coro_fn, path=CIP):
    run_in_tankside(coro_fn, path)


async def set_field(app, pilot, key, text):
    box = app.query_one("#" + field_id(key))
    box.focus()
    box.value = ""
    await pilot.press(*list(text)) if text else None
    await settle(app, pilot)


def test_opens_a_scenario_and_shows_the_engine_dose():
    async def check(app, pilot):
        expected = make_plan(load_scenario(CIP))
        assert app.plan is not None
        assert app.plan.dose_mol_l == pytest.approx(expected.dose_mol_l, rel=1e-12)
        text = app.query_one("#dose-panel").plain_text
        assert "30.0 kg" in text
    drive(check)


def test_typing_a_new_ph_replans():
    async def check(app, pilot):
        await set_field(app, pilot, "effluent.ph", "11.2")
        s = load_scenario(CIP)
        data = dict(s.data)
        data["effluent"] = dict(data["effluent"], ph=11.2)
        expected = make_plan(parse_scenario(_toml(data)))
        assert app.plan.ph_start == 11.2
        assert app.plan.dose_mol_l == pytest.approx(expected.dose_mol_l, rel=1e-9)
        assert not app.stale
    drive(check)


def test_invalid_entry_shows_the_reason_and_keeps_the_plan():
    async def check(app, pilot):
        before = app.plan
        await set_field(app, pilot, "effluent.ph", "19")
        err = app.query_one("#" + field_id("effluent.ph") + "-error")
        assert err.display and "too high" in str(err.render())
        assert app.plan is before and app.stale
        assert "Last valid plan shown" in app.query_one("#dose-panel").plain_text
        await set_field(app, pilot, "effluent.ph", "abc")
        assert "not a number" in str(err.render())
        await set_field(app, pilot, "batch.volume_m3".replace("batch.volume_m3", "basis.amount"),
                        "-3")
        assert app.plan is before
        await set_field(app, pilot, "effluent.ph", "11.8")
        await set_field(app, pilot, "basis.amount", "18")
        assert not app.stale and not err.display
    drive(check)


def test_switching_reagent_matches_the_engine():
    async def check(app, pilot):
        app.query_one("#f-reagent--id").value = "hydrochloric-32"
        await settle(app, pilot)
        assert app.plan.reagent.id == "hydrochloric-32"
        s = load_scenario(CIP)
        data = dict(s.data)
        data["reagent"] = dict(data["reagent"], id="hydrochloric-32")
        expected = make_plan(parse_scenario(_toml(data)))
        assert app.plan.amounts().kg_product == pytest.approx(expected.amounts().kg_product,
                                                              rel=1e-9)
    drive(check)


def test_custom_reagent_fields():
    async def check(app, pilot):
        app.query_one("#f-reagent--id").value = "custom"
        await settle(app, pilot)
        app.query_one("#f-reagent--compound").value = "H2SO4"
        await set_field(app, pilot, "reagent.mass_fraction", "0.5")
        await set_field(app, pilot, "reagent.density_kg_l", "1.3952")
        assert app.plan.reagent.id == "custom"
        assert app.plan.reagent.mass_fraction == 0.5
        assert not app.stale
    drive(check)


def test_save_and_open_round_trip(tmp_path):
    out = tmp_path / "saved.toml"

    async def check(app, pilot):
        await set_field(app, pilot, "target.ph_aim", "7.0")
        app.save_path(str(out))
        await settle(app, pilot)
        assert out.exists()
        saved = load_scenario(out)
        assert saved.target.ph_aim == 7.0
        assert saved.site == "Marlow Fen Dairy"        # kept though not on the form
        assert saved.permit == {"sulfate_mg_l": 1500}
        assert make_plan(saved).dose_mol_l == pytest.approx(app.plan.dose_mol_l, rel=1e-12)
        app.open_path(str(ROOT / "scenarios" / "lime-acid-batch.toml"))
        await settle(app, pilot)
        assert app.plan.reagent.id == "lime"
        app.open_path(str(tmp_path / "missing.toml"))
        await settle(app, pilot)
        assert "no such file" in app.status and app.plan.reagent.id == "lime"
    drive(check)


def test_views_help_and_units():
    async def check(app, pilot):
        for key in ("f3", "f4", "f5", "f2"):
            await pilot.press(key)
            await settle(app, pilot)
        await pilot.press("f6")
        await settle(app, pilot)
        assert app.units == "us"
        assert " lb" in app.query_one("#dose-panel").plain_text
        await pilot.press("f1")
        await settle(app, pilot)
        assert app.screen.__class__.__name__ == "HelpScreen"
        await pilot.press("escape")
        caution = str(app.query_one("#caution").render())
        assert "licensed engineer have the final word" in " ".join(caution.split())
    drive(check)


def test_starts_without_a_file():
    async def check(app, pilot):
        assert app.plan is not None and app.plan.reagent.id == "caustic-50"
    drive(check, path=None)


def _toml(data):
    from dosing.io.scenario import scenario_to_toml
    return scenario_to_toml(data)


def test_loads_a_bench_titration(tmp_path):
    from tests.test_titration import synthetic
    from tests.helpers import totals
    from dosing.planning.bench import parse_titrant
    import numpy as np
    tit = parse_titrant("0.1 N H2SO4")
    v = np.linspace(0, 12, 30)
    ph = synthetic(totals(carbonate=0.004), 0.008, tit, 50.0, v, t_c=45.0)
    jar = tmp_path / "jar.csv"
    jar.write_text("ml,pH\n" + "".join(f"{a:.3f},{b:.4f}\n" for a, b in zip(v, ph)))

    async def check(app, pilot):
        app.load_titration(TitrationAnswer(str(jar), 50.0, "0.1 N H2SO4"))
        await settle(app, pilot)
        text = str(app.query_one("#titration-text").content)
        assert "direct scaling" in text and "model fit" in text
        assert "[sulfuric-98]" in text         # shown as text, not eaten as markup
        assert "against direct scaling" in app.status
        # The curve is drawn too: the readings and the fitted water through them.
        plot = app.query_one("#titration-plot")
        assert plot.display
        drawn = plot.plt.build()
        assert "measured" in drawn and "fitted water" in drawn
        app.load_titration(TitrationAnswer(str(tmp_path / "none.csv"), 50.0, "0.1 N H2SO4"))
        await settle(app, pilot)
        assert "no such file" in app.status
    drive(check)


def test_uncertainty_is_sampled_off_the_event_loop_and_shown():
    # The dose shows at once; how sure it is follows from a worker thread,
    # and equals what the command line computes for the same scenario.
    async def check(app, pilot):
        await app.workers.wait_for_complete()
        await settle(app, pilot)
        expected = make_plan(load_scenario(CIP))
        assert app.plan.uncertainty is not None
        assert app.plan.uncertainty.p50_mol_l == pytest.approx(
            expected.uncertainty.p50_mol_l, rel=1e-9)
        text = app.query_one("#dose-panel").plain_text
        assert "how sure" in text and "plausible waters" in text
        assert not app.sampling
    drive(check)


def test_a_sample_for_an_old_form_is_dropped():
    async def check(app, pilot):
        old = app.plan
        await set_field(app, pilot, "effluent.ph", "11.2")
        newer = app.plan
        app._sampled(old, make_plan(load_scenario(CIP)))     # a late result
        assert app.plan is newer
    drive(check)


def test_saving_keeps_comments_and_asks_before_overwriting(tmp_path):
    # A copy of the demo, comments and all, opened, edited and saved back.
    src = tmp_path / "cip.toml"
    src.write_text(Path(CIP).read_text())
    before = src.read_text()

    async def check(app, pilot):
        await set_field(app, pilot, "target.ph_aim", "7.2")
        app.save_path(str(src))
        await settle(app, pilot)
        assert src.read_text() == before and "exists" in app.status   # asked first
        app.save_path(str(src))
        await settle(app, pilot)
        assert "saved" in app.status
    drive(check, str(src))
    after = src.read_text()
    comments = [ln for ln in before.splitlines() if ln.lstrip().startswith("#")]
    assert comments and all(c in after for c in comments)
    assert load_scenario(src).target.ph_aim == 7.2
    # Only the value that changed differs.
    changed = [(a, b) for a, b in zip(before.splitlines(), after.splitlines()) if a != b]
    assert len(changed) == 1 and "ph_aim" in changed[0][1]



def test_switching_product_drops_the_old_price_and_lists_names():
    async def check(app, pilot):
        from textual.widgets import Select
        box = app.query_one("#" + field_id("reagent.price_per_kg"))
        assert box.value != ""
        select = app.query_one("#f-reagent--id", Select)
        labels = [str(p[0]) for p in select._options]
        assert any("hydrochloric" in x.lower() for x in labels)     # names, not ids
        select.value = "hydrochloric-32"
        await settle(app, pilot)
        assert box.value == "" and app.plan.reagent.id == "hydrochloric-32"
        assert "cost" not in app.query_one("#dose-panel").plain_text
    drive(check)


def test_us_units_switch_the_inputs_and_keep_the_values():
    # Issue 18 item 5: in US units the form asks in °F, gal and lb/gal, and a
    # value nobody retyped goes back exactly as it came (exact NIST SP 811
    # factors: 1 gal = 3.785411784 L, 1 lb = 0.45359237 kg).
    async def check(app, pilot):
        before = app.plan.dose_mol_l
        form_data = app.query_one("#form").to_data()[0]
        await pilot.press("f6")
        await settle(app, pilot)
        temp = app.query_one("#" + field_id("effluent.temperature_c"))
        c = form_data["effluent"]["temperature_c"]
        assert float(temp.value) == pytest.approx(c * 1.8 + 32, abs=1e-3)
        assert str(app.query_one("#" + field_id("effluent.temperature_c") + "-unit")
                   .render()) == "°F"
        assert str(app.query_one("#" + field_id("basis.amount") + "-unit").render()) == "gal"
        assert app.query_one("#form").to_data()[0] == form_data      # nothing moved
        await set_field(app, pilot, "basis.amount", "2641.72")     # 10.0000 m³
        assert app.plan.basis.volume_m3 == pytest.approx(10.0, rel=1e-6)
        await pilot.press("f6")
        await settle(app, pilot)
        box = app.query_one("#" + field_id("basis.amount"))
        assert float(box.value) == pytest.approx(10.0, rel=1e-5)
        assert app.plan.dose_mol_l == pytest.approx(before, rel=1e-9)
    drive(check)


def test_after_opening_a_file_keys_go_to_the_form():
    # Issue 18 item 8: after Ctrl+O the keystrokes went nowhere.
    other = str(ROOT / "scenarios" / "flow-metering-pump.toml")

    async def check(app, pilot):
        await pilot.press("f4")                     # working in another view
        app.query_one("#compare").focus()
        await pilot.press("ctrl+o")
        await settle(app, pilot)
        box = app.screen.query_one("Input")
        box.value = other
        await pilot.press("enter")
        await settle(app, pilot)
        assert app.path == other
        ph = app.query_one("#" + field_id("effluent.ph"))
        assert app.focused is ph
        await pilot.press("end", "backspace", "backspace", "backspace", "backspace", "9", ".", "9")
        await settle(app, pilot)
        assert ph.value == "9.9" and app.plan.ph_start == 9.9
    drive(check)


def test_a_permit_breach_heads_the_dose_panel():
    # Issue 18 item 2: the CIP demo breaks its sulfate cap; the panel says so
    # before the dose, not among the notes below it.
    async def check(app, pilot):
        text = app.query_one("#dose-panel").plain_text
        assert text.index("PERMIT BREACH: permit cap sulfate") < text.index("product per batch")
    drive(check)


def test_planning_runs_off_the_event_loop_and_a_stale_result_is_dropped():
    # Issue 15 item 6: the plan is made in a worker thread; a plan asked for
    # before the latest keystroke arrives late and must not replace the plan
    # for the values now in the form.
    async def check(app, pilot):
        shown = app.plan
        other = make_plan(load_scenario(str(ROOT / "scenarios" / "acid-rinse-caustic.toml")),
                          sampled=False)
        app._planned(app._generation - 1, app.scenario, other)      # an older request
        assert app.plan is shown and not app.planning
        await set_field(app, pilot, "effluent.ph", "11.5")
        assert app.plan.ph_start == 11.5 and not app.planning
        assert [w for w in app.workers if w.group == "plan"] == []    # all finished
    drive(check)


def test_a_stale_plan_is_dimmed_and_errors_wrap():
    # Issue 18 items 3 and 6: after a bad entry the kept plan is marked and
    # dimmed; the field's error wraps instead of being cut.
    async def check(app, pilot):
        await set_field(app, pilot, "effluent.ph", "999")
        panel = app.query_one("#dose-panel")
        assert app.stale and panel.has_class("stale")
        assert panel.plain_text.startswith("Last valid plan shown")
        error = app.query_one("#" + field_id("effluent.ph") + "-error")
        assert "allowed: up to 14" in str(error.render())
        assert error.outer_size.width >= error.parent.size.width - 2   # the full row: it wraps
        await set_field(app, pilot, "effluent.ph", "11.5")
        assert not app.stale and not panel.has_class("stale")
    drive(check)


def test_recording_asks_in_its_own_boxes(tmp_path):
    # Issue 15 item 6: the record prompt was one line split on ";". Now a
    # dialog with a box per value checks the numbers before anything is
    # written, and hands back typed values.
    db = tmp_path / "log.sqlite"

    async def main():
        app = make_app(CIP, db=str(db))
        async with app.run_test(size=(120, 40)) as pilot:
            await settle(app, pilot)
            await pilot.press("f7")
            await pilot.pause()
            dialog = app.screen
            assert dialog.query_one("#ask-dosed").parent.query_one(".unit").render() == "kg"
            dialog.query_one("#ask-operator").value = "R. Vale"
            dialog.query_one("#ask-dosed").value = "thirty"
            dialog.query_one("#ask-operator").focus()
            await pilot.press("enter")
            await pilot.pause()
            assert app.screen is dialog                     # refused, still open
            assert "'thirty' is not a number" in str(dialog.query_one("#ask-error").render())
            assert not db.exists()
            dialog.query_one("#ask-dosed").value = "29.5"
            dialog.query_one("#ask-ph_after").value = "7.4"
            await pilot.press("enter")
            await settle(app, pilot)
            assert "recorded as entry 1" in app.status
        from dosing.io.shiftlog import ShiftLog
        with ShiftLog(str(db), writable=False) as log:
            (entry,) = list(log.entries())
        assert (entry.operator, entry.dosed_kg, entry.ph_after) == ("R. Vale", 29.5, 7.4)
    asyncio.run(main())


def test_loading_a_file_plans_once():
    # Issue 15 item 6: filling the form from a file posted a Changed message
    # per box after the "loading" flag was already reset, so opening a file
    # planned nine times over; Textual's message prevention stops them.
    other = str(ROOT / "scenarios" / "plating-rinse-metals.toml")

    async def check(app, pilot):
        calls = []
        plan_once = app.recompute
        app.recompute = lambda: (calls.append(1), plan_once())
        app.open_path(other)
        await settle(app, pilot)
        assert len(calls) == 1 and app.plan.reagent.id == "caustic-25"
    drive(check)


def test_a_decimal_comma_is_read_and_an_ambiguous_one_refused():
    # Issue 29: "2,8" is 2.8 where the locale writes a decimal comma; "1,234"
    # could be either, so it is refused with a reason, never guessed.
    async def check(app, pilot):
        await set_field(app, pilot, "effluent.ph", "11,2")
        assert app.scenario.measurements.ph == 11.2
        await set_field(app, pilot, "target.ph_aim", "7,25")
        assert app.scenario.target.ph_aim == 7.25
        await set_field(app, pilot, "basis.amount", "1,234")
        shown = app.query_one("#" + field_id("basis.amount") + "-error").render()
        assert app.stale and "could be 1.234 or 1234" in str(shown)
    drive(check)
