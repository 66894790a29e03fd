"""dosing serve at the HTTP level (issue 27): every page, every role, every refusal.

Driven with Starlette's test client. The security rules checked are common
practice for a small web application (OWASP cheat sheets on sessions, CSRF,
CSV injection and authentication): HttpOnly and SameSite=Strict cookies, a
token on every form, attempts limited per account and per address, no
redirect off the site, escaped output, rights checked on the request.
"""

from __future__ import annotations

import csv
import io
import sqlite3
from datetime import datetime, timedelta, timezone

import pytest

from dosing.io.scenario import parse_scenario
from dosing.io.site_log import ACCOUNT_FAILURES, ADDRESS_FAILURES, SiteLog
from dosing.planning.job import make_plan
from dosing.planning.reagents import GENERAL_CAUTION
from dosing.report.sheet import headline
from dosing.report.view import plan_view
from tests.web_helpers import BOXES, PASSWORDS, client_as, make_site, sign_in, token

GETS = ["/tanks", "/plan", "/plan/acid-rinse-caustic", "/plan/acid-rinse-caustic/print",
        "/plan/acid-rinse-caustic/sheet.pdf", "/log", "/log.csv", "/log/1", "/audit",
        "/scenarios/acid-rinse-caustic/edit"]
POSTS = ["/plan/acid-rinse-caustic/record", "/log/1/follow-up", "/log/1/review",
         "/scenarios/acid-rinse-caustic/edit", "/signout"]


@pytest.fixture()
def site(tmp_path):
    s = make_site(tmp_path)
    yield s
    s.close()


def _entries(site) -> int:
    with site.log() as log:
        return log.count()


def _record(c, **extra):
    page = c.get("/plan/acid-rinse-caustic", params={**BOXES, "go": "1"})
    assert page.status_code == 200, page.text
    return c.post("/plan/acid-rinse-caustic/record",
                  data={**BOXES, "csrf": token(page.text), **extra})


# ------------------------------------------------------------ signed out --
@pytest.mark.parametrize("path", GETS)
def test_nothing_is_readable_without_signing_in(site, path):
    r = client_as(site, None).get(path)
    assert r.status_code == 303 and r.headers["location"].startswith("/signin?next=")


@pytest.mark.parametrize("path", POSTS)
def test_nothing_is_written_without_signing_in(site, path):
    r = client_as(site, None).post(path, data={"csrf": "x", "ph_after": "7"})
    assert r.status_code == 403 and _entries(site) == 0


def test_sign_in_cookie_is_httponly_strict_and_secure_under_tls(tmp_path):
    s = make_site(tmp_path, secure=True)
    r = sign_in(client_as(s, None), "ana")
    cookie = r.headers["set-cookie"].lower()
    assert "httponly" in cookie and "samesite=strict" in cookie and "secure" in cookie
    s.close()


def test_a_wrong_password_is_refused_and_audited(site):
    c = client_as(site, None)
    r = sign_in(c, "ana", "not the password")
    assert r.status_code == 401 and "wrong name or password" in r.text
    r = sign_in(c, "nobody", "not the password")       # same words for an unknown name
    assert r.status_code == 401 and "wrong name or password" in r.text
    with site.log() as log:
        actions = [row[3] for row in log.audit_rows()]
    assert actions.count("signin_failed") == 2


def test_an_account_locks_after_failed_attempts_until_its_password_is_set(site):
    c = client_as(site, None)
    for _ in range(ACCOUNT_FAILURES):
        assert sign_in(c, "ana", "guess guess").status_code == 401
    r = sign_in(c, "ana")                                # the right password, too late
    assert r.status_code == 401 and "too many failed sign-ins" in r.text
    with site.log() as log:
        log.set_password("ana", PASSWORDS["ana"])
    assert sign_in(c, "ana").status_code == 303


def test_one_address_is_limited_across_accounts(site):
    c = client_as(site, None)
    for i in range(ADDRESS_FAILURES):
        sign_in(c, f"guess{i}", "guess guess")
    r = sign_in(c, "eng")
    assert r.status_code == 401 and "too many failed sign-ins" in r.text


def test_sign_in_without_its_form_token_is_refused(site):
    c = client_as(site, None)
    r = c.post("/signin", data={"name": "ana", "password": PASSWORDS["ana"], "csrf": "x"})
    assert r.status_code == 403 and "set-cookie" not in {k.lower() for k in r.headers
                                                         if "dosing_session" in r.headers[k]}


@pytest.mark.parametrize("target, expected", [("//evil.example/x", "/"),
                                              ("https://evil.example/", "/"),
                                              ("/log?tank=T-3", "/log?tank=T-3")])
def test_after_sign_in_only_this_sites_pages_are_followed(site, target, expected):
    c = client_as(site, None)
    page = c.get("/signin")
    r = c.post("/signin", data={"name": "ana", "password": PASSWORDS["ana"],
                                "csrf": token(page.text), "next": target})
    assert r.headers["location"] == expected


def test_sign_out_ends_the_session(site):
    c = client_as(site, "ana")
    page = c.get("/tanks")
    assert c.post("/signout", data={"csrf": token(page.text)}).status_code == 303
    assert c.get("/tanks").status_code == 303


def test_a_session_expires(site):
    c = client_as(site, "ana")
    old = (datetime.now(timezone.utc) - timedelta(hours=3)).isoformat()
    with sqlite3.connect(site._log.path) as db:
        db.execute("UPDATE sessions SET seen = ?", (old,))
    assert c.get("/tanks").status_code == 303


# ---------------------------------------------------------------- roles --
@pytest.mark.parametrize("who, path, allowed", [
    ("vic", "/tanks", True), ("vic", "/log", True), ("vic", "/plan", False),
    ("vic", "/plan/acid-rinse-caustic", False), ("vic", "/audit", False),
    ("ana", "/plan", True), ("ana", "/audit", False),
    ("ana", "/scenarios/acid-rinse-caustic/edit", False),
    ("eng", "/audit", True), ("eng", "/scenarios/acid-rinse-caustic/edit", True)])
def test_each_role_reaches_only_its_pages(site, who, path, allowed):
    r = client_as(site, who).get(path)
    assert r.status_code == (200 if allowed else 403), (who, path, r.status_code)


def test_a_viewer_cannot_record_and_an_operator_cannot_review_or_edit(site):
    vic = client_as(site, "vic")
    csrf = token(vic.get("/tanks").text)
    r = vic.post("/plan/acid-rinse-caustic/record", data={**BOXES, "csrf": csrf})
    assert r.status_code == 403 and _entries(site) == 0
    ana = client_as(site, "ana")
    assert _record(ana).status_code == 303
    csrf = token(ana.get("/tanks").text)
    assert ana.post("/log/1/review", data={"csrf": csrf}).status_code == 403
    before = (site.folder / "acid-rinse-caustic.toml").read_text()
    r = ana.post("/scenarios/acid-rinse-caustic/edit", data={"csrf": csrf, "text": "x = 1"})
    assert r.status_code == 403
    assert (site.folder / "acid-rinse-caustic.toml").read_text() == before
    with site.log() as log:
        assert log.reviews(1) == []


def test_only_an_engineer_sees_the_model_bias(site):
    ana = client_as(site, "ana")
    _record(ana, dosed="11")
    assert "model bias" not in ana.get("/tanks").text
    assert "model bias" in client_as(site, "eng").get("/tanks").text


# ------------------------------------------------------------- planning --
def test_the_page_plans_what_the_command_line_plans(site):
    c = client_as(site, "ana")
    r = c.get("/plan/acid-rinse-caustic", params={**BOXES, "go": "1"})
    assert r.status_code == 200
    text = (site.folder / "acid-rinse-caustic.toml").read_text().replace("ph = 2.4", "ph = 2.6")
    scenario = parse_scenario(text)
    expected = headline(plan_view(scenario, make_plan(scenario)))
    assert expected.replace("%", "%") in r.text.replace("&#34;", '"')
    assert GENERAL_CAUTION in r.text
    assert 'src="data:image/png;base64,' in r.text


@pytest.mark.parametrize("box, value, field", [("ph", "abc", "effluent.ph"),
                                               ("ph", "15", "effluent.ph"),
                                               ("amount", "-3", "batch.volume_m3"),
                                               ("metals", "zinc", "effluent.metals_mg_l")])
def test_bad_measurements_get_one_line_naming_the_field(site, box, value, field):
    r = client_as(site, "ana").get("/plan/acid-rinse-caustic",
                                   params={**BOXES, box: value, "go": "1"})
    assert r.status_code == 422
    assert f"{field}" in r.text and "Traceback" not in r.text


@pytest.mark.parametrize("name", ["..%2F..%2Fetc%2Fpasswd", "%2Fetc%2Fpasswd", "nope",
                                  "%2E%2E", "acid-rinse-caustic.toml"])
def test_a_scenario_name_cannot_reach_outside_the_folder(site, name):
    r = client_as(site, "eng").get(f"/plan/{name}")
    assert r.status_code == 404


def test_a_link_in_the_folder_to_a_file_outside_is_not_offered(site, tmp_path):
    outside = tmp_path / "secret.toml"
    outside.write_text((site.folder / "acid-rinse-caustic.toml").read_text())
    (site.folder / "linked.toml").symlink_to(outside)
    c = client_as(site, "eng")
    assert "linked" not in c.get("/plan").text
    assert c.get("/plan/linked").status_code == 404


def test_print_view_and_pdf_carry_the_cautions(site):
    c = client_as(site, "ana")
    params = {**BOXES, "go": "1"}
    page = c.get("/plan/acid-rinse-caustic/print", params=params)
    assert page.status_code == 200 and GENERAL_CAUTION in page.text
    assert "Dosed by" in page.text and "pH read" in page.text
    pdf = c.get("/plan/acid-rinse-caustic/sheet.pdf", params={**params, "paper": "letter"})
    assert pdf.status_code == 200 and pdf.content.startswith(b"%PDF")
    assert pdf.headers["content-type"] == "application/pdf"


# ------------------------------------------------------------- the log --
def test_a_record_is_the_servers_plan_by_the_signed_in_operator(site):
    c = client_as(site, "ana")
    r = _record(c, dosed="10.5", ph_after="7.2", note="<script>alert(1)</script>",
                operator="someone else")
    assert r.status_code == 303 and r.headers["location"] == "/log/1"
    with site.log() as log:
        e = log.get(1)
    assert e.operator == "ana" and e.dosed_kg == 10.5 and e.ph_after == 7.2
    assert e.ph_start == pytest.approx(2.6) and "ph = 2.6" in e.scenario_toml
    page = c.get("/log/1").text
    assert "<script>alert(1)</script>" not in page and "&lt;script&gt;" in page


def test_follow_up_and_review_are_recorded_and_shown(site):
    ana, eng = client_as(site, "ana"), client_as(site, "eng")
    _record(ana, dosed="10")
    r = ana.post("/log/1/follow-up", data={"csrf": token(ana.get("/log/1").text),
                                           "ph_after": "7,4", "note": "after 30 min"})
    assert r.status_code == 303
    r = eng.post("/log/1/review", data={"csrf": token(eng.get("/log/1").text),
                                        "note": "dose fine"})
    assert r.status_code == 303
    page = eng.get("/log/1").text
    assert "pH 7.4" in page and "dose fine" in page and "by eng" in page
    bad = ana.post("/log/1/follow-up", data={"csrf": token(ana.get("/log/1").text),
                                             "ph_after": "15"})
    assert bad.status_code == 422 and "ph_after" in bad.text


def test_a_form_with_a_missing_or_wrong_token_records_nothing(site):
    c = client_as(site, "ana")
    for csrf in (None, "forged"):
        data = dict(BOXES, **({"csrf": csrf} if csrf else {}))
        assert c.post("/plan/acid-rinse-caustic/record", data=data).status_code == 403
    assert _entries(site) == 0


def test_the_list_filters_by_tank_date_and_operator(site):
    _record(client_as(site, "ana"))
    _record(client_as(site, "eng"))
    c = client_as(site, "vic")
    assert c.get("/log", params={"operator": "ana"}).text.count('href="/log/') == 1
    assert c.get("/log", params={"tank": "T-3"}).text.count('href="/log/') == 2
    assert c.get("/log", params={"since": "2999-01-01"}).text.count('href="/log/') == 0
    bad = c.get("/log", params={"since": "yesterday"})
    assert bad.status_code == 422 and "since" in bad.text


def test_the_csv_export_neutralises_cells_a_spreadsheet_would_run(site):
    _record(client_as(site, "ana"), note="=HYPERLINK(\"http://x\",\"y\")")
    r = client_as(site, "vic").get("/log.csv")
    assert r.status_code == 200 and "attachment" in r.headers["content-disposition"]
    rows = list(csv.DictReader(io.StringIO(r.text)))
    assert rows[0]["note"].startswith("'=") and rows[0]["operator"] == "ana"


def test_an_engineer_edit_is_checked_before_saving_and_the_old_text_kept(site):
    c = client_as(site, "eng")
    path = site.folder / "acid-rinse-caustic.toml"
    before = path.read_text()
    csrf = token(c.get("/scenarios/acid-rinse-caustic/edit").text)
    r = c.post("/scenarios/acid-rinse-caustic/edit", data={"csrf": csrf,
                                                           "text": "[effluent]\nph = 99\n"})
    assert r.status_code == 422 and "Not saved" in r.text and path.read_text() == before
    r = c.post("/scenarios/acid-rinse-caustic/edit",
               data={"csrf": csrf, "text": before.replace("volume_m3 = 40", "volume_m3 = 35")})
    assert r.status_code == 200 and "volume_m3 = 35" in path.read_text()
    with site.log() as log:
        saved = [d for *_, a, d in log.audit_rows() if a == "scenario_saved"]
    assert saved and before in saved[0]


def test_pages_carry_security_headers(site):
    r = client_as(site, "ana").get("/tanks")
    assert "default-src 'none'" in r.headers["content-security-policy"]
    assert r.headers["x-frame-options"] == "DENY" and r.headers["cache-control"] == "no-store"


def test_audit_table_refuses_changes(site):
    client_as(site, "ana")
    with pytest.raises(sqlite3.DatabaseError, match="append-only"):
        with sqlite3.connect(site._log.path) as db:
            db.execute("DELETE FROM audit")
    with SiteLog(site._log.path, writable=False) as log:
        assert any(a == "signin" for *_, a, _d in log.audit_rows())


def test_a_correction_replans_the_recorded_water_and_points_to_the_entry(site):
    c = client_as(site, "ana")
    _record(c, dosed="10")
    r = c.post("/log/1/correct", data={"csrf": token(c.get("/log/1").text), "dosed": "9.5",
                                       "note": "the drum scale read high"})
    assert r.status_code == 303 and r.headers["location"] == "/log/2"
    with site.log() as log:
        first, second = log.get(1), log.get(2)
    assert second.kind == "correction" and second.refers_to == 1 and second.dosed_kg == 9.5
    assert second.planned_kg == pytest.approx(first.planned_kg, rel=1e-9)
    assert "CORRECTED by entry 2" in c.get("/log/1").text
    vic = client_as(site, "vic")
    r = vic.post("/log/1/correct", data={"csrf": token(vic.get("/log/1").text), "dosed": "1"})
    assert r.status_code == 403 and _entries(site) == 2


# ----------------------------------------------------------------- fuzz --
from hypothesis import given, strategies as st  # noqa: E402

from tests.test_robustness import _FUZZ  # noqa: E402

_TEXT = st.one_of(st.text(max_size=30), st.sampled_from(
    ["", "7", "-1", "1e308", "nan", "inf", "2,8", "1,234", "zinc=1e9", "=cmd", "x=1;y",
     "\x00", "<script>", "9" * 400]))


@pytest.fixture(scope="module")
def fuzz_client(tmp_path_factory):
    s = make_site(tmp_path_factory.mktemp("fuzz"))
    yield client_as(s, "ana")
    s.close()


@pytest.mark.fuzz
@_FUZZ
@given(boxes=st.fixed_dictionaries({k: _TEXT for k in BOXES}))
def test_any_typed_measurements_give_a_sheet_or_one_clear_refusal(fuzz_client, boxes):
    r = fuzz_client.get("/plan/acid-rinse-caustic", params={**boxes, "go": "1"})
    assert r.status_code in (200, 422), r.status_code
    assert "Traceback" not in r.text and "NaN" not in r.text and "Infinity" not in r.text
    if r.status_code == 422:
        assert r.text.count('class="error"') == 1
