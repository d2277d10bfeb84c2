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


def request_id() -> str | None:
    """The current request's id (chosen once per request), or None outside a request."""
    if not has_request_context():
        return None
    current: str | None = g.get("request_id")
    if current is None:
        sent = request.headers.get(REQUEST_ID_HEADER, "")
        current = sent if REQUEST_ID_PATTERN.fullmatch(sent) else uuid.uuid4().hex
        g.request_id = current
    return current


class JsonFormatter(logging.Formatter):
    """One JSON object per record, on one line."""

    def format(self, record: logging.LogRecord) -> str:
        line: dict[str, object] = {
            "time": datetime.fromtimestamp(record.created, UTC).isoformat(
                timespec="milliseconds"
            ),
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
        # ASCII only: every control character (C0, DEL, C1, U+2028, U+2029) and anything
        # else outside ASCII is escaped, so a value can neither split nor forge a line.
        return json.dumps(line, ensure_ascii=True, default=str)


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
    headers[REQUEST_ID_HEADER] = current
    headers["X-Content-Type-Options"] = "nosniff"
    headers["Referrer-Policy"] = "no-referrer"
    page = is_page_path(request.path)
    if page:
        headers["Content-Security-Policy"] = PAGE_CSP
    elif response.mimetype == "image/svg+xml":
        headers["Content-Security-Policy"] = SVG_CSP
    else:
        headers["Content-Security-Policy"] = CSP
    cacheable = page or request.path in _CACHEABLE
    headers["Cache-Control"] = "no-cache" if cacheable else "no-store"
    started = g.get("started")
    duration = None if started is None else round((time.perf_counter() - started) * 1000, 3)
    access_logger.info(
        "request",
        extra={
            "request_id": current,
            "method": request.method,
            "path": request.path,
            "status": response.status_code,
            "duration_ms": duration,
        },
    )
    return response


def register(app: Flask) -> None:
    """Install the request id, headers and log line on every request of ``app``."""
    app.before_request(_start)
    app.after_request(_finish)
