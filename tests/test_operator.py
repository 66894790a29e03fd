"""What an operator sees first (issue 18): the dose before the chemistry,
every amount of a flow with its time base, a permit breach at the top and in
every record, a store too small for one batch. Subprocess tests of the CLI."""

from __future__ import annotations

import json
import re
from pathlib import Path

from tests.helpers import run_cli

ROOT = Path(__file__).resolve().parents[1]
CIP = ROOT / "scenarios" / "cip-sulfuric.toml"
FLOW = ROOT / "scenarios" / "food-acetate-stream.toml"


def _variant(tmp_path, base: Path, old: str, new: str) -> str:
    text = base.read_text()
    assert old in text
    f = tmp_path / base.name
    f.write_text(text.replace(old, new))
    return str(f)


def test_the_dose_is_the_first_thing_on_the_sheet():
    lines = run_cli("plan", str(CIP)).stdout.splitlines()
    assert lines[3].startswith("DOSE ") and "kg" in lines[3]
    first_dose = next(i for i, ln in enumerate(lines) if ln.startswith("  product per"))
    water = next(i for i, ln in enumerate(lines) if ln.startswith("water "))
    assert first_dose < water


def test_every_flow_amount_carries_its_time_base():
    text = run_cli("plan", str(FLOW)).stdout
    dose_block = text.split("WATER AND MODEL")[0]
    # Every kg or L figure in the dose block is per hour or per day.
    for m in re.finditer(r"\d[\d,.]* (kg|L)\b(?!/)", dose_block):
        tail = dose_block[m.end():m.end() + 6]
        assert tail.startswith("/"), f"{m.group(0)!r} has no time base"
    band = next(ln for ln in text.splitlines() if "window band" in ln)
    assert re.search(r"kg/h = [\d.]+ L/h to", band)


def test_a_permit_breach_is_at_the_top_in_warnings_and_in_the_log(tmp_path):
    scen = _variant(tmp_path, CIP, "sulfate_mg_l = 1500", "sulfate_mg_l = 100")
    lines = run_cli("plan", scen).stdout.splitlines()
    assert any(ln.startswith("!! PERMIT BREACH") for ln in lines[:8])
    d = json.loads(run_cli("plan", scen, "--json").stdout)
    assert d["warnings"][0].startswith("PERMIT BREACH")
    db = str(tmp_path / "log.sqlite")
    shown = run_cli("log", "add", scen, "--operator", "A", "--db", db).stdout
    assert "PERMIT BREACH" in shown
    assert "PERMIT BREACH" in run_cli("log", "show", "1", "--db", db).stdout


def test_storage_for_less_than_one_batch_is_flagged(tmp_path):
    scen = _variant(tmp_path, CIP, "storage_m3 = 0.5", "storage_m3 = 0.005")
    text = run_cli("plan", scen).stdout
    assert "LESS THAN ONE BATCH" in text
