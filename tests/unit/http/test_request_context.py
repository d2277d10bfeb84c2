"""Request ids, security headers, JSON log lines, CORS and readiness."""

from __future__ import annotations

import io
import json
import logging
import re
from collections.abc import Iterator
from datetime import UTC, datetime
from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient

from service import create_app
from service.settings import Settings
from service.web.context import JsonFormatter

SIZE = "/v1/sample-size"
GOOD = {"tolerable_rate": 0.05}
HEX32 = re.compile(r"[0-9a-f]{32}")


@pytest.fixture
def log_lines() -> Iterator[io.StringIO]:
    """The service's log records, formatted as they are written, one per line."""
    stream = io.StringIO()
    handler = logging.StreamHandler(stream)
    handler.setFormatter(JsonFormatter())
    logger = logging.getLogger("service")
    logger.addHandler(handler)
    try:
        yield stream
    finally:
        logger.removeHandler(handler)


def _lines(stream: io.StringIO) -> list[dict[str, Any]]:
    return [json.loads(line) for line in stream.getvalue().splitlines()]


# --- request ids ------------------------------------------------------------------


def test_a_sane_request_id_is_echoed(client: FlaskClient) -> None:
    sent = "ticket-4711:run.2"
    response = client.post(SIZE, json=GOOD, headers={"X-Request-ID": sent})
    assert response.headers["X-Request-ID"] == sent


@pytest.mark.parametrize(
    "sent",
    ["", "has space", "x" * 129, "quote\"d", "semi;colon", "ünïcode", "new\\nline", "<tag>"],
)
def test_an_unusable_request_id_is_replaced_by_a_new_one(client: FlaskClient, sent: str) -> None:
    response = client.post(SIZE, json=GOOD, headers={"X-Request-ID": sent})
    assert HEX32.fullmatch(response.headers["X-Request-ID"])


def test_a_request_id_is_generated_when_none_is_sent(client: FlaskClient) -> None:
    first = client.post(SIZE, json=GOOD).headers["X-Request-ID"]
    second = client.post(SIZE, json=GOOD).headers["X-Request-ID"]
    assert HEX32.fullmatch(first) and HEX32.fullmatch(second)
    assert first != second


@pytest.mark.parametrize(
    ("method", "path", "kwargs", "status"),
    [
        ("post", SIZE, {"json": {"tolerable_rate": 5}}, 422),
        ("post", SIZE, {"data": "{", "content_type": "application/json"}, 400),
        ("post", SIZE, {"data": "x", "content_type": "text/plain"}, 415),
        ("post", SIZE, {"json": GOOD, "headers": {"Accept": "application/xml"}}, 406),
        ("get", SIZE, {}, 405),
        ("get", "/v1/nowhere", {}, 404),
    ],
)
def test_every_problem_body_carries_the_request_id(
    client: FlaskClient, method: str, path: str, kwargs: dict[str, Any], status: int
) -> None:
    headers = {**kwargs.pop("headers", {}), "X-Request-ID": "trace-1"}
    response = getattr(client, method)(path, headers=headers, **kwargs)
    assert response.status_code == status
    assert response.get_json()["request_id"] == "trace-1"
    assert response.headers["X-Request-ID"] == "trace-1"


def test_an_unexpected_error_carries_the_request_id_and_is_logged(
    app: Flask, log_lines: io.StringIO
) -> None:
    @app.get("/v1/broken-for-test")
    def broken() -> str:
        raise RuntimeError("secret " + "-".join(["internal", "detail"]))

    response = app.test_client().get("/v1/broken-for-test", headers={"X-Request-ID": "r-500"})
    assert response.status_code == 500
    assert response.get_json()["request_id"] == "r-500"
    error = next(line for line in _lines(log_lines) if line["level"] == "ERROR")
    assert error["request_id"] == "r-500"
    assert error["exception"] == "RuntimeError"
    assert "internal-detail" not in log_lines.getvalue()  # the message may hold data
    assert "broken" in error["stack"]


def test_batch_item_problems_carry_the_batch_request_id(client: FlaskClient) -> None:
    items = [{"id": "a", "operation": "sample-size", "request": {"tolerable_rate": 5}}]
    response = client.post(
        "/v1/batch", json={"operations": items}, headers={"X-Request-ID": "batch-7"}
    )
    assert response.get_json()["results"][0]["problem"]["request_id"] == "batch-7"


# --- log lines --------------------------------------------------------------------


def test_one_json_log_line_per_request_without_the_body(
    client: FlaskClient, log_lines: io.StringIO
) -> None:
    label = "Confidential supplier list"
    body = {"tolerable_rate": 0.05, "population": {"size": 600, "label": label}}
    client.post(SIZE + "?q=secret-query", json=body, headers={"X-Request-ID": "log-1"})
    client.post(SIZE, json={"tolerable_rate": 5}, headers={"X-Request-ID": "log-2"})
    lines = [line for line in _lines(log_lines) if line["message"] == "request"]
    assert [line["request_id"] for line in lines] == ["log-1", "log-2"]
    first = lines[0]
    assert list(first) == [
        "time", "level", "message", "request_id", "method", "path", "status", "duration_ms"
    ]
    assert first["method"] == "POST" and first["path"] == SIZE and first["status"] == 200
    assert first["level"] == "INFO"
    assert isinstance(first["duration_ms"], float) and first["duration_ms"] >= 0
    assert first["time"].endswith("+00:00")
    assert lines[1]["status"] == 422
    text = log_lines.getvalue()
    assert label not in text and "secret-query" not in text and "tolerable_rate" not in text


@pytest.mark.parametrize(
    "created",
    [0.0, 1764694800.0005, 1764694800.998999, 1764694800.9999996, 1764694801.5,
     2000000000.123456, 1764694799.9995],
)
def test_log_time_is_utc_iso_8601_to_the_millisecond(created: float) -> None:
    # The same text datetime.isoformat(timespec="milliseconds") gives (Python's own clock).
    formatter = JsonFormatter()
    for _ in range(2):  # the second time from the part kept for the second
        record = logging.LogRecord("service", logging.INFO, "", 0, "request", (), None)
        record.created = created
        expected = datetime.fromtimestamp(created, UTC).isoformat(timespec="milliseconds")
        assert json.loads(formatter.format(record))["time"] == expected


def test_selection_items_are_never_logged(client: FlaskClient, log_lines: io.StringIO) -> None:
    items = [f"VENDOR-{i}" for i in range(50)]
    body = {"population": {"items": items}, "sample_size": 5, "seed": "s"}
    assert client.post("/v1/selection", json=body).status_code == 200
    assert "VENDOR" not in log_lines.getvalue()


# --- security headers and CORS ------------------------------------------------------


@pytest.mark.parametrize(
    ("method", "path", "kwargs"),
    [
        ("post", SIZE, {"json": GOOD}),
        ("post", SIZE, {"json": GOOD, "headers": {"Accept": "text/markdown"}}),
        ("post", SIZE, {"json": {"tolerable_rate": 5}}),
        ("get", "/v1/health", {}),
        ("get", "/v1/ready", {}),
        ("get", "/v1/nowhere", {}),
    ],
)
def test_security_headers_on_every_response(
    client: FlaskClient, method: str, path: str, kwargs: dict[str, Any]
) -> None:
    response = getattr(client, method)(path, **kwargs)
    assert response.headers["X-Content-Type-Options"] == "nosniff"
    assert response.headers["Referrer-Policy"] == "no-referrer"
    assert response.headers["Content-Security-Policy"] == (
        "default-src 'none'; frame-ancestors 'none'"
    )
    assert response.headers["Cache-Control"] == "no-store"


def test_svg_chart_gets_its_own_policy(client: FlaskClient) -> None:
    response = client.post(
        "/v1/plans/curve",
        json={"sample_size": 60, "allowed_deviations": 1},
        headers={"Accept": "image/svg+xml"},
    )
    assert response.mimetype == "image/svg+xml"
    policy = response.headers["Content-Security-Policy"]
    assert policy == "default-src 'none'; style-src 'unsafe-inline'; frame-ancestors 'none'"
    assert "<script" not in response.get_data(as_text=True)
    assert response.headers["X-Content-Type-Options"] == "nosniff"
    assert response.headers["Cache-Control"] == "no-store"


def test_the_spec_may_be_cached_but_revalidated(client: FlaskClient) -> None:
    response = client.get("/openapi.yaml")
    assert response.headers["Cache-Control"] == "no-cache"
    assert response.headers["X-Content-Type-Options"] == "nosniff"


def test_cors_is_off(client: FlaskClient) -> None:
    origin = {"Origin": "https://elsewhere.example"}
    preflight = client.options(
        SIZE,
        headers={**origin, "Access-Control-Request-Method": "POST",
                 "Access-Control-Request-Headers": "content-type"},
    )
    answer = client.post(SIZE, json=GOOD, headers=origin)
    for response in (preflight, answer):
        names = [name.lower() for name, _ in response.headers.items()]
        assert not [name for name in names if name.startswith("access-control")]
        assert "x-request-id" in names  # the check sees the headers that are there


# --- readiness ----------------------------------------------------------------------


def test_ready_once_built(client: FlaskClient) -> None:
    response = client.get("/v1/ready")
    assert response.status_code == 200
    assert response.mimetype == "application/json"
    assert response.get_json() == {"status": "ready"}


def test_not_ready_answers_503() -> None:
    app = create_app(Settings())
    app.config["READY"] = False
    response = app.test_client().get("/v1/ready")
    assert response.status_code == 503
    assert response.get_json() == {"status": "starting"}


def test_ready_is_documented() -> None:
    import yaml

    from service.web.openapi import build_yaml

    spec = yaml.safe_load(build_yaml())
    responses = spec["paths"]["/v1/ready"]["get"]["responses"]
    assert responses["200"]["content"]["application/json"]["schema"]["$ref"].endswith("/Ready")
    assert "request_id" in spec["components"]["schemas"]["Problem"]["properties"]
