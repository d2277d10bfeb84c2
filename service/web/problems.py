"""Problem details (RFC 9457) for every error the service returns.

Each error is one ``application/problem+json`` body with ``type``, ``title``,
``status``, ``detail``, ``instance`` and ``request_id`` (the ``X-Request-ID`` of the
answer); invalid input adds ``errors``, mapping each offending field (a dotted path such
as ``population.size``) to messages.
Werkzeug's own HTTP errors (404, 405, 413, ...) go through the same handler,
and so does anything unexpected, as a 500 that reveals nothing internal.
"""

from __future__ import annotations

import logging
from collections.abc import Mapping
from typing import Any

from flask import Flask, Response, request
from marshmallow import ValidationError
from werkzeug.exceptions import ClientDisconnected, HTTPException

from service.sampling.errors import SamplingError
from service.web import jsonio
from service.web.context import request_id

PROBLEM_MEDIA_TYPE = "application/problem+json"
logger = logging.getLogger(__name__)

# Problem type URIs are relative references, documented in the README.
INVALID_INPUT = "/problems/invalid-input"
MALFORMED_BODY = "/problems/malformed-body"
UNSUPPORTED_MEDIA_TYPE = "/problems/unsupported-media-type"


class Problem(Exception):
    """An error to be answered as problem details."""

    def __init__(
        self,
        status: int,
        title: str,
        detail: str,
        type_: str = "about:blank",
        errors: Mapping[str, list[str]] | None = None,
        headers: Mapping[str, str] | None = None,
    ) -> None:
        super().__init__(detail)
        self.status, self.title, self.detail, self.type = status, title, detail, type_
        self.errors = dict(errors) if errors else None
        self.headers = dict(headers or {})

    def body(
        self, instance: str | None = None, current_id: str | None = None
    ) -> dict[str, Any]:
        """The problem details; ``current_id`` defaults to the Flask request's id."""
        payload: dict[str, Any] = {
            "type": self.type,
            "title": self.title,
            "status": self.status,
            "detail": self.detail,
        }
        if instance is not None:
            payload["instance"] = instance
        if self.errors is not None:
            payload["errors"] = self.errors
        current = current_id if current_id is not None else request_id()
        if current is not None:
            payload["request_id"] = current
        return payload


def flatten_messages(messages: Any, prefix: str = "") -> dict[str, list[str]]:
    """Turn marshmallow's nested messages into ``{"population.size": ["..."]}``."""
    flat: dict[str, list[str]] = {}
    if isinstance(messages, Mapping):
        for key, value in messages.items():
            name = "body" if key == "_schema" and not prefix else str(key)
            if key == "_schema" and prefix:
                path = prefix
            elif isinstance(key, int):
                path = f"{prefix}[{key}]"
            else:
                path = f"{prefix}.{name}" if prefix else name
            flat.update(flatten_messages(value, path))
    elif isinstance(messages, list) and all(isinstance(m, str) for m in messages):
        flat.setdefault(prefix or "body", []).extend(messages)
    elif isinstance(messages, list):
        for item in messages:
            flat.update(flatten_messages(item, prefix))
    else:
        flat.setdefault(prefix or "body", []).append(str(messages))
    return flat


#: How many invalid fields one answer names; the rest are counted, so that a list of a
#: hundred thousand bad entries is not repeated back.
NAMED_FIELDS = 20


def invalid_input(errors: Mapping[str, list[str]]) -> Problem:
    if len(errors) > NAMED_FIELDS:
        named = dict(list(errors.items())[:NAMED_FIELDS])
        rest = len(errors) - NAMED_FIELDS
        note = f"{rest:,} more fields are invalid; the first {NAMED_FIELDS} are named"
        named["body"] = [*named.get("body", []), note]
        errors = named
    detail = "; ".join(f"{field}: {' '.join(msgs)}" for field, msgs in errors.items())
    return Problem(422, "Invalid input", detail, INVALID_INPUT, errors)


def from_validation_error(exc: ValidationError) -> Problem:
    return invalid_input(flatten_messages(exc.messages))


def from_sampling_error(exc: SamplingError) -> Problem:
    return invalid_input({exc.field: [exc.message]})


#: Set in the WSGI environ to close the connection after the answer (read by the server's
#: worker, service.web.gunicorn_worker): a body refused unread leaves bytes on it.
CLOSE_AFTER = "service.close_connection"


def problem_response(problem: Problem) -> Response:
    if problem.status in (408, 413):
        request.environ[CLOSE_AFTER] = True
    response = Response(
        jsonio.dumps(problem.body(request.path if request else None)),
        status=problem.status,
        mimetype=PROBLEM_MEDIA_TYPE,
    )
    for name, value in problem.headers.items():
        response.headers[name] = value
    return response


def _from_http_exception(exc: HTTPException) -> Problem:
    status = exc.code or 500
    headers = {}
    if status == 405 and exc.valid_methods:  # type: ignore[attr-defined]
        headers["Allow"] = ", ".join(exc.valid_methods)  # type: ignore[attr-defined]
    detail = {
        404: f"no resource at {request.path}; see /openapi.yaml for the endpoints",
        405: f"{request.method} is not allowed on {request.path}",
        413: f"the request body is larger than the {_body_limit()} this service accepts",
    }.get(status, exc.description or exc.name)
    return Problem(status, exc.name, detail, headers=headers)


def _body_limit() -> str:
    limit = request.max_content_length
    return "limit" if limit is None else f"{limit:,} bytes"


# The socket's read timeout passed while the body was read (service.web.gunicorn_worker); werkzeug
# reports it as a client disconnection, or it surfaces as the timeout itself.
SLOW_BODY = Problem(
    408, "Request Timeout", "the request body stopped arriving; send it whole, without pauses"
)


def register(app: Flask) -> None:
    """Install the one error handler for every error."""

    @app.errorhandler(Problem)
    def _problem(exc: Problem) -> Response:
        return problem_response(exc)

    @app.errorhandler(HTTPException)
    def _http(exc: HTTPException) -> Response:
        if isinstance(exc, ClientDisconnected) and isinstance(exc.__context__, TimeoutError):
            return problem_response(SLOW_BODY)
        return problem_response(_from_http_exception(exc))

    @app.errorhandler(TimeoutError)
    def _slow_body(exc: TimeoutError) -> Response:
        return problem_response(SLOW_BODY)

    @app.errorhandler(Exception)
    def _unexpected(exc: Exception) -> Response:
        logger.exception("unhandled error on %s %s", request.method, request.path)
        return problem_response(
            Problem(500, "Internal Server Error", "the service failed to answer this request")
        )
