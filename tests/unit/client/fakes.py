"""Fake transports for the client: scripted answers, or the real app in process.

``ScriptedSession`` stands in for ``requests.Session``: each call takes the next scripted
outcome (an exception to raise, or a status, headers and body to answer) and records what
was sent. ``AppAdapter`` is a requests transport adapter that answers from the Flask
application through its test client, so the command line can be run end to end without a
server process.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from typing import Any
from urllib.parse import urlsplit

import requests
from flask import Flask
from requests.structures import CaseInsensitiveDict


def make_response(status: int, body: Any = b"", headers: dict[str, str] | None = None,
                  url: str = "http://127.0.0.1:8000/v1/sample-size") -> requests.Response:
    response = requests.Response()
    response.status_code = status
    response.url = url
    response._content_consumed = True  # as a real response whose body was read
    response.reason = {200: "OK", 401: "Unauthorized", 422: "UNPROCESSABLE ENTITY",
                       500: "INTERNAL SERVER ERROR", 503: "SERVICE UNAVAILABLE"}.get(status, "")
    if isinstance(body, dict | list):
        response._content = json.dumps(body).encode()
        kind = "application/problem+json" if status >= 400 else "application/json"
        response.headers = CaseInsensitiveDict({"Content-Type": kind, **(headers or {})})
    else:
        response._content = body if isinstance(body, bytes) else str(body).encode()
        response.headers = CaseInsensitiveDict(headers or {})
    return response


@dataclass
class ScriptedSession:
    """Answers each request with the next outcome of ``script``; records every call."""

    script: list[Any]
    calls: list[dict[str, Any]] = field(default_factory=list)
    closed: bool = False

    def request(self, method: str, url: str, **kwargs: Any) -> requests.Response:
        self.calls.append({"method": method, "url": url, **kwargs})
        outcome = self.script.pop(0)
        if isinstance(outcome, BaseException):
            raise outcome
        if isinstance(outcome, requests.Response):
            outcome.url = url
            return outcome
        status, body, headers = outcome
        return make_response(status, body, headers, url)

    def close(self) -> None:
        self.closed = True


class AppAdapter(requests.adapters.BaseAdapter):
    """A transport that answers from the Flask app in process; records the requests."""

    def __init__(self, app: Flask) -> None:
        super().__init__()
        self.client = app.test_client()
        self.sent: list[requests.PreparedRequest] = []
        self.timeouts: list[Any] = []

    def send(self, request: requests.PreparedRequest, stream: bool = False,
             timeout: Any = None, verify: Any = True, cert: Any = None,
             proxies: Any = None) -> requests.Response:
        self.sent.append(request)
        self.timeouts.append(timeout)
        parts = urlsplit(request.url or "")
        body = request.body
        if body is not None and not isinstance(body, bytes | str):
            body = b"".join(body)  # a streamed upload, read as the server would
        answer = self.client.open(parts.path, method=request.method, data=body,
                                  headers=dict(request.headers))
        response = make_response(answer.status_code, answer.data, dict(answer.headers),
                                 request.url or "")
        response.request = request
        return response

    def close(self) -> None:
        pass
