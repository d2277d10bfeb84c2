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

from dataclasses import dataclass

from flask import Flask, Response, request

from service.web.context import REQUEST_ID_HEADER

ALLOWED_METHODS = "GET, POST"
ALLOWED_HEADERS = f"Accept, Authorization, Content-Type, {REQUEST_ID_HEADER}"
PREFLIGHT_MAX_AGE_SECONDS = "600"


@dataclass(frozen=True)
class CorsPolicy:
    """Which origins may read answers; empty: none (no CORS header is ever sent)."""

    origins: tuple[str, ...]

    @property
    def enabled(self) -> bool:
        return bool(self.origins)

    def headers(self, origin: str | None, method: str, preflight: bool) -> list[tuple[str, str]]:
        """The CORS headers of an answer to a request from ``origin`` (``Vary`` aside)."""
        any_origin = self.origins == ("*",)
        if origin is None or not (any_origin or origin in self.origins):
            return []
        headers = [
            ("Access-Control-Allow-Origin", "*" if any_origin else origin),
            ("Access-Control-Expose-Headers", REQUEST_ID_HEADER),
        ]
        if method == "OPTIONS" and preflight:
            headers += [
                ("Access-Control-Allow-Methods", ALLOWED_METHODS),
                ("Access-Control-Allow-Headers", ALLOWED_HEADERS),
                ("Access-Control-Max-Age", PREFLIGHT_MAX_AGE_SECONDS),
            ]
        return headers


def register(app: Flask, origins: tuple[str, ...]) -> None:
    """Answer cross-origin requests from ``origins`` on ``app``."""
    policy = CorsPolicy(origins)
    if not policy.enabled:
        return

    @app.after_request
    def _cors(response: Response) -> Response:
        response.vary.add("Origin")
        preflight = "Access-Control-Request-Method" in request.headers
        for name, value in policy.headers(request.headers.get("Origin"), request.method, preflight):
            response.headers[name] = value
        return response
