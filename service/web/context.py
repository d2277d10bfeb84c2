"""Per-request plumbing: request ids, security headers and one JSON log line per request.

**Request id.** A client may send ``X-Request-ID``: 1 to 128 characters from letters,
digits and ``. _ : -``. Anything else (or no header) is replaced by a new id, 32 hex
digits from a random UUID (RFC 9562 version 4). The id is echoed in the ``X-Request-ID``
response header, in every problem details body (``request_id``) and in the log lines.

**Headers.** Every response carries ``X-Content-Type-Options: nosniff``,
``Referrer-Policy: no-referrer`` and a Content Security Policy: ``default-src 'none';
frame-ancestors 'none'``, and for SVG charts ``default-src 'none'; style-src
'unsafe-inline'; frame-ancestors 'none'`` (the chart's styles are inline; it loads
nothing). The web page, the API reference and their files (:mod:`service.webpage`) get
:data:`PAGE_CSP`: scripts, styles, fonts and requests from the service itself only, images
also from ``data:`` and ``blob:`` URLs (the charts the page fetches and shows), no inline
script or style, no frames, forms or base URL. Results and errors are ``Cache-Control:
no-store``; the OpenAPI document and the page's files are ``no-cache``. No CORS headers
are sent: browsers on other origins cannot read answers.

**Logs.** Logger ``service`` writes one JSON object per line to standard error: ``time``
(UTC, ISO 8601), ``level``, ``message``, and for requests ``request_id``, ``method``,
``path`` (without the query), ``status`` and ``duration_ms``. Bodies, item lists and
query strings are never logged; an unexpected error adds its exception type and stack.
"""

from __future__ import annotations

import json
import logging
import re
import sys
import time
import traceback
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from datetime import UTC, datetime

from flask import Flask, Response, g, has_request_context, request

from service.webpage import is_page_path

REQUEST_ID_HEADER = "X-Request-ID"
REQUEST_ID_PATTERN = re.compile(r"[A-Za-z0-9._:-]{1,128}")
CSP = "default-src 'none'; frame-ancestors 'none'"
SVG_CSP = "default-src 'none'; style-src 'unsafe-inline'; frame-ancestors 'none'"
PAGE_CSP = (
    "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data: blob:; "
    "font-src 'self'; connect-src 'self'; form-action 'none'; base-uri 'none'; "
    "frame-ancestors 'none'"
)
# Paths whose answers may be stored by caches (and revalidated).
_CACHEABLE = frozenset({"/openapi.yaml", "/openapi.json"})
# The fields of a log line, in order, beyond time, level and message.
REQUEST_FIELDS = ("request_id", "method", "path", "status", "duration_ms")

access_logger = logging.getLogger("service.web.access")


# The id of the request a thread is answering outside Flask's request context (the
# operations served straight from WSGI, service.http.direct).
_DIRECT_ID: ContextVar[str | None] = ContextVar("direct_request_id", default=None)


def request_id() -> str | None:
    """The current request's id (chosen once per request), or None outside a request."""
    if not has_request_context():
        return _DIRECT_ID.get()
    current: str | None = g.get("request_id")
    if current is None:
        current = choose_request_id(request.headers.get(REQUEST_ID_HEADER, ""))
        g.request_id = current
    return current


def choose_request_id(sent: str) -> str:
    """The id a request sent, when usable; otherwise a new one."""
    return sent if REQUEST_ID_PATTERN.fullmatch(sent) else uuid.uuid4().hex


@contextmanager
def direct_request(current_id: str) -> Iterator[None]:
    """Make ``current_id`` the request id of this thread's work, for a request answered
    without Flask's request context (problem bodies and log lines read it)."""
    token = _DIRECT_ID.set(current_id)
    try:
        yield
    finally:
        _DIRECT_ID.reset(token)


def answer_headers(path: str, mimetype: str, current_id: str) -> list[tuple[str, str]]:
    """The request id, security and cache headers of every answer to ``path``."""
    page = is_page_path(path)
    if page:
        policy = PAGE_CSP
    elif mimetype == "image/svg+xml":
        policy = SVG_CSP
    else:
        policy = CSP
    cacheable = page or path in _CACHEABLE
    return [
        (REQUEST_ID_HEADER, current_id),
        ("X-Content-Type-Options", "nosniff"),
        ("Referrer-Policy", "no-referrer"),
        ("Content-Security-Policy", policy),
        ("Cache-Control", "no-cache" if cacheable else "no-store"),
    ]


def log_request(
    current_id: str, method: str, path: str, status: int, duration_ms: float | None
) -> None:
    """The one log line of a request.

    The record is made directly rather than through ``Logger.info``: that would also walk
    the stack to find the caller, which the line does not show.
    """
    if not access_logger.isEnabledFor(logging.INFO):
        return
    fields = {
        "request_id": current_id, "method": method, "path": path, "status": status,
        "duration_ms": duration_ms,
    }
    access_logger.handle(
        access_logger.makeRecord(
            access_logger.name, logging.INFO, "", 0, "request", (), None, extra=fields
        )
    )


# ASCII only: every control character (C0, DEL, C1, U+2028, U+2029) and anything else
# outside ASCII is escaped, so a value can neither split nor forge a line. One encoder for
# every line: json.dumps with options would build a new one each time.
_LINE_ENCODER = json.JSONEncoder(ensure_ascii=True, default=str)


class _Clock:
    """``time`` of the log lines: UTC, ISO 8601, milliseconds; the part up to the
    seconds is formatted once a second."""

    def __init__(self) -> None:
        # One tuple, replaced whole, so that threads never see a second with another's text.
        self._last: tuple[int, str] = (-1, "")

    def __call__(self, created: float) -> str:
        second = int(created)
        last_second, prefix = self._last
        if second != last_second:
            prefix = datetime.fromtimestamp(second, UTC).strftime("%Y-%m-%dT%H:%M:%S")
            self._last = (second, prefix)
        # Microseconds rounded as datetime.fromtimestamp rounds them, then cut to milliseconds.
        micros = round((created - second) * 1_000_000)
        if micros >= 1_000_000:
            return datetime.fromtimestamp(created, UTC).isoformat(timespec="milliseconds")
        return f"{prefix}.{micros // 1000:03d}+00:00"


class JsonFormatter(logging.Formatter):
    """One JSON object per record, on one line."""

    def __init__(self) -> None:
        super().__init__()
        self._clock = _Clock()

    def format(self, record: logging.LogRecord) -> str:
        line: dict[str, object] = {
            "time": self._clock(record.created),
            "level": record.levelname,
            "message": record.getMessage(),
        }
        for name in REQUEST_FIELDS:
            value = getattr(record, name, None)
            if value is not None:
                line[name] = value
        if "request_id" not in line and (current := request_id()) is not None:
            line["request_id"] = current
        if record.exc_info and record.exc_info[0] is not None:
            line["exception"] = record.exc_info[0].__name__
            line["stack"] = "".join(traceback.format_tb(record.exc_info[2])).rstrip()
        return _LINE_ENCODER.encode(line)


class _StderrHandler(logging.Handler):
    """Writes to whatever ``sys.stderr`` is at the time of the record."""

    def emit(self, record: logging.LogRecord) -> None:
        try:
            sys.stderr.write(self.format(record) + "\n")
            sys.stderr.flush()
        except Exception:
            self.handleError(record)


def configure_logging() -> None:
    """Send the ``service`` loggers to standard error as JSON lines (once per process)."""
    logger = logging.getLogger("service")
    if any(isinstance(h, _StderrHandler) for h in logger.handlers):
        return
    handler = _StderrHandler()
    handler.setFormatter(JsonFormatter())
    logger.addHandler(handler)
    logger.setLevel(logging.INFO)
    logger.propagate = False


def _start() -> None:
    g.started = time.perf_counter()
    request_id()


def _finish(response: Response) -> Response:
    current = request_id() or uuid.uuid4().hex
    headers = response.headers
    for name, value in answer_headers(request.path, response.mimetype or "", current):
        headers[name] = value
    started = g.get("started")
    duration = None if started is None else round((time.perf_counter() - started) * 1000, 3)
    log_request(current, request.method, request.path, response.status_code, duration)
    return response


def register(app: Flask) -> None:
    """Install the request id, headers and log line on every request of ``app``."""
    app.before_request(_start)
    app.after_request(_finish)
