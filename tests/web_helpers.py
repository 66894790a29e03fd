"""A site for the web tests: three demo scenarios in a folder, a shift log
with one account of each role, and signed-in clients."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

from starlette.testclient import TestClient

from dosing.io.site_log import SiteLog
from dosing.web import Site, create_app

ROOT = Path(__file__).resolve().parents[1]
DEMOS = ("acid-rinse-caustic", "flow-metering-pump", "plating-rinse-window69")
PASSWORDS = {"eng": "engineer pass 1", "ana": "operator pass 1", "vic": "viewer pass 1"}
ROLES = {"eng": "engineer", "ana": "operator", "vic": "viewer"}


def make_site(tmp_path: Path, *, secure: bool = False) -> Site:
    folder = tmp_path / "scenarios"
    folder.mkdir()
    for name in DEMOS:
        shutil.copy(ROOT / "scenarios" / f"{name}.toml", folder)
    log_path = tmp_path / "log.sqlite"
    with SiteLog(log_path) as log:
        for name, role in ROLES.items():
            log.add_account(name, role, PASSWORDS[name])
    return Site(folder, log_path, secure=secure, name="Test works")


def token(html: str) -> str:
    """The CSRF token of the first form on a page."""
    return re.search(r'name="csrf" value="([^"]+)"', html).group(1)


def sign_in(client: TestClient, name: str, password: str | None = None):
    """Sign ``client`` in as ``name``; returns the sign-in response."""
    page = client.get("/signin")
    return client.post("/signin", data={"name": name, "password": password or PASSWORDS[name],
                                        "csrf": token(page.text), "next": "/tanks"},
                       follow_redirects=False)


def client_as(site: Site, name: str | None) -> TestClient:
    c = TestClient(create_app(site), follow_redirects=False)
    if name:
        r = sign_in(c, name)
        assert r.status_code == 303, r.text
    return c


#: Today's measurements for the acid rinse demo, as the form sends them.
BOXES = {"ph": "2.6", "temperature_c": "18", "alkalinity": "0", "acidity": "",
         "amount": "40", "metals": "", "solutes": "sulfate=420"}
