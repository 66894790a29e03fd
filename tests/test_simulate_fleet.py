"""Issue 26 item 5: a fleet of records simulated on Dask (two small local
workers), each site's result the one it has simulated alone."""

import json
from pathlib import Path

import pytest

from tests.helpers import run_cli

ROOT = Path(__file__).resolve().parents[1]
pytest.importorskip("distributed")

SITES = {"brine-drain": ("food-acetate-stream.toml", 6.5, 3.6),
         "dye-flume": ("flow-metering-pump.toml", 22.0, 10.4)}


def _record(path: Path, flow: float, ph: float) -> None:
    rows = ["timestamp,flow_m3_h,ph"]
    for i in range(150):                       # two and a half hours, steps in both
        f = flow * (1.3 if 40 <= i < 90 else 1.0)
        p = ph + (0.25 if i >= 100 else 0.0)
        rows.append(f"2026-04-02T{i // 60:02d}:{i % 60:02d}:00,{f:.3f},{p:.2f}")
    path.write_text("\n".join(rows) + "\n")


@pytest.fixture(scope="module")
def fleet(tmp_path_factory):
    d = tmp_path_factory.mktemp("simfleet")
    tables = []
    for name, (scenario, flow, ph) in SITES.items():
        _record(d / f"{name}.csv", flow, ph)
        tables.append(f'[sites.{name}]\nscenario = "{ROOT / "scenarios" / scenario}"\n'
                      f'data = ["{name}.csv"]\n')
    (d / "fleet.toml").write_text("\n".join(tables))
    return d


def test_each_site_is_simulated_as_alone(fleet):
    opts = ["--stages", "1,2", "--tunings", "tight", "--json"]
    r = run_cli("simulate", "--fleet", str(fleet / "fleet.toml"), "--workers", "2", *opts)
    assert r.returncode == 0, r.stderr
    sites = json.loads(r.stdout)["sites"]
    assert sorted(sites) == sorted(SITES)
    for name, (scenario, _, _) in SITES.items():
        alone = run_cli("simulate", str(ROOT / "scenarios" / scenario), "--data",
                        str(fleet / f"{name}.csv"), *opts)
        assert alone.returncode == 0, alone.stderr
        mine = json.loads(alone.stdout)
        for a, b in zip(sites[name]["designs"], mine["designs"]):
            assert a["name"] == b["name"]
            assert a["reagent_mol"] == pytest.approx(b["reagent_mol"], rel=1e-12)
            assert a["outside_fraction"] == pytest.approx(b["outside_fraction"], abs=1e-12)


def test_the_fleet_text_has_a_table_per_site_and_the_cautions(fleet):
    r = run_cli("simulate", "--fleet", str(fleet / "fleet.toml"), "--workers", "2",
                "--stages", "1", "--tunings", "tight")
    assert r.returncode == 0, r.stderr
    for words in ("SITE brine-drain", "SITE dye-flume", "dosed exactly (replay)",
                  "WHAT THE SIMULATION ASSUMES", "licensed engineer"):
        assert words in r.stdout


def test_a_fleet_with_a_scenario_or_a_bad_site_is_one_line(fleet, tmp_path):
    r = run_cli("simulate", "scenarios/food-acetate-stream.toml", "--fleet",
                str(fleet / "fleet.toml"))
    assert r.returncode == 2 and "--fleet" in r.stderr
    bad = tmp_path / "fleet.toml"
    bad.write_text(f'[sites.tank]\nscenario = "{ROOT / "scenarios" / "lime-acid-batch.toml"}"\n'
                   f'data = ["{fleet / "brine-drain.csv"}"]\n')
    r = run_cli("simulate", "--fleet", str(bad))
    assert r.returncode == 2 and len(r.stderr.strip().splitlines()) == 1
