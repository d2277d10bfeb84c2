"""The web page: ``GET /`` for people with a browser, ``GET /docs`` for the API reference.

Both are plain files in this package, served as they are: the page (``pages/index.html``,
``static/page.css``, ``static/page.js``) calls the same JSON API as any client, and the
reference (``pages/docs.html``, ``static/docs.js``) renders ``/openapi.yaml`` with Swagger
UI, whose files come from the ``flask-swagger-ui`` package and are served from here too
(``/ui/reference/…``). Nothing is loaded from another site, no script or style is inline,
and no build step is needed. :mod:`service.web.context` gives these paths their Content
Security Policy and :mod:`service.web.access` leaves them open: they hold no data, and the
page asks for the API key itself when the service wants one.
"""

from __future__ import annotations

from pathlib import Path

import flask_swagger_ui
from flask import Blueprint, Response, abort, send_from_directory

HERE = Path(__file__).resolve().parent
PAGES = HERE / "pages"
STATIC = HERE / "static"
SWAGGER_UI = Path(flask_swagger_ui.__file__).resolve().parent / "dist"
#: The Swagger UI files the reference uses; nothing else of the package is served.
SWAGGER_FILES = frozenset({"swagger-ui.css", "swagger-ui-bundle.js"})

bp = Blueprint("webpage", __name__)


def is_page_path(path: str) -> bool:
    """Whether ``path`` is the page, the reference or one of their files."""
    return path in ("/", "/docs") or path.startswith("/ui/")


def _page(name: str) -> Response:
    return send_from_directory(PAGES, name, mimetype="text/html", max_age=0)


@bp.get("/")
def index() -> Response:
    """The page for people: one view per job, over the JSON API."""
    return _page("index.html")


@bp.get("/docs")
def docs() -> Response:
    """The interactive API reference, rendered from /openapi.yaml."""
    return _page("docs.html")


@bp.get("/ui/<path:name>")
def asset(name: str) -> Response:
    """The page's own scripts and styles (send_from_directory refuses paths leaving STATIC)."""
    return send_from_directory(STATIC, name, max_age=0)


@bp.get("/ui/reference/<name>")
def reference_asset(name: str) -> Response:
    """Swagger UI's script and style, from the installed flask-swagger-ui package."""
    if name not in SWAGGER_FILES:
        abort(404)
    return send_from_directory(SWAGGER_UI, name, max_age=0)
