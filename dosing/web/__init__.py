"""``dosing serve``: one site's shift log and dose sheets in a browser.

A small Starlette application, server-rendered from the package's own
templates: sign-in with roles (:mod:`dosing.web.auth`), the pages
(:mod:`dosing.web.pages`, :mod:`dosing.web.log_pages`), one site's folder
of scenarios and its shift log (:mod:`dosing.web.site`). A shell like the
command line and Tankside: the chemistry and the words come from the
planning and report layers.
"""

from .app import create_app
from .site import Site

__all__ = ["create_app", "Site"]
