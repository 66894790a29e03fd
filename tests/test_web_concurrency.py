"""Nothing lost when many record at once (issue 27): 8 signed-in clients of a
real server record decisions and follow-ups at the same moment, while the
command line writes to the same log file from another process."""

from __future__ import annotations

import re
import subprocess
import sys
import threading
from pathlib import Path

import pytest

from tests.web_helpers import BOXES, PASSWORDS, make_site, token
from tests.web_server import serving

httpx2 = pytest.importorskip("httpx2")
ROOT = Path(__file__).resolve().parents[1]
CLIENTS, EACH = 8, 4


def _client(base: str, name: str):
    c = httpx2.Client(base_url=base, follow_redirects=False, timeout=120)
    page = c.get("/signin")
    r = c.post("/signin", data={"name": name, "password": PASSWORDS[name],
                                "csrf": token(page.text), "next": "/tanks"})
    assert r.status_code == 303
    return c


def _work(base: str, i: int, barrier: threading.Barrier, made: list, errors: list) -> None:
    try:
        c = _client(base, "ana" if i % 2 else "eng")
        page = c.get("/plan/acid-rinse-caustic", params={**BOXES, "go": "1"})
        csrf = token(page.text)
        barrier.wait()
        for k in range(EACH):
            r = c.post("/plan/acid-rinse-caustic/record",
                       data={**BOXES, "csrf": csrf, "dosed": "10", "note": f"client {i} #{k}"})
            assert r.status_code == 303, r.text
            entry = int(re.search(r"/log/(\d+)", r.headers["location"]).group(1))
            r = c.post(f"/log/{entry}/follow-up", data={"csrf": csrf, "ph_after": "7.1",
                                                         "note": f"client {i} #{k}"})
            assert r.status_code == 303, r.text
            made.append(entry)
    except BaseException as err:          # reported by the test, not lost in a thread
        errors.append(err)


@pytest.mark.slow
def test_eight_clients_and_the_command_line_at_once_lose_nothing(tmp_path):
    site = make_site(tmp_path)
    made, errors = [], []
    barrier = threading.Barrier(CLIENTS)
    with serving(site) as base:
        threads = [threading.Thread(target=_work, args=(base, i, barrier, made, errors))
                   for i in range(CLIENTS)]
        for t in threads:
            t.start()
        cli = subprocess.run(
            [sys.executable, "-m", "dosing.cli", "log", "add",
             str(site.folder / "acid-rinse-caustic.toml"), "--operator", "cli",
             "--db", str(site._log.path)], capture_output=True, text=True, cwd=ROOT,
            timeout=300)
        for t in threads:
            t.join(300)
    assert not errors, errors[0]
    assert cli.returncode == 0, cli.stderr
    with site.log() as log:
        entries = list(log.entries())
        audit = [row[3] for row in log.audit_rows(1000)]
    site.close()
    decisions = [e for e in entries if e.kind == "decision"]
    follow_ups = [e for e in entries if e.kind == "follow_up"]
    assert len(made) == CLIENTS * EACH and len(set(made)) == CLIENTS * EACH
    assert len(decisions) == CLIENTS * EACH + 1            # one from the command line
    assert len(follow_ups) == CLIENTS * EACH
    assert {f.refers_to for f in follow_ups} == set(made)
    notes = {e.note for e in decisions}
    assert all(f"client {i} #{k}" in notes for i in range(CLIENTS) for k in range(EACH))
    assert audit.count("record") == CLIENTS * EACH and audit.count("follow_up") == CLIENTS * EACH
