"""The site's shift log as a server keeps it: accounts, sessions, the audit and reviews.

:class:`SiteLog` is a :class:`~dosing.io.shiftlog.ShiftLog` with the tables
schema 2 adds (:mod:`dosing.io.shiftlog_file`):

* **accounts**: a name, a role (operator, engineer, viewer) and an Argon2id
  hash of the password (argon2-cffi's defaults, the RFC 9106 second
  recommended profile); an account can be disabled, never deleted.
* **sessions**: a random token (only its SHA-256 is stored), a CSRF token,
  when it began and was last used; a session ends at sign-out, after
  :data:`IDLE_LIMIT` without use or :data:`SESSION_LIMIT` after sign-in.
* **audit**: every sign-in, failed or refused sign-in, sign-out, record,
  review and scenario edit, with the account and the address; append-only.
* **reviews**: an engineer's mark on an entry; append-only.

Sign-in attempts are limited from the audit itself, so the limits hold
across restarts: :data:`ACCOUNT_FAILURES` failures on one account, or
:data:`ADDRESS_FAILURES` from one address, within :data:`FAILURE_WINDOW`
refuse further attempts until the window has passed.
"""

from __future__ import annotations

import functools
import hashlib
import re
import secrets
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone

from ..errors import InputError, ShiftLogError
from .shiftlog import ShiftLog

__all__ = ["SiteLog", "Account", "Session", "SignInRefused", "ROLES", "can",
           "SESSION_LIMIT", "IDLE_LIMIT", "FAILURE_WINDOW", "ACCOUNT_FAILURES",
           "ADDRESS_FAILURES", "MIN_PASSWORD"]

#: Roles and what each may do (an engineer may do all an operator may).
ROLES = ("operator", "engineer", "viewer")
_RIGHTS = {"viewer": {"read"},
           "operator": {"read", "plan", "record"},
           "engineer": {"read", "plan", "record", "review", "edit", "bias", "audit"}}

SESSION_LIMIT = timedelta(hours=12)      #: a shift and its handover (common practice)
IDLE_LIMIT = timedelta(hours=2)          #: unattended control-room screen
FAILURE_WINDOW = timedelta(minutes=15)
ACCOUNT_FAILURES = 5                     #: failed sign-ins on one account in the window
ADDRESS_FAILURES = 20                    #: failed sign-ins from one address in the window
MIN_PASSWORD = 10                        #: characters (NIST SP 800-63B asks at least 8)
_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,39}")


def can(role: str, right: str) -> bool:
    """Whether ``role`` holds ``right`` (read, plan, record, review, edit, bias, audit)."""
    return right in _RIGHTS.get(role, set())


class SignInRefused(Exception):
    """A sign-in that did not succeed; the message is safe to show."""


@dataclass(frozen=True)
class Account:
    name: str
    role: str
    created: str
    disabled: bool


@dataclass(frozen=True)
class Session:
    account: Account
    csrf: str
    created: str


def _now() -> datetime:
    return datetime.now(timezone.utc)


def _iso(t: datetime) -> str:
    return t.isoformat(timespec="microseconds")


def _digest(token: str) -> str:
    return hashlib.sha256(token.encode()).hexdigest()


def _hasher():
    from argon2 import PasswordHasher
    return PasswordHasher()


@functools.cache
def _dummy_hash() -> str:
    """A hash of a random password, verified against when the name is
    unknown, so a wrong name costs the same time as a wrong password."""
    return _hasher().hash(secrets.token_hex(16))


def check_password(password: str) -> None:
    """Refuse a password too short to keep out a guesser (one line, field ``password``)."""
    if len(password) < MIN_PASSWORD:
        raise InputError("password", f"too short: at least {MIN_PASSWORD} characters")


class SiteLog(ShiftLog):
    """The shift log with the site's accounts, sessions, audit and reviews."""

    # ----------------------------------------------------------- accounts --
    def add_account(self, name: str, role: str, password: str) -> Account:
        if not _NAME.fullmatch(name or ""):
            raise InputError("name", f"{name!r}; allowed: 1 to 40 letters, digits, '.', '_' "
                             "or '-', starting with a letter or digit")
        if role not in ROLES:
            raise InputError("role", f"{role!r}; allowed: {', '.join(ROLES)}")
        check_password(password)
        if self.account(name) is not None:
            raise InputError("name", f"an account {name!r} already exists; set its password "
                             "with `dosing accounts password`")
        self._write("INSERT INTO accounts (name, role, hash, created) VALUES (?, ?, ?, ?)",
                    (name, role, _hasher().hash(password), _iso(_now())))
        self.audit(name, "console", "account_added", f"role {role}")
        return self.account(name)

    def set_password(self, name: str, password: str) -> None:
        self._known(name)
        check_password(password)
        self._write("UPDATE accounts SET hash = ? WHERE name = ?", (_hasher().hash(password), name))
        self.audit(name, "console", "password_set")

    def set_disabled(self, name: str, disabled: bool) -> None:
        self._known(name)
        self._write("UPDATE accounts SET disabled = ? WHERE name = ?", (int(disabled), name))
        if disabled:
            self._write("UPDATE sessions SET ended = 1 WHERE account = ?", (name,))
        self.audit(name, "console", "account_disabled" if disabled else "account_enabled")

    def account(self, name: str) -> Account | None:
        rows = self._rows("SELECT name, role, created, disabled FROM accounts WHERE name = ?",
                          (name,))
        return Account(rows[0][0], rows[0][1], rows[0][2], bool(rows[0][3])) if rows else None

    def accounts(self) -> list[Account]:
        return [Account(n, r, c, bool(d)) for n, r, c, d in self._rows(
            "SELECT name, role, created, disabled FROM accounts ORDER BY name")]

    def _known(self, name: str) -> None:
        if self.account(name) is None:
            raise InputError("name", f"no account {name!r} (dosing accounts list)")

    # ------------------------------------------------------------ sign-in --
    def sign_in(self, name: str, password: str, address: str) -> tuple[str, Session]:
        """A new session's token and the session; :class:`SignInRefused` otherwise.

        Every outcome goes to the audit. The message never says whether the
        account exists.
        """
        since = _iso(_now() - FAILURE_WINDOW)
        if (self._failures("address", address, since) >= ADDRESS_FAILURES
                or self._failures("account", name, since) >= ACCOUNT_FAILURES):
            self.audit(name, address, "signin_refused", "too many failed attempts")
            raise SignInRefused("too many failed sign-ins: wait 15 minutes, or ask an "
                                "engineer to reset the password")
        rows = self._rows("SELECT hash, disabled FROM accounts WHERE name = ?", (name,))
        hasher = _hasher()
        stored = rows[0][0] if rows else _dummy_hash()    # same work for an unknown name
        try:
            from argon2.exceptions import VerificationError, InvalidHashError
            hasher.verify(stored, password)
            ok = bool(rows) and not rows[0][1]
        except (VerificationError, InvalidHashError):
            ok = False
        if not ok:
            self.audit(name, address, "signin_failed")
            raise SignInRefused("wrong name or password, or the account is disabled")
        if hasher.check_needs_rehash(stored):
            self._write("UPDATE accounts SET hash = ? WHERE name = ?",
                        (hasher.hash(password), name))
        token, csrf, now = secrets.token_urlsafe(32), secrets.token_urlsafe(32), _iso(_now())
        self._write("INSERT INTO sessions (token_hash, account, csrf, created, seen) "
                    "VALUES (?, ?, ?, ?, ?)", (_digest(token), name, csrf, now, now))
        self.audit(name, address, "signin")
        return token, Session(self.account(name), csrf, now)

    def _failures(self, column: str, value: str, since: str) -> int:
        rows = self._rows(f"SELECT count(*) FROM audit WHERE {column} = ? AND action = "
                          "'signin_failed' AND utc >= ? AND id > coalesce((SELECT max(id) "
                          f"FROM audit WHERE {column} = ? AND action IN ('signin', "
                          "'password_set')), 0)", (value, since, value))
        return rows[0][0]

    def session(self, token: str | None) -> Session | None:
        """The live session of a token, its use noted; None if none or ended."""
        if not token:
            return None
        rows = self._rows("SELECT s.account, s.csrf, s.created, s.seen, s.ended, a.disabled "
                          "FROM sessions s JOIN accounts a ON a.name = s.account "
                          "WHERE s.token_hash = ?", (_digest(token),))
        if not rows:
            return None
        name, csrf, created, seen, ended, disabled = rows[0]
        now = _now()
        if (ended or disabled or now - datetime.fromisoformat(created) > SESSION_LIMIT
                or now - datetime.fromisoformat(seen) > IDLE_LIMIT):
            return None
        if now - datetime.fromisoformat(seen) > timedelta(minutes=1):
            self._write("UPDATE sessions SET seen = ? WHERE token_hash = ?",
                        (_iso(now), _digest(token)))
        return Session(self.account(name), csrf, created)

    def sign_out(self, token: str, address: str) -> None:
        s = self.session(token)
        self._write("UPDATE sessions SET ended = 1 WHERE token_hash = ?", (_digest(token),))
        if s is not None:
            self.audit(s.account.name, address, "signout")

    # -------------------------------------------------------------- audit --
    def audit(self, account: str, address: str, action: str, detail: str = "") -> None:
        self._write("INSERT INTO audit (utc, account, address, action, detail) "
                    "VALUES (?, ?, ?, ?, ?)", (_iso(_now()), account, address, action, detail))

    def audit_rows(self, limit: int = 200) -> list[tuple[str, str, str, str, str]]:
        """The newest audit rows: (utc, account, address, action, detail)."""
        return self._rows("SELECT utc, account, address, action, detail FROM audit "
                          "ORDER BY id DESC LIMIT ?", (limit,))

    # ------------------------------------------------------------ reviews --
    def review(self, entry_id: int, reviewer: str, note: str = "") -> None:
        self.get(entry_id)                       # ShiftLogError if there is no such entry
        self._write("INSERT INTO reviews (entry, utc, reviewer, note) VALUES (?, ?, ?, ?)",
                    (entry_id, _iso(_now()), reviewer, note))

    def reviews(self, entry_id: int) -> list[tuple[str, str, str]]:
        """(utc, reviewer, note) of each review of an entry, oldest first."""
        return self._rows("SELECT utc, reviewer, note FROM reviews WHERE entry = ? ORDER BY id",
                          (entry_id,))

    # ------------------------------------------------------------ writing --
    def _write(self, sql: str, args: tuple) -> None:
        """One statement in its own transaction; a failure said in one line."""
        import sqlite3
        if not self.writable:
            raise ShiftLogError(f"{self.path}: was opened read-only; nothing was written")
        try:
            self._db.execute("BEGIN IMMEDIATE")
            self._db.execute(sql, args)
            self._db.execute("COMMIT")
        except sqlite3.Error as err:
            if self._db.in_transaction:
                self._db.execute("ROLLBACK")
            raise self._write_error(err) from None
