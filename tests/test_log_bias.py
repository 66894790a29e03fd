"""Learning from the shift log (issue 13, part 4): the model's bias on a tank,
estimated from a synthetic log with a known bias, shown and offered, never
applied."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from dosing.report.words import bias_words
from dosing.io.shiftlog import ShiftLog
from tests.helpers import run_cli

ROOT = Path(__file__).resolve().parents[1]


def _plan(tank, planned=10.0):
    return {"title": "t", "site": "s", "tank": tank, "reagent": "caustic-50",
            "ph_start": 3.0, "ph_end": 7.5, "dose": {"kg_product": planned},
            "target": {"ph_min": 6.5, "ph_max": 9.0, "ph_aim": 7.5},
            "warnings": [], "cautions": ["final word"]}


def _log(path, tank="sump S-3", ratio=1.12, n=20, seed=3):
    rng = np.random.default_rng(seed)
    given = ratio + 0.04 * rng.standard_normal(n)
    with ShiftLog(path) as log:
        for g in given:
            log.record_decision(operator="x", scenario_toml="", plan=_plan(tank),
                                dosed_kg=float(10.0 * g), ph_after=7.4)
        # Decisions that cannot say what the tank needed are left out: no
        # product recorded, a pH after outside the window, one corrected later.
        log.record_decision(operator="x", scenario_toml="", plan=_plan(tank), ph_after=7.6)
        log.record_decision(operator="x", scenario_toml="", plan=_plan(tank), dosed_kg=30.0,
                            ph_after=11.0)
        wrong = log.record_decision(operator="x", scenario_toml="", plan=_plan(tank),
                                    dosed_kg=99.0, ph_after=7.5)
        log.record_decision(operator="y", scenario_toml="", plan=_plan(tank), dosed_kg=11.2,
                            ph_after=7.5, corrects=wrong)
    return given


def test_bias_of_a_synthetic_log_is_found(tmp_path):
    db = tmp_path / "log.sqlite"
    given = list(_log(db)) + [1.12]             # the correction counts, the corrected not
    with ShiftLog(db, writable=False) as log:
        b = log.bias("sump S-3")
    last = given[-24:]
    assert b.entries == len(last)
    assert b.mean_ratio == pytest.approx(np.mean(last), rel=1e-9)
    assert b.sd_ratio == pytest.approx(np.std(last, ddof=1), rel=1e-9)
    # The known bias, 1.12, within the estimate's standard error (twice over).
    assert abs(b.mean_ratio - 1.12) < 2 * b.sd_ratio / np.sqrt(b.entries)
    assert b.due and f"{b.mean_ratio - 1:.0%}" in bias_words(b) and "more" in bias_words(b)


def test_too_few_entries_give_no_estimate(tmp_path):
    db = tmp_path / "log.sqlite"
    _log(db, n=3)
    with ShiftLog(db, writable=False) as log:
        # 3 + the correction = 4 usable decisions: below the minimum of 5.
        assert log.bias("sump S-3") is None


def test_plan_shows_and_offers_the_bias_but_never_applies_it(tmp_path):
    db = tmp_path / "log.sqlite"
    _log(db)
    scen = str(ROOT / "scenarios" / "hard-wash-lime.toml")
    plain = json.loads(run_cli("plan", scen, "--json").stdout)
    r = run_cli("plan", scen, "--json", "--db", str(db))
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    assert d["dose"]["kg_product"] == plain["dose"]["kg_product"]       # not applied
    lb = d["log_bias"]
    assert lb["applied"] is False and lb["bench_titration_due"]
    assert lb["offered_dose"]["kg_product"] == pytest.approx(
        plain["dose"]["kg_product"] * lb["mean_ratio"], rel=1e-9)
    text = run_cli("plan", scen, "--db", str(db)).stdout
    assert "SHIFT LOG" in text and "Offered, not applied" in text
    listing = run_cli("log", "list", "--db", str(db)).stdout
    assert "bench titration is due" in listing


def test_a_log_without_the_tank_is_one_line(tmp_path):
    db = tmp_path / "log.sqlite"
    _log(db, tank="another tank")
    r = run_cli("plan", str(ROOT / "scenarios" / "hard-wash-lime.toml"), "--db", str(db))
    assert r.returncode == 2 and "no entries for tank 'sump S-3'" in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1
