"""Pages from the package's own templates (Jinja2, every value escaped).

Nothing is fetched from elsewhere: the templates and the style sheet ship
in the package. Every response carries headers that keep the page to its
own site: a content security policy allowing only this site's own style
sheet and images (inline figures as ``data:`` PNGs), no framing, no
content-type sniffing, and no caching of pages that show the log.
"""

from __future__ import annotations

from typing import Any

from jinja2 import Environment, PackageLoader, select_autoescape
from starlette.responses import HTMLResponse

from ..version import __version__

__all__ = ["render", "SECURITY_HEADERS"]

SECURITY_HEADERS = {
    "Content-Security-Policy": "default-src 'none'; style-src 'self'; img-src 'self' data:; "
                               "form-action 'self'; frame-ancestors 'none'; base-uri 'none'",
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    "Referrer-Policy": "same-origin",
    "Cache-Control": "no-store",
}

_ENV = Environment(loader=PackageLoader("dosing.web", "templates"),
                   autoescape=select_autoescape(["html"]), trim_blocks=True,
                   lstrip_blocks=True)


def render(template: str, status: int = 200, **values: Any) -> HTMLResponse:
    """A page from ``template`` with ``values``; ``ctx`` (if given) names who is signed in."""
    ctx = values.get("ctx")
    values.setdefault("version", __version__)
    values.setdefault("site_name", ctx.site.name if ctx else "")
    values.setdefault("user", ctx.session.account if ctx and ctx.session else None)
    values.setdefault("csrf", ctx.session.csrf if ctx and ctx.session else "")
    html = _ENV.get_template(template).render(**values)
    return HTMLResponse(html, status, headers=SECURITY_HEADERS)
