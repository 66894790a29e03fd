"""Tankside's layout at three terminal sizes, fixed by snapshots (issue 18
item 7): 80x24, 100x30 and 160x50, each view an operator uses. The
snapshots are SVG files under tests/__snapshots__; after a deliberate layout
change, look at the new ones and update them with

    python -m pytest tests/test_tankside_layout.py --snapshot-update

The test extras pin textual, rich and plotext so the rendering is the same on
every machine. Status lines leave out timings (they vary from run to run).
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from tui.app import make_app

ROOT = Path(__file__).resolve().parents[1]
pytest.importorskip("pytest_textual_snapshot")


async def _settled(pilot) -> None:
    """Wait until the plan and its background sampling are shown, with the
    text cursor held still (a blinking cursor is drawn or not at random)."""
    from textual.widgets import Input
    for box in pilot.app.query(Input):
        box.cursor_blink = False
    await pilot.pause()
    await pilot.app.workers.wait_for_complete()
    await pilot.pause()


@pytest.mark.parametrize("scenario, size, keys", [
    ("cip-sulfuric.toml", (80, 24), ()),
    ("flow-metering-pump.toml", (100, 30), ()),
    ("plating-rinse-metals.toml", (160, 50), ()),
    ("acid-rinse-caustic.toml", (100, 30), ("f4",)),
    ("food-acetate-stream.toml", (80, 24), ("f5",)),
    ("cip-sulfuric.toml", (160, 50), ("f6",)),
])
def test_tankside_layout(snap_compare, monkeypatch, scenario, size, keys):
    monkeypatch.chdir(ROOT)          # the title shows the path as given
    app = make_app(os.path.join("scenarios", scenario), show_timing=False)
    assert snap_compare(app, terminal_size=size, press=keys, run_before=_settled)
