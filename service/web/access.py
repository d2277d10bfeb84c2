"""Optional API keys: ``Authorization: Bearer <key>`` on every endpoint but a few.

When :attr:`Settings.key_digests <service.settings.Settings.key_digests>` is empty (the
default) nothing is checked. Otherwise every request, except to the paths in
:data:`OPEN_PATHS` and CORS preflights (which browsers send without credentials), must
carry a bearer token (RFC 6750) whose SHA-256 digest is one of the configured digests.

The presented key's digest is compared with every configured digest by
:func:`hmac.compare_digest`, all of them every time, so the time taken does not depend on
which digest, or how much of one, matched. A missing, malformed or unknown key gets the
same 401 problem details and ``WWW-Authenticate`` challenge whichever it was, and an
unknown path answers 401 before 404, so nothing tells a caller without a key which keys
or paths exist. For the same reason a preflight without a key gets the same empty 204 on
every path, existing or not, and any other ``OPTIONS`` without a key gets the 401. The web
page, the API reference and their files (``/``, ``/docs``, ``/ui/…``) are open: they hold no
data, and the page asks for the key itself.
"""

from __future__ import annotations

import hashlib
import hmac

from flask import Flask, Response, request

from service.web.problems import Problem
from service.webpage import is_page_path

#: Health, readiness and the contract stay open, for load balancers and client generators;
#: so do the web page and the reference (they hold no data, and ask for the key themselves).
OPEN_PATHS = frozenset({"/v1/health", "/v1/ready", "/openapi.yaml", "/openapi.json"})
UNAUTHORIZED = "/problems/unauthorized"
REALM = "attribute-sampling"


def _challenge(error: str | None) -> dict[str, str]:
    value = f'Bearer realm="{REALM}"'
    if error is not None:
        value += f', error="{error}"'
    return {"WWW-Authenticate": value}


def _is_preflight() -> bool:
    return "Origin" in request.headers and "Access-Control-Request-Method" in request.headers


def _presented_key() -> str | None:
    return presented_key(request.headers.get("Authorization", ""))


def presented_key(authorization: str) -> str | None:
    """The bearer token of an ``Authorization`` header value, or None when there is none."""
    scheme, _, token = authorization.partition(" ")
    token = token.strip()
    if scheme.lower() != "bearer" or not token:
        return None
    return token


def key_problem(key: str | None, digests: frozenset[bytes]) -> Problem | None:
    """The 401 for a missing or unknown ``key``, or None when it is accepted."""
    if key is None:
        return Problem(
            401, "Unauthorized",
            "this service requires an API key: send Authorization: Bearer <key>",
            UNAUTHORIZED, headers=_challenge(None),
        )
    if not key_matches(key, digests):
        return Problem(
            401, "Unauthorized", "the API key sent is not accepted by this service",
            UNAUTHORIZED, headers=_challenge("invalid_token"),
        )
    return None


def key_matches(key: str, digests: frozenset[bytes]) -> bool:
    """Whether ``key``'s SHA-256 digest is among ``digests``, compared in constant time.

    >>> key_matches("abc", frozenset({hashlib.sha256(b"abc").digest()}))
    True
    >>> key_matches("abd", frozenset({hashlib.sha256(b"abc").digest()}))
    False
    """
    presented = hashlib.sha256(key.encode("utf-8", "surrogatepass")).digest()
    matched = False
    for candidate in digests:
        matched |= hmac.compare_digest(presented, candidate)
    return matched


def register(app: Flask, digests: frozenset[bytes]) -> None:
    """Require a key on ``app`` when ``digests`` is not empty."""
    if not digests:
        return

    @app.before_request
    def _require_key() -> Response | None:
        if request.path in OPEN_PATHS or is_page_path(request.path):
            return None
        key = _presented_key()
        if request.method == "OPTIONS" and key is None and _is_preflight():
            # Browsers send preflights without credentials. The answer is the same for
            # every path, so that it does not tell which exist; CORS headers are added
            # afterwards for the configured origins only.
            return Response(status=204)
        if (refused := key_problem(key, digests)) is not None:
            raise refused
        return None
