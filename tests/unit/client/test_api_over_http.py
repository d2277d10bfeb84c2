"""The client over real sockets, against a tiny scripted HTTP server on 127.0.0.1."""

from __future__ import annotations

import json
import socket
import threading
from collections.abc import Iterator
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from typing import Any

import pytest

from sampling_client import AuthenticationFailed, SamplingClient, ServiceUnavailable

KEY = "nt-stub-key"


class Script:
    """The answers the stub gives, in order, and the headers of each request it got."""

    def __init__(self) -> None:
        self.answers: list[tuple[int, dict[str, str], dict[str, Any]]] = []
        self.seen: list[dict[str, str]] = []


@pytest.fixture
def stub() -> Iterator[tuple[str, Script]]:
    script = Script()

    class Handler(BaseHTTPRequestHandler):
        def do_POST(self) -> None:
            length = int(self.headers.get("Content-Length", "0"))
            self.rfile.read(length)
            script.seen.append(dict(self.headers))
            status, headers, body = script.answers.pop(0)
            data = json.dumps(body).encode()
            self.send_response(status)
            for name, value in {"Content-Type": "application/json", **headers}.items():
                self.send_header(name, value)
            self.send_header("Content-Length", str(len(data)))
            self.end_headers()
            self.wfile.write(data)

        def log_message(self, *args: Any) -> None:  # keep the test output clean
            pass

    server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.server_address[1]}", script
    finally:
        server.shutdown()
        server.server_close()
        thread.join(timeout=5)


def test_a_503_then_an_answer_over_http(stub: tuple[str, Script]) -> None:
    url, script = stub
    script.answers = [(503, {"Retry-After": "0"}, {"title": "Service Unavailable"}),
                      (200, {}, {"sample_size": 59})]
    waits: list[float] = []
    with SamplingClient(url, api_key=KEY, backoff=0.01, sleep=waits.append) as client:
        assert client.sample_size(tolerable_rate=0.05) == {"sample_size": 59}
    assert len(script.seen) == 2
    assert all(headers["Authorization"] == f"Bearer {KEY}" for headers in script.seen)
    assert waits == [0.01]


def test_a_401_over_http(stub: tuple[str, Script]) -> None:
    url, script = stub
    script.answers = [(401, {"Content-Type": "application/problem+json",
                             "WWW-Authenticate": 'Bearer realm="attribute-sampling"'},
                       {"title": "Unauthorized", "status": 401, "detail": "needs a key"})]
    with SamplingClient(url) as client, pytest.raises(AuthenticationFailed) as caught:
        client.sample_size(tolerable_rate=0.05)
    assert caught.value.status == 401
    assert caught.value.challenge == 'Bearer realm="attribute-sampling"'
    assert "Authorization" not in script.seen[0]


def test_nothing_listening_over_http() -> None:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        closed = f"http://127.0.0.1:{sock.getsockname()[1]}"  # bound, never listening
        waits: list[float] = []
        with SamplingClient(closed, retries=2, sleep=waits.append) as client, pytest.raises(
            ServiceUnavailable, match=f"at {closed} \\(connection refused; 3 tries\\)"
        ):
            client.health()
    assert waits == [0.2, 0.4]
