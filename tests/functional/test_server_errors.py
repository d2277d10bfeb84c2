"""What gunicorn answers itself, on the real server: problem+json, headers, one log line.

Malformed request lines, an over-long request line, too many header fields and a head
that stops arriving are answered before the app sees them; each answer is RFC 9457 problem
details with the documented security headers. With gunicorn's own access line on, a path
carrying control characters still gives one JSON line per line of log. A request still
computing at its deadline is stopped in its worker thread and answered 503.
"""

from __future__ import annotations

import json
import os
import re
import signal
import socket
import time
from collections.abc import Iterator

import pytest
import requests

from tests.functional.servers import Server, running_server, wait_until_healthy, worker_pids

HEADER_TIMEOUT = 1


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    env = {"GUNICORN_HEADER_TIMEOUT": str(HEADER_TIMEOUT), "GUNICORN_ACCESS_LOG": "1",
           "SAMPLING_REQUEST_DEADLINE": "0.05"}
    with running_server(tmp_path_factory.mktemp("server-errors"), env, workers=1) as running:
        yield running


def _exchange(server: Server, raw: bytes, wait: float = 5.0) -> bytes:
    host, port = server.url.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=wait) as sock:
        sock.sendall(raw)
        received = b""
        try:
            while chunk := sock.recv(65536):
                received += chunk
        except TimeoutError:
            pass
    return received


def _problem(answer: bytes, status: int) -> dict[str, object]:
    head, _, body = answer.partition(b"\r\n\r\n")
    lines = head.decode("latin-1").split("\r\n")
    assert lines[0].startswith(f"HTTP/1.1 {status} "), lines[0]
    headers = {k.lower(): v.strip() for k, _, v in (line.partition(":") for line in lines[1:])}
    assert headers["content-type"] == "application/problem+json"
    assert headers["x-content-type-options"] == "nosniff"
    assert headers["referrer-policy"] == "no-referrer"
    assert headers["content-security-policy"].startswith("default-src 'none'")
    assert headers["cache-control"] == "no-store"
    problem = json.loads(body)
    assert problem["status"] == status
    assert problem["request_id"] == headers["x-request-id"]
    return problem


@pytest.mark.parametrize(
    ("raw", "status"),
    [
        (b"NOT HTTP AT ALL\r\n\r\n", 400),
        (b"GET /v1/health HTTP/1.1\r\nHost: x\r\nBad Header\r\n\r\n", 400),
        (b"GET /" + b"a" * 9000 + b" HTTP/1.1\r\nHost: x\r\n\r\n", 414),
        (b"GET /v1/health HTTP/1.1\r\n" + b"".join(
            f"X-F{i}: 1\r\n".encode() for i in range(120)) + b"\r\n", 431),
    ],
)
def test_gunicorns_own_errors_are_problem_details(
    server: Server, raw: bytes, status: int
) -> None:
    problem = _problem(_exchange(server, raw), status)
    assert "AT ALL" not in str(problem["detail"])  # the client's bytes are not echoed


def test_a_head_that_stops_arriving_gets_408(server: Server) -> None:
    started = time.monotonic()
    answer = _exchange(server, b"GET /v1/health HTTP/1.1\r\nX-Slow: a", wait=HEADER_TIMEOUT + 5)
    _problem(answer, 408)
    assert time.monotonic() - started < HEADER_TIMEOUT + 4  # a hang guard, not a timing
    # The server still answers.
    assert requests.get(f"{server.url}/v1/health", timeout=5).status_code == 200


def test_each_log_line_is_one_json_object_whatever_the_path(server: Server) -> None:
    marker = f"m{time.monotonic_ns()}"
    requests.get(f"{server.url}/v1/{marker}%0A%7B%22forged%22:1%7D%0D%E2%80%A8%1B", timeout=5)
    time.sleep(0.5)
    lines = [line for line in server.log().splitlines() if marker in line]
    assert len(lines) == 2  # the app's line and gunicorn's own access line
    for line in lines:
        assert line.isascii()
        record = json.loads(line)
        assert "forged" not in record


def test_server_answers_are_counted_in_the_metrics(server: Server) -> None:
    _exchange(server, b"NOT HTTP AT ALL\r\n\r\n")
    text = requests.get(f"{server.url}/metrics", timeout=5).text
    counted = re.search(r'sampling_server_answers_total\{status="400"\} ([0-9.]+)', text)
    assert counted is not None and float(counted.group(1)) >= 1



def test_a_request_past_its_deadline_is_answered_503_by_a_live_worker(server: Server) -> None:
    body = {"margin": 0.003, "confidence": 0.95, "methods": ["exact"]}
    answer = requests.post(f"{server.url}/v1/estimation/sample-size", json=body, timeout=30)
    assert answer.status_code == 503
    assert answer.headers["Content-Type"] == "application/problem+json"
    assert answer.headers["Retry-After"] == "5"
    assert answer.json()["type"] == "/problems/deadline-exceeded"
    assert requests.get(f"{server.url}/v1/health", timeout=5).status_code == 200
    assert "Worker exiting" not in server.log() and "WORKER TIMEOUT" not in server.log()


def test_an_aborted_worker_is_counted_in_the_metrics(server: Server) -> None:
    # SIGABRT is what the master sends a worker that missed its timeout.
    (worker,) = worker_pids(server.process.pid)
    os.kill(worker, signal.SIGABRT)
    deadline = time.monotonic() + 20
    while worker in worker_pids(server.process.pid) or not worker_pids(server.process.pid):
        assert time.monotonic() < deadline, "the aborted worker was not replaced"
        time.sleep(0.1)
    wait_until_healthy(server)
    text = requests.get(f"{server.url}/metrics", timeout=5).text
    counted = re.search(r"^sampling_worker_aborts_total ([0-9.]+)$", text, re.MULTILINE)
    assert counted is not None and float(counted.group(1)) >= 1, text[-2000:]
