"""Tankside read on shift at 80x24 (issue 29 items 8, 10, 11): every key
reachable, the file name whole, the sweep keeps the operator's own size,
a flow's control design in the Dose view, the views scroll from the
keyboard, and US prices, saving and long messages read well."""

from pathlib import Path

import pytest

from dosing.io.scenario import load_scenario
from tests.tui_helpers import drive as run_in_tankside, settle
from tui.form import field_id
from tui.screens.help import HELP

ROOT = Path(__file__).resolve().parents[1]
PLATING = str(ROOT / "scenarios" / "plating-rinse-metals.toml")
FLOW = str(ROOT / "scenarios" / "flow-metering-pump.toml")
RINSE = str(ROOT / "scenarios" / "acid-rinse-caustic.toml")


def drive(coro_fn, path=PLATING, size=(80, 24)):
    run_in_tankside(coro_fn, path, size, show_timing=False)


def test_every_key_is_in_the_footer_or_the_help_at_80_columns():
    async def check(app, pilot):
        keys = list(app.query("FooterKey"))
        assert keys and all(k.region.right <= 80 for k in keys)
        shown = {k.action for k in keys}
        for b in app.BINDINGS:
            if b.show:
                assert b.action in shown, b
            else:       # a key left out of the footer is in the help (F1)
                name = b.key.upper() if b.key.startswith("f") else {
                    "pagedown": "PgDn", "pageup": "PgUp"}[b.key]
                assert name in HELP, b.key
    drive(check)


def test_the_title_keeps_the_file_name_whole_at_80_columns():
    async def check(app, pilot):
        assert app.title == "Tankside"
        header = " ".join(str(w.render()) for w in app.query("HeaderTitle"))
        assert "scenarios/plating-rinse-metals.toml" in header.replace("\n", "")
    drive(check, "scenarios/plating-rinse-metals.toml")


def test_the_sweep_keeps_the_operators_own_size_in_view():
    async def check(app, pilot):
        await pilot.press("f4")
        await settle(app, pilot)
        table = app.query_one("#sweep-table")
        heads = [str(c.label) for c in table.columns.values()]
        own = f"{load_scenario(PLATING).basis.volume_m3:.1f}"
        assert any(h.startswith(own) and h.endswith("◂") for h in heads), heads
        assert table.virtual_size.width <= table.size.width     # nothing cut at the right
    drive(check)


def test_the_sheet_fills_its_pane():
    async def check(app, pilot):
        await pilot.press("f5")
        await settle(app, pilot)
        pane = app.query_one("#sheet-text")
        lines = str(pane.render()).splitlines()
        assert max(map(len, lines)) <= pane.size.width
        assert max(map(len, lines)) >= pane.size.width - 8    # not wrapped far short
    drive(check, size=(120, 40))


def test_a_flows_control_design_is_in_the_dose_view_and_pages_from_the_keyboard():
    async def check(app, pilot):
        text = app.query_one("#dose-panel").plain_text
        assert "CONTROL (continuous stream)" in text and "process gain" in text
        assert app.focused is app.query_one("#" + field_id("effluent.ph"))
        scroll = app.query_one("#dose").query_one("VerticalScroll")
        assert scroll.scroll_y == 0
        await pilot.press("pagedown")
        await pilot.pause()
        assert scroll.scroll_y > 0
        await pilot.press("pageup")
        await pilot.pause()
        assert scroll.scroll_y == 0
        await pilot.press("f1")                 # over the help, the keys are the help's
        await pilot.pause()
        await pilot.press("pagedown")
        await pilot.pause()
        assert scroll.scroll_y == 0
        assert app.screen.query_one("#help-box").scroll_y > 0
    drive(check, FLOW)


def test_us_price_reads_in_four_figures_with_its_currency():
    async def check(app, pilot):
        box = app.query_one("#" + field_id("reagent.price_per_kg"))
        unit = app.query_one("#" + field_id("reagent.price_per_kg") + "-unit")
        data = load_scenario(RINSE).data
        assert str(unit.render()) == f"{data['currency']} per kg"
        before = app.plan.dose_mol_l
        await pilot.press("f6")
        await settle(app, pilot)
        per_lb = data["reagent"]["price_per_kg"] * 0.45359237    # NIST SP 811, exact
        assert box.value == f"{per_lb:.4g}"
        assert str(unit.render()) == f"{data['currency']} per lb"
        form = app.query_one("#form").to_data()[0]
        assert form["reagent"]["price_per_kg"] == data["reagent"]["price_per_kg"]   # exact
        assert app.plan.dose_mol_l == before
    drive(check, RINSE, size=(120, 40))


def test_save_as_a_new_file_keeps_the_comments_and_asks_before_overwriting(tmp_path):
    src = Path(PLATING).read_text()
    comments = [ln for ln in src.splitlines() if ln.lstrip().startswith("#")]
    new = tmp_path / "copy.toml"
    new.write_text("title = 'someone else's file'\n")

    async def check(app, pilot):
        app.save_path(str(new))
        await settle(app, pilot)
        status = app.query_one("#status")
        assert "exists" in app.status and new.read_text().startswith("title = 'someone")
        # The whole message is on screen at 80 columns (it wraps, not cut).
        assert status.size.height * (status.size.width - 2) >= len(app.status)
        app.save_path(str(new))
        await settle(app, pilot)
        assert "saved" in app.status
    drive(check)
    assert comments and all(c in new.read_text() for c in comments)
    assert load_scenario(new).data == load_scenario(PLATING).data


@pytest.mark.parametrize("path", [PLATING, FLOW])
def test_every_view_opens_at_80x24_without_error(path):
    async def check(app, pilot):
        for key in ("f2", "f3", "f4", "f5", "f9", "f1", "escape"):
            await pilot.press(key)
            await settle(app, pilot)
        assert app.plan is not None and not app.stale
    drive(check, path)
