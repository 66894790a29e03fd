"""The web application of one site: its routes, and the rights each needs.

Rights by role (:func:`dosing.io.site_log.can`): a viewer reads; an
operator also plans and records decisions and follow-ups; an engineer also
reviews entries, edits the site's scenarios, sees the model's bias per tank
and reads the audit.
"""

from __future__ import annotations

from importlib.resources import files

from starlette.applications import Starlette
from starlette.requests import Request
from starlette.responses import RedirectResponse, Response
from starlette.routing import Mount, Route
from starlette.staticfiles import StaticFiles

from . import log_pages, pages
from .auth import page, signin, signout
from .render import SECURITY_HEADERS, render
from .site import Site

__all__ = ["create_app"]


def _home(request: Request) -> Response:
    return RedirectResponse("/tanks", 303)


async def _not_found(request: Request, exc) -> Response:
    return render("error.html", 404, title="Not found", message="There is no such page.")


async def _server_error(request: Request, exc) -> Response:
    return render("error.html", 500, title="Something went wrong",
                  message="The server could not finish this request; nothing was recorded "
                  "by it. The error is in the server's output.")


class _Static(StaticFiles):
    """The style sheet, with the same security headers as the pages."""

    async def get_response(self, path: str, scope) -> Response:
        response = await super().get_response(path, scope)
        for k, v in SECURITY_HEADERS.items():
            if k != "Cache-Control":
                response.headers[k] = v
        return response


def create_app(site: Site) -> Starlette:
    """The Starlette application serving ``site``."""
    routes = [
        Route("/", _home),
        Route("/signin", signin, methods=["GET", "POST"]),
        Route("/signout", signout, methods=["POST"]),
        Route("/tanks", page(pages.tanks, "read")),
        Route("/plan", page(pages.scenarios, "plan")),
        Route("/plan/{name}", page(pages.plan_page, "plan")),
        Route("/plan/{name}/print", page(pages.print_page, "plan")),
        Route("/plan/{name}/sheet.pdf", page(pages.pdf_download, "plan")),
        Route("/plan/{name}/record", page(pages.record, "record"), methods=["POST"]),
        Route("/log", page(log_pages.log_list, "read")),
        Route("/log.csv", page(log_pages.export_csv, "read")),
        Route("/log/{id:int}", page(log_pages.entry_page, "read")),
        Route("/log/{id:int}/follow-up", page(log_pages.follow_up, "record"),
              methods=["POST"]),
        Route("/log/{id:int}/correct", page(log_pages.correct, "record"), methods=["POST"]),
        Route("/log/{id:int}/review", page(log_pages.review, "review"), methods=["POST"]),
        Route("/audit", page(log_pages.audit_page, "audit")),
        Route("/scenarios/{name}/edit", page(log_pages.edit_scenario, "edit"),
              methods=["GET", "POST"]),
        Mount("/static", _Static(directory=str(files("dosing.web") / "static")),
              name="static"),
    ]
    app = Starlette(routes=routes, exception_handlers={404: _not_found,
                                                       500: _server_error})
    app.state.site = site
    return app
