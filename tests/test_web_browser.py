"""dosing serve in a real browser (issue 27): Playwright driving the
distribution's Chromium, headless, against a real server.

Every page is photographed at a phone's width (390 px) and a control-room
screen's (1366 px) into ``tests/output/screens/`` to be looked at.
Chromium is ``/usr/bin/chromium`` (``.ci/run`` installs it) or
``$DOSING_CHROMIUM``; without it these tests fail, unless
``DOSING_NO_BROWSER=1`` says this machine has no browser on purpose.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest

from tests.web_helpers import PASSWORDS, make_site
from tests.web_server import serving

SHOTS = Path(__file__).resolve().parent / "output" / "screens"
WIDTHS = {"phone": (390, 844), "desktop": (1366, 900)}
FLAGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def _chromium() -> str:
    path = os.environ.get("DOSING_CHROMIUM") or shutil.which("chromium") or "/usr/bin/chromium"
    if not Path(path).exists():
        if os.environ.get("DOSING_NO_BROWSER") == "1":
            pytest.skip("DOSING_NO_BROWSER=1: no browser on this machine")
        pytest.fail(f"no Chromium at {path}: install the distribution's chromium package "
                    "(.ci/run does), set DOSING_CHROMIUM, or DOSING_NO_BROWSER=1")
    return path


@pytest.fixture(scope="module")
def browser():
    sync_api = pytest.importorskip("playwright.sync_api")
    with sync_api.sync_playwright() as p:
        b = p.chromium.launch(executable_path=_chromium(), args=FLAGS, headless=True)
        yield b
        b.close()


@pytest.fixture()
def base(tmp_path):
    site = make_site(tmp_path)
    with serving(site) as url:
        yield url
    site.close()


def _page(browser, width: str):
    w, h = WIDTHS[width]
    return browser.new_page(viewport={"width": w, "height": h})


def _shot(page, name: str, width: str) -> None:
    SHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SHOTS / f"{name}-{width}.png"), full_page=True)


def _one_printed_page(page) -> None:
    """The print view, printed by the browser itself on A4 and on Letter, is one page."""
    import io
    pypdf = pytest.importorskip("pypdf")
    for paper in ("A4", "Letter"):
        pdf = page.pdf(format=paper, print_background=False)
        assert len(pypdf.PdfReader(io.BytesIO(pdf)).pages) == 1, paper


def _sign_in(page, base: str, name: str, password: str | None = None) -> None:
    page.goto(f"{base}/signin")
    page.fill("input[name=name]", name)
    page.fill("input[name=password]", password or PASSWORDS[name])
    page.click("form.narrow button[type=submit]")


@pytest.mark.slow
@pytest.mark.parametrize("width", list(WIDTHS))
def test_an_operator_plans_records_follows_up_prints_and_signs_out(browser, base, width):
    page = _page(browser, width)
    page.goto(f"{base}/tanks")
    assert "/signin" in page.url                                   # nothing without signing in
    _shot(page, "signin", width)
    _sign_in(page, base, "ana")
    page.wait_for_url("**/tanks")
    _shot(page, "tanks-empty", width)
    page.click("text=Plan a tank")
    _shot(page, "scenarios", width)
    page.click("text=Rinse tank T-3, pickling line")
    page.fill("input[name=ph]", "2.6")
    page.click("form.measure button[type=submit]")
    headline = page.inner_text(".headline")
    assert headline.startswith("DOSE ") and "pH 2.60 to 7.00" in headline
    assert "final word" in page.inner_text(".final")
    _shot(page, "plan-sheet", width)
    page.fill("form.record input[name=dosed]", "10.5")
    page.fill("form.record input[name=note]", "<b>first batch</b>")
    page.click("form.record button[type=submit]")
    page.wait_for_url("**/log/1")
    assert "<b>first batch</b>" in page.inner_text("pre.text")     # shown as text
    page.fill("input[name=ph_after]", "7.3")
    page.click("text=Record follow-up as ana")
    page.wait_for_url("**/log/1")
    assert "pH 7.3" in page.inner_text("pre.text")
    _shot(page, "entry", width)
    page.goto(f"{base}/log")
    _shot(page, "log", width)
    page.goto(f"{base}/tanks")
    _shot(page, "tanks", width)
    page.goto(f"{base}/plan/acid-rinse-caustic?go=1&ph=2.6&amount=40&alkalinity=0"
              "&temperature_c=18&solutes=sulfate%3D420")
    page.click("text=Print view")
    assert "Dosed by" in page.inner_text("body") and "final word" in page.inner_text("body")
    _shot(page, "print", width)
    _one_printed_page(page)
    page.goto(f"{base}/tanks")
    page.click("text=Sign out")
    page.wait_for_url("**/signin")
    page.goto(f"{base}/log")
    assert "/signin" in page.url
    page.close()


@pytest.mark.slow
def test_wrong_password_then_a_locked_account(browser, base):
    page = _page(browser, "phone")
    _sign_in(page, base, "ana", "not it at all")
    assert "wrong name or password" in page.inner_text("[role=alert]")
    _shot(page, "signin-wrong", "phone")
    for _ in range(4):
        _sign_in(page, base, "ana", "not it at all")
    _sign_in(page, base, "ana")                                     # right, but locked
    assert "too many failed sign-ins" in page.inner_text("[role=alert]")
    assert "/signin" in page.url
    page.close()


@pytest.mark.slow
@pytest.mark.parametrize("width", list(WIDTHS))
def test_an_operator_cannot_open_engineer_pages_and_an_engineer_can(browser, base, width):
    page = _page(browser, width)
    _sign_in(page, base, "ana")
    page.wait_for_url("**/tanks")
    assert page.locator("nav >> text=Audit").count() == 0
    response = page.goto(f"{base}/audit")
    assert response.status == 403 and "Not for your role" in page.inner_text("h1")
    _shot(page, "refused", width)
    page.goto(f"{base}/tanks")
    page.click("text=Sign out")
    _sign_in(page, base, "eng")
    page.wait_for_url("**/tanks")
    page.goto(f"{base}/audit")
    assert "signin" in page.inner_text("table")
    _shot(page, "audit", width)
    page.goto(f"{base}/scenarios/plating-rinse-window69/edit")
    _shot(page, "edit", width)
    page.goto(f"{base}/plan/plating-rinse-window69")
    page.click("form.measure button[type=submit]")
    assert "Treatment train (proposed by the planner)" in page.inner_text("section.sheet")
    assert "DISCHARGE at pH 7.50" in page.inner_text("section.sheet")
    _shot(page, "plan-train", width)
    page.goto(f"{base}/plan/flow-metering-pump")
    page.click("form.measure button[type=submit]")
    assert "metering pump" in page.inner_text("section.sheet")
    _shot(page, "plan-flow", width)
    page.close()
