"""The gunicorn worker of the service: threads, a request-header deadline, problem+json.

**Threads.** :class:`ServiceWorker` is gunicorn's ``gthread`` worker: connections wait in
the worker's poller, and a request is read and answered by one thread of a pool
(``GUNICORN_THREADS`` per worker). A slow or stalled client therefore holds one thread,
never a whole worker, and the other threads keep answering.

**Header deadline.** gunicorn waits a few seconds for the first bytes of a request and
then reads its head with blocking reads, so a client that sends one byte of a header
line now and then could hold a thread for ever. Here a watchdog thread per worker
answers ``408`` and closes the connection of any request whose head (request line and
headers) is not complete ``GUNICORN_HEADER_TIMEOUT`` seconds after its thread began to
read it; bodies are bounded by the socket's read timeout (``GUNICORN_READ_TIMEOUT``
seconds without a byte), set on every accepted connection.

**Errors gunicorn answers itself** (a malformed request line, 414, 431, a request it
failed to hand to the app) are written as RFC 9457 problem details with the service's
security headers and a request id, instead of gunicorn's HTML page, and counted in
``sampling_server_answers_total``. gunicorn's writer is replaced for that (it is one
module function, called for every such answer), because its worker classes offer no
other hook for the body of these answers.

**Access log.** gunicorn's own access line is off by default (the app writes one JSON line
per request); when ``GUNICORN_ACCESS_LOG=1`` turns it on, :class:`ServiceLogger` escapes
every value it repeats from the request as a JSON string body, ASCII only, so a ``%0A`` or
any other control character in a path cannot split or forge a line.
"""

from __future__ import annotations

import json
import socket
import threading
import time
import uuid
from typing import Any

from gunicorn import util
from gunicorn.glogging import Logger
from gunicorn.workers.gthread import ThreadWorker

from service.web.problems import CLOSE_AFTER

PROBLEM_MEDIA_TYPE = "application/problem+json"
SECURITY_HEADERS = (
    ("X-Content-Type-Options", "nosniff"),
    ("Referrer-Policy", "no-referrer"),
    ("Content-Security-Policy", "default-src 'none'; frame-ancestors 'none'"),
    ("Cache-Control", "no-store"),
)
#: What each status means here; gunicorn's own message (which repeats the client's
#: bytes) is not echoed back.
DETAILS = {
    400: "the request is not well-formed HTTP/1.1 (request line, headers or chunked body)",
    403: "the request was refused before it reached the service",
    408: "the request's head was not received in time; send it whole, without pauses",
    414: "the request line is longer than this server accepts (8,190 bytes)",
    417: "the Expect header asks for something this server does not do",
    431: "the request has more header fields, or longer ones, than this server accepts",
    500: "the server failed to answer this request",
    501: "the request uses a transfer coding this server does not implement",
}


def problem_bytes(status: int, reason: str, detail: str | None = None) -> bytes:
    """A complete HTTP/1.1 answer: problem details, security headers, Connection: close."""
    request_id = uuid.uuid4().hex
    body = json.dumps(
        {
            "type": "about:blank",
            "title": reason,
            "status": status,
            "detail": detail or DETAILS.get(status, reason),
            "request_id": request_id,
        }
    ).encode("ascii")
    lines = [
        f"HTTP/1.1 {status} {reason}",
        "Connection: close",
        f"Content-Type: {PROBLEM_MEDIA_TYPE}",
        f"Content-Length: {len(body)}",
        f"X-Request-ID: {request_id}",
        *(f"{name}: {value}" for name, value in SECURITY_HEADERS),
    ]
    return ("\r\n".join(lines) + "\r\n\r\n").encode("latin-1") + body


def _count(status: int) -> None:
    try:
        from service.web.metrics import server_answers

        server_answers().labels(status=str(status)).inc()
    except Exception:  # counting must never stop the answer
        return


def write_problem(sock: Any, status_int: int, reason: str, mesg: str) -> None:
    """Replacement of gunicorn's ``util.write_error``, same arguments."""
    _count(status_int)
    util.write_nonblock(sock, problem_bytes(status_int, reason))


class ServiceWorker(ThreadWorker):
    """``gthread`` with a deadline on reading a request's head and a read timeout."""

    def init_process(self) -> None:
        # In the worker process only: importing this module changes nothing.
        util.write_error = write_problem
        self._reading: dict[int, tuple[float, socket.socket]] = {}
        self._reading_lock = threading.Lock()
        self._header_timeout = _setting("GUNICORN_HEADER_TIMEOUT", 10)
        self._read_timeout = _setting("GUNICORN_READ_TIMEOUT", 30)
        threading.Thread(target=self._watch_heads, name="header-deadline", daemon=True).start()
        super().init_process()

    def load_wsgi(self) -> None:
        super().load_wsgi()
        app = self.wsgi

        def closing(environ: dict[str, Any], start_response: Any) -> Any:
            """The app, closing the connection after an answer that left the body unread.

            gunicorn ignores a ``Connection: close`` header from the app, and would keep
            the connection alive, drain the unread body and sometimes close it anyway,
            under a client about to reuse it; the app sets :data:`CLOSE_AFTER` instead.
            """
            result = app(environ, start_response)
            if environ.get(CLOSE_AFTER):
                start_response.__self__.force_close()
            return result

        self.wsgi = closing

    def handle(self, conn: Any) -> Any:
        thread = threading.get_ident()
        with self._reading_lock:
            self._reading[thread] = (time.monotonic(), conn.sock)
        try:
            result = super().handle(conn)
        finally:
            with self._reading_lock:
                self._reading.pop(thread, None)
        return result

    def handle_request(self, req: Any, conn: Any) -> Any:
        # The head is read: from here the body's read timeout and the app's deadline
        # apply. (gunicorn made the socket blocking, without a timeout, to read the head.)
        with self._reading_lock:
            self._reading.pop(threading.get_ident(), None)
        conn.sock.settimeout(self._read_timeout)
        return super().handle_request(req, conn)

    def _watch_heads(self) -> None:
        while True:
            time.sleep(0.5)
            now = time.monotonic()
            with self._reading_lock:
                late = [
                    (thread, sock) for thread, (began, sock) in self._reading.items()
                    if now - began > self._header_timeout
                ]
                for thread, _ in late:
                    del self._reading[thread]
            for _, sock in late:
                _count(408)
                try:
                    # Without blocking: a client that reads nothing cannot hold this thread.
                    sock.send(problem_bytes(408, "Request Timeout"), socket.MSG_DONTWAIT)
                    # The blocked read in the request thread returns at once with no data,
                    # and gunicorn closes the connection as the client's disconnection.
                    sock.shutdown(socket.SHUT_RDWR)
                except OSError:
                    continue


def _setting(name: str, default: float) -> float:
    import os

    raw = os.environ.get(name)
    if raw is None:
        return default
    try:
        value = float(raw)
    except ValueError:
        raise SystemExit(f"{name}={raw[:40]!r}: must be a number of seconds") from None
    if not 0 < value <= 3600:
        raise SystemExit(f"{name}={raw[:40]!r}: must be above 0 and at most 3600")
    return value


def _escaped(value: Any) -> Any:
    """``value`` as the inside of a JSON string, ASCII only (other types unchanged).

    A quote is written ``\\u0022``: gunicorn puts a backslash before every ``"`` it finds,
    which would break the escape ``\\"``.
    """
    if not isinstance(value, str):
        return value
    return json.dumps(value)[1:-1].replace('\\"', "\\u0022")


class ServiceLogger(Logger):
    """gunicorn's logger, with every access-log value escaped."""

    def atoms(self, resp: Any, req: Any, environ: Any, request_time: Any) -> Any:
        atoms = super().atoms(resp, req, environ, request_time)
        return type(atoms)({key: _escaped(value) for key, value in atoms.items()})
