"""Who is asking, and may they: sessions, roles, CSRF tokens, sign-in and sign-out.

Every page goes through :func:`page`: it reads the form (POST), finds the
session from its cookie, sends a visitor without one to the sign-in page,
refuses a role without the right (403, checked on the request itself, not
by hiding a button), refuses a POST whose CSRF token is missing or wrong
(403), then runs the page's handler in a worker thread with a :class:`Ctx`.
The sign-in form, before any session, carries a token that must match a
cookie of its own (double submit).
"""

from __future__ import annotations

import hmac
import secrets
from dataclasses import dataclass, field
from typing import Any, Callable
from urllib.parse import quote

from starlette.concurrency import run_in_threadpool
from starlette.requests import Request
from starlette.responses import RedirectResponse, Response

from ..io.site_log import Session, SignInRefused, can
from .render import render
from .site import Site

__all__ = ["Ctx", "page", "signin", "signout", "SESSION_COOKIE"]

SESSION_COOKIE = "dosing_session"
_PRE_COOKIE = "dosing_pre"


@dataclass
class Ctx:
    """What a page handler gets: the request, its form, the session, the site."""

    request: Request
    site: Site
    session: Session | None
    form: dict[str, str] = field(default_factory=dict)

    @property
    def address(self) -> str:
        return self.request.client.host if self.request.client else "-"

    @property
    def who(self) -> str:
        return self.session.account.name if self.session else ""

    def can(self, right: str) -> bool:
        return self.session is not None and can(self.session.account.role, right)

    def render(self, template: str, status: int = 200, **values: Any) -> Response:
        return render(template, status, ctx=self, **values)


def _cookie(response: Response, site: Site, name: str, value: str, *, delete=False) -> None:
    if delete:
        response.delete_cookie(name, path="/", secure=site.secure, httponly=True,
                               samesite="strict")
        return
    response.set_cookie(name, value, path="/", secure=site.secure, httponly=True,
                        samesite="strict")


def _form_of(raw) -> dict[str, str]:
    """Form fields as text (a file upload is not a field here and is dropped)."""
    return {k: v for k, v in raw.multi_items() if isinstance(v, str)}


def _site(request: Request) -> Site:
    return request.app.state.site


def page(handler: Callable[[Ctx], Response], right: str) -> Callable:
    """An endpoint that checks the session, the right and (for a POST) the CSRF token."""
    async def endpoint(request: Request) -> Response:
        form = _form_of(await request.form()) if request.method == "POST" else {}
        return await run_in_threadpool(_checked, handler, right, request, form)
    endpoint.__name__ = handler.__name__
    return endpoint


def _checked(handler, right: str, request: Request, form: dict[str, str]) -> Response:
    site = _site(request)
    with site.log() as log:
        session = log.session(request.cookies.get(SESSION_COOKIE))
    ctx = Ctx(request, site, session, form)
    if session is None:
        if request.method != "GET":
            return ctx.render("error.html", 403, title="Signed out",
                              message="Your session has ended: sign in again, then repeat "
                              "what you were doing. Nothing was recorded.")
        target = request.url.path + (f"?{request.url.query}" if request.url.query else "")
        return RedirectResponse(f"/signin?next={quote(target, safe='')}", 303)
    if not ctx.can(right):
        return ctx.render("error.html", 403, title="Not for your role",
                          message=f"This needs the {right!r} right, which the "
                          f"{session.account.role} role does not have.")
    if request.method == "POST" and not hmac.compare_digest(
            form.get("csrf", ""), session.csrf):
        return ctx.render("error.html", 403, title="Form refused",
                          message="The form's security token is missing or out of date "
                          "(an old page, or a page from another site): reload the page and "
                          "send it again. Nothing was recorded.")
    return handler(ctx)


def _safe_next(target: str) -> str:
    """Only a path on this site (never another host) is followed after sign-in."""
    if not target.startswith("/") or target.startswith("//") or "\\" in target:
        return "/"
    return target


async def signin(request: Request) -> Response:
    form = _form_of(await request.form()) if request.method == "POST" else {}
    return await run_in_threadpool(_signin, request, form)


def _signin(request: Request, form: dict[str, str]) -> Response:
    site = _site(request)
    ctx = Ctx(request, site, None, form)
    target = _safe_next(form.get("next") or request.query_params.get("next") or "/")
    message, status = "", 200
    if request.method == "POST":
        pre = request.cookies.get(_PRE_COOKIE, "")
        if not pre or not hmac.compare_digest(form.get("csrf", ""), pre):
            message, status = "The form was out of date: sign in again.", 403
        else:
            try:
                with site.log() as log:
                    token, _ = log.sign_in(form.get("name", "").strip(),
                                           form.get("password", ""), ctx.address)
            except SignInRefused as err:
                message, status = str(err), 401
            else:
                response = RedirectResponse(target, 303)
                _cookie(response, site, SESSION_COOKIE, token)
                _cookie(response, site, _PRE_COOKIE, "", delete=True)
                return response
    pre = secrets.token_urlsafe(32)
    response = ctx.render("signin.html", status, pre=pre, next=target, message=message,
                          name=form.get("name", ""))
    _cookie(response, site, _PRE_COOKIE, pre)
    return response


def _signout(ctx: Ctx) -> Response:
    with ctx.site.log() as log:
        log.sign_out(ctx.request.cookies.get(SESSION_COOKIE, ""), ctx.address)
    response = RedirectResponse("/signin", 303)
    _cookie(response, ctx.site, SESSION_COOKIE, "", delete=True)
    return response


signout = page(_signout, "read")
