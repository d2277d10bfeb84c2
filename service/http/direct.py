"""The contract's JSON operations answered straight from WSGI, ahead of Flask.

Most requests are a JSON body posted to one operation's path, answered in JSON. Flask's
routing, request and response objects and hooks cost several times the work of such a
request (``bench/echo_compare.py``; BENCHMARKS.md), so :class:`DirectOperations` answers it
itself, with the same steps as the Flask view (:func:`service.http.operations._view`) and
the same plumbing as the Flask hooks, through the functions both share:

- request id (:func:`service.web.context.choose_request_id`), security and cache headers
  (:func:`~service.web.context.answer_headers`) and the one log line
  (:func:`~service.web.context.log_request`);
- metrics (:func:`service.web.metrics.observe` and the in-flight gauge);
- API keys (:func:`service.web.access.key_problem`) and CORS
  (:class:`service.web.cors.CorsPolicy`);
- the request deadline, strict JSON, the schema, the cost budget, the core call and the
  rendering (:func:`service.http.operations.run` and ``Operation.render``), and problem
  details for every error.

Anything else goes to Flask unchanged, before any of the body is read: other paths and
methods, uploads (``multipart/form-data``), a body that is not JSON, has a content
coding, no ``Content-Length`` (chunked) or one over the limit, and an ``Accept`` header
other than empty, ``*/*`` or one of the operation's media types exactly. Flask then
answers as before (415, 413, 406 or the upload), so both ways give the same answers;
the tests run through this layer, as every request does.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable, Iterable
from typing import Any

from werkzeug.exceptions import ClientDisconnected
from werkzeug.http import HTTP_STATUS_CODES
from werkzeug.utils import get_content_type

from service.http import operations
from service.http.operations import JSON, Operation
from service.settings import Settings
from service.web import access, context, deadline, jsonio, metrics, problems
from service.web.cors import CorsPolicy
from service.web.problems import (
    CLOSE_AFTER,
    MALFORMED_BODY,
    PROBLEM_MEDIA_TYPE,
    SLOW_BODY,
    Problem,
)

WSGIApp = Callable[[dict[str, Any], Callable[..., Any]], Iterable[bytes]]

_ANY = "*/*"


def _status_line(status: int) -> str:
    return f"{status} {HTTP_STATUS_CODES.get(status, 'UNKNOWN').upper()}"


def _is_json(content_type: str) -> bool:
    mimetype = content_type.partition(";")[0].strip().lower()
    return operations.is_json(mimetype)


class AnswerMemo:
    """The last JSON answers of repeatable operations, by path and exact body bytes.

    Month-end traffic repeats a firm's standard requests, body for body. Only answers
    that depend on the body alone are kept (``Operation.repeatable``), only successes,
    only bodies up to :attr:`MAX_BODY` and answers up to :attr:`MAX_ANSWER` bytes, and at
    most :attr:`ENTRIES` of them (the oldest goes first): at most about 10 MiB a worker.
    A body that differs by one byte (a space, the order of its keys) is another entry.
    """

    ENTRIES = 512
    MAX_BODY = 4096
    MAX_ANSWER = 16384

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._answers: dict[tuple[str, bytes], bytes] = {}

    def get(self, path: str, body: bytes) -> bytes | None:
        if len(body) > self.MAX_BODY:
            return None
        return self._answers.get((path, body))

    def put(self, path: str, body: bytes, answer: bytes) -> None:
        if len(body) > self.MAX_BODY or len(answer) > self.MAX_ANSWER:
            return
        with self._lock:
            if len(self._answers) >= self.ENTRIES:
                del self._answers[next(iter(self._answers))]
            self._answers[(path, body)] = answer

    def __len__(self) -> int:
        return len(self._answers)


class DirectOperations:
    """WSGI middleware: answers ``POST`` JSON requests to the operations, defers the rest."""

    def __init__(self, flask: WSGIApp, declared: Iterable[Operation], settings: Settings):
        self.flask = flask
        self.settings = settings
        self.operations = {operation.path: operation for operation in declared}
        self.cors = CorsPolicy(settings.cors_origins)
        self.digests = settings.key_digests
        self.answers = AnswerMemo()

    def _media_type(self, operation: Operation, accept: str) -> str | None:
        if accept in ("", _ANY):
            return JSON
        return accept if accept in operation.media_types else None

    def _limit(self, operation: Operation) -> int:
        if operation.takes_item_lists:
            return self.settings.max_list_body_bytes
        return self.settings.max_body_bytes

    def __call__(
        self, environ: dict[str, Any], start_response: Callable[..., Any]
    ) -> Iterable[bytes]:
        operation = self.operations.get(environ.get("PATH_INFO", ""))
        if operation is None or environ.get("REQUEST_METHOD") != "POST":
            return self.flask(environ, start_response)
        media_type = self._media_type(operation, environ.get("HTTP_ACCEPT", ""))
        coding = environ.get("HTTP_CONTENT_ENCODING", "").strip().lower()
        declared = environ.get("CONTENT_LENGTH", "")
        if (
            media_type is None
            or coding not in ("", "identity")
            or not _is_json(environ.get("CONTENT_TYPE", ""))
            or not (declared.isascii() and declared.isdigit())
            or int(declared) > self._limit(operation)
        ):
            return self.flask(environ, start_response)
        return self._answer(operation, media_type, int(declared), environ, start_response)

    def _answer(
        self,
        operation: Operation,
        media_type: str,
        length: int,
        environ: dict[str, Any],
        start_response: Callable[..., Any],
    ) -> Iterable[bytes]:
        started = time.perf_counter()
        current_id = context.choose_request_id(environ.get("HTTP_X_REQUEST_ID", ""))
        gauge = metrics.instruments().in_flight
        gauge.inc()
        try:
            with context.direct_request(current_id):
                try:
                    status, headers, body = 200, self._success_headers(), self._work(
                        operation, media_type, length, environ
                    )
                    content_type = get_content_type(media_type, "utf-8")
                except Problem as problem:
                    status, headers, body = self._problem(problem, operation, environ)
                    content_type = PROBLEM_MEDIA_TYPE
                except Exception:
                    problems.logger.exception("unhandled error on POST %s", operation.path)
                    status, headers, body = self._problem(
                        Problem(
                            500, "Internal Server Error",
                            "the service failed to answer this request",
                        ),
                        operation, environ,
                    )
                    content_type = PROBLEM_MEDIA_TYPE
                mimetype = content_type.partition(";")[0]
                headers = [
                    ("Content-Type", content_type),
                    ("Content-Length", str(len(body))),
                    *headers,
                    *context.answer_headers(operation.path, mimetype, current_id),
                    *self.cors.headers(environ.get("HTTP_ORIGIN"), "POST", preflight=False),
                ]
                seconds = time.perf_counter() - started
                metrics.observe(operation.path, "POST", status, seconds)
                context.log_request(
                    current_id, "POST", operation.path, status, round(seconds * 1000, 3)
                )
        finally:
            gauge.dec()
        start_response(_status_line(status), headers)
        return [body]

    def _success_headers(self) -> list[tuple[str, str]]:
        return [("Vary", "Accept, Origin" if self.cors.enabled else "Accept")]

    def _work(
        self, operation: Operation, media_type: str, length: int, environ: dict[str, Any]
    ) -> bytes:
        settings = self.settings
        if self.digests:
            key = access.presented_key(environ.get("HTTP_AUTHORIZATION", ""))
            if (refused := access.key_problem(key, self.digests)) is not None:
                raise refused
        with deadline.guard(settings.request_deadline):
            data = self._read(environ, length)
            kept = operation.repeatable and media_type == JSON
            if kept and (answer := self.answers.get(operation.path, data)) is not None:
                return answer
            try:
                payload = jsonio.loads(data)
            except jsonio.JSONDecodeProblem as exc:
                raise Problem(400, "Malformed body", str(exc), MALFORMED_BODY) from None
            document, result = operations.run(
                operation, payload, settings, escaped=b"\\u" in data
            )
            body = operation.render(media_type, payload, document, result)
        answer = body.encode("utf-8") if isinstance(body, str) else body
        if kept:
            self.answers.put(operation.path, data, answer)
        return answer

    @staticmethod
    def _read(environ: dict[str, Any], length: int) -> bytes:
        try:
            data: bytes = environ["wsgi.input"].read(length) if length else b""
        except TimeoutError:
            raise SLOW_BODY from None
        if len(data) < length:
            raise Problem(400, "Bad Request", ClientDisconnected.description)
        return data

    def _problem(
        self, problem: Problem, operation: Operation, environ: dict[str, Any]
    ) -> tuple[int, list[tuple[str, str]], bytes]:
        if problem.status in (408, 413):
            environ[CLOSE_AFTER] = True
        headers = list(problem.headers.items())
        if self.cors.enabled:
            headers.append(("Vary", "Origin"))
        body = jsonio.dumps(problem.body(operation.path)).encode("utf-8")
        return problem.status, headers, body


def serve(flask: WSGIApp, declared: Iterable[Operation], settings: Settings) -> WSGIApp:
    """``flask`` with the operations in ``declared`` answered directly."""
    return DirectOperations(flask, declared, settings)
