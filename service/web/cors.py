"""Cross-origin reads (CORS), off unless origins are configured.

With :attr:`Settings.cors_origins <service.settings.Settings.cors_origins>` empty no CORS
header is ever sent, so browser pages on other origins cannot read answers. Otherwise a
request whose ``Origin`` is listed (or any, with ``*``) gets
``Access-Control-Allow-Origin`` with that origin, ``Vary: Origin``, and the request id
exposed; a preflight (``OPTIONS`` with ``Access-Control-Request-Method``) also gets the
methods and headers the service accepts. Credentials (cookies) are never allowed: the
service uses none; API keys travel in the ``Authorization`` header, which is allowed.
"""

from __future__ import annotations

from flask import Flask, Response, request

from service.web.context import REQUEST_ID_HEADER

ALLOWED_METHODS = "GET, POST"
ALLOWED_HEADERS = f"Accept, Authorization, Content-Type, {REQUEST_ID_HEADER}"
PREFLIGHT_MAX_AGE_SECONDS = "600"


def register(app: Flask, origins: tuple[str, ...]) -> None:
    """Answer cross-origin requests from ``origins`` on ``app``."""
    if not origins:
        return
    any_origin = origins == ("*",)
    allowed = frozenset(origins)

    @app.after_request
    def _cors(response: Response) -> Response:
        origin = request.headers.get("Origin")
        response.vary.add("Origin")
        if origin is None or not (any_origin or origin in allowed):
            return response
        headers = response.headers
        headers["Access-Control-Allow-Origin"] = "*" if any_origin else origin
        headers["Access-Control-Expose-Headers"] = REQUEST_ID_HEADER
        if request.method == "OPTIONS" and "Access-Control-Request-Method" in request.headers:
            headers["Access-Control-Allow-Methods"] = ALLOWED_METHODS
            headers["Access-Control-Allow-Headers"] = ALLOWED_HEADERS
            headers["Access-Control-Max-Age"] = PREFLIGHT_MAX_AGE_SECONDS
        return response
