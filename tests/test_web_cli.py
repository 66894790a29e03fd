"""`dosing accounts` and `dosing serve` on the command line (issue 27):
passwords asked twice and never taken as options, one clear line for every
refusal, a plain warning when serving another address without TLS."""

from __future__ import annotations

import io
import sys

import pytest

from dosing.io.site_log import SiteLog
from tests.test_robustness import _one_line, run


def _accounts(monkeypatch, stdin: str, *argv: str):
    monkeypatch.setattr(sys, "stdin", io.StringIO(stdin))
    return run("accounts", *argv)


def test_an_account_is_made_with_the_password_typed_twice(tmp_path, monkeypatch):
    db = str(tmp_path / "log.sqlite")
    code, out, err = _accounts(monkeypatch, "a long password\na long password\n",
                               "add", "lead", "--role", "engineer", "--db", db)
    assert code == 0, err
    code, out, _ = run("accounts", "list", "--db", db)
    assert code == 0 and "lead" in out and "engineer" in out
    with SiteLog(db) as log:
        token, session = log.sign_in("lead", "a long password", "127.0.0.1")
        assert session.account.role == "engineer"


@pytest.mark.parametrize("stdin, words", [("a long password\nanother one!!\n", "differ"),
                                          ("short\nshort\n", "at least 10")])
def test_a_bad_password_is_refused_in_one_line_and_nothing_made(tmp_path, monkeypatch,
                                                                 stdin, words):
    db = str(tmp_path / "log.sqlite")
    code, _, err = _accounts(monkeypatch, stdin, "add", "lead", "--role", "operator",
                             "--db", db)
    assert code == 2
    _one_line(err, "password", words)
    with SiteLog(db) as log:
        assert log.accounts() == []


def test_no_password_option_exists():
    code, _, err = run("accounts", "add", "lead", "--role", "operator", "--password", "x")
    assert code == 2 and "--password" in err


def test_a_second_account_of_the_same_name_is_refused(tmp_path, monkeypatch):
    db = str(tmp_path / "log.sqlite")
    pw = "a long password\na long password\n"
    assert _accounts(monkeypatch, pw, "add", "lead", "--role", "operator", "--db", db)[0] == 0
    code, _, err = _accounts(monkeypatch, pw, "add", "lead", "--role", "viewer", "--db", db)
    assert code == 2
    _one_line(err, "already exists")


def test_disable_ends_sign_in(tmp_path, monkeypatch):
    db = str(tmp_path / "log.sqlite")
    _accounts(monkeypatch, "a long password\na long password\n", "add", "op", "--role",
              "operator", "--db", db)
    assert run("accounts", "disable", "op", "--db", db)[0] == 0
    from dosing.io.site_log import SignInRefused
    with SiteLog(db) as log, pytest.raises(SignInRefused):
        log.sign_in("op", "a long password", "127.0.0.1")


def test_serve_refuses_half_a_tls_pair_and_a_missing_folder(tmp_path):
    code, _, err = run("serve", str(tmp_path), "--cert", "x.pem", "--db",
                       str(tmp_path / "l.sqlite"))
    assert code == 2
    _one_line(err, "--key")
    code, _, err = run("serve", str(tmp_path / "nope"), "--db", str(tmp_path / "l.sqlite"))
    assert code == 2
    _one_line(err, "folder")


def test_serving_another_address_without_tls_warns_plainly(tmp_path, monkeypatch):
    import uvicorn
    seen = {}
    monkeypatch.setattr(uvicorn, "run", lambda app, **kw: seen.update(kw))
    (tmp_path / "scenarios").mkdir()
    code, _, err = run("serve", str(tmp_path / "scenarios"), "--host", "0.0.0.0",
                       "--db", str(tmp_path / "l.sqlite"))
    assert code == 0
    assert "WARNING" in err and "without TLS" in err and "no accounts yet" in err
    assert seen["host"] == "0.0.0.0" and seen["ssl_certfile"] is None
    code, _, err = run("serve", str(tmp_path / "scenarios"), "--db",
                       str(tmp_path / "l.sqlite"))
    assert code == 0 and "WARNING" not in err and seen["host"] == "127.0.0.1"
