"""Bad input through the Flask test client: every class answers problem details.

Each error is ``application/problem+json`` with type, title, status, detail and instance;
invalid input (422) adds ``errors`` keyed by the dotted field path, and the detail names
the field. Hostile bodies are answered quickly and leave the service able to answer the
next, ordinary request.
"""

from __future__ import annotations

import json
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import pytest

ROOT = Path(__file__).resolve().parents[3]
SIZE = "/v1/sample-size"
EVALUATION = "/v1/evaluation"
PROBLEM_KEYS = {"type", "title", "status", "detail", "instance"}
# Hang guard for hostile input, not a speed target.
FAST_SECONDS = 5.0

ORDINARY = {SIZE: {"tolerable_rate": 0.05}, EVALUATION: {"sample_size": 60, "deviations": 1}}


def _problem(response: Any, status: int, path: str) -> dict[str, Any]:
    """Check the problem-details envelope and return the body."""
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.headers["Content-Type"] == "application/problem+json"
    body = json.loads(response.get_data(as_text=True))
    assert set(body) >= PROBLEM_KEYS
    assert set(body) <= PROBLEM_KEYS | {"errors", "request_id"}
    assert body["request_id"] == response.headers["X-Request-ID"]
    assert body["status"] == status
    assert body["instance"] == path
    assert isinstance(body["title"], str) and body["title"]
    assert isinstance(body["detail"], str) and body["detail"]
    assert isinstance(body["type"], str) and body["type"]
    if status == 422:
        errors = body["errors"]
        assert errors and all(
            isinstance(messages, list) and messages and all(isinstance(m, str) for m in messages)
            for messages in errors.values()
        )
    else:
        assert "errors" not in body
    return body


def _post_raw(client: Any, path: str, data: bytes | str, content_type: str | None = None) -> Any:
    if content_type is None:
        return client.post(path, data=data)
    return client.post(path, data=data, content_type=content_type)


def _post_json_text(client: Any, path: str, text: str | bytes) -> Any:
    return client.post(path, data=text, content_type="application/json")


def _assert_ordinary_request_works(client: Any, path: str) -> None:
    response = client.post(path, json=ORDINARY[path])
    assert response.status_code == 200, response.get_data(as_text=True)


# --- 400: not strict JSON -----------------------------------------------------


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ('{"tolerable_rate": 0.05', "malformed JSON"),
        ("{tolerable_rate: 0.05}", "malformed JSON"),
        ("{'tolerable_rate': 0.05}", "malformed JSON"),
        ('{"tolerable_rate": 0.05,}', "malformed JSON"),
        ('{"tolerable_rate": 0.05} {}', "malformed JSON"),
        ("", "empty"),
        ("   \n", "empty"),
    ],
)
def test_malformed_json_is_400(client: Any, text: str, fragment: str) -> None:
    body = _problem(_post_json_text(client, SIZE, text), 400, SIZE)
    assert fragment in body["detail"]


@pytest.mark.parametrize(
    ("path", "text", "literal"),
    [
        (SIZE, '{"tolerable_rate": NaN}', "NaN"),
        (SIZE, '{"tolerable_rate": Infinity}', "Infinity"),
        (SIZE, '{"tolerable_rate": -Infinity}', "-Infinity"),
        (SIZE, '{"tolerable_rate": 0.05, "expected_rate": NaN}', "NaN"),
        (SIZE, '{"tolerable_rate": 1e400}', "1e400"),
        (EVALUATION, '{"sample_size": 60, "deviations": 0, "confidence": -1e400}', "1e400"),
        (EVALUATION, '{"sample_size": 1e400, "deviations": 0}', "1e400"),
    ],
)
def test_non_json_numbers_are_400(client: Any, path: str, text: str, literal: str) -> None:
    # NaN and Infinity are not JSON (RFC 8259 §6); 1e400 cannot be held as a finite number.
    body = _problem(_post_json_text(client, path, text), 400, path)
    assert literal in body["detail"]


@pytest.mark.parametrize(
    ("text", "key"),
    [
        ('{"tolerable_rate": 0.05, "tolerable_rate": 0.5}', "tolerable_rate"),
        ('{"tolerable_rate": 0.05, "population": {"size": 10, "size": 20}}', "size"),
    ],
)
def test_duplicate_keys_are_400(client: Any, text: str, key: str) -> None:
    body = _problem(_post_json_text(client, SIZE, text), 400, SIZE)
    assert repr(key) in body["detail"]
    assert "more than once" in body["detail"]


@pytest.mark.parametrize(
    "data",
    [
        b'{"tolerable_rate": 0.05, "population": {"size": 10, "label": "\xff"}}',
        b'{"tolerable_rate": 0.05, "population": {"size": 10, "label": "\xc3"}}',
        '{"tolerable_rate": 0.05}'.encode("utf-16"),
    ],
)
def test_invalid_utf8_is_400(client: Any, data: bytes) -> None:
    body = _problem(_post_json_text(client, SIZE, data), 400, SIZE)
    assert "UTF-8" in body["detail"]


# --- 415: not sent as JSON ----------------------------------------------------


@pytest.mark.parametrize(
    ("content_type", "data", "named"),
    [
        ("text/plain", '{"tolerable_rate": 0.05}', "text/plain"),
        ("application/x-www-form-urlencoded", "tolerable_rate=0.05", "x-www-form-urlencoded"),
        ("multipart/form-data; boundary=b", "--b--", "multipart/form-data"),
        (None, '{"tolerable_rate": 0.05}', "no Content-Type"),
    ],
)
@pytest.mark.parametrize("path", [SIZE, EVALUATION])
def test_body_not_sent_as_json_is_415(
    client: Any, path: str, content_type: str | None, data: str, named: str
) -> None:
    if path == EVALUATION and named == "multipart/form-data":
        # The evaluation also takes a completed test sheet as a multipart upload: an empty
        # one is refused for its two missing parts.
        body = _problem(_post_raw(client, path, data, content_type), 422, path)
        assert set(body["errors"]) == {"file", "request"}
        return
    body = _problem(_post_raw(client, path, data, content_type), 415, path)
    assert "application/json" in body["detail"]
    assert named in body["detail"]


# --- 413: body over the limit ---------------------------------------------------


@pytest.mark.parametrize("path", [SIZE, EVALUATION])
def test_body_over_the_limit_is_413(small_body_app: Any, path: str) -> None:
    client = small_body_app.test_client()
    limit = small_body_app.config["SETTINGS"].max_body_bytes
    # An otherwise valid request, only too long.
    request = {**ORDINARY[path], "population": {"size": 5000, "label": "L" * 200}}
    data = json.dumps(request)
    assert len(data.encode()) > limit
    body = _problem(_post_json_text(client, path, data), 413, path)
    assert "larger" in body["detail"]
    # A body under the limit is answered by the same application.
    _assert_ordinary_request_works(client, path)


def _as_streamed(app: Any) -> None:
    """Deliver request bodies as a server does for chunked uploads: no Content-Length."""
    inner = app.wsgi_app

    def streamed(environ: dict[str, Any], start_response: Any) -> Any:
        environ.pop("CONTENT_LENGTH", None)
        environ["HTTP_TRANSFER_ENCODING"] = "chunked"
        environ["wsgi.input_terminated"] = True
        return inner(environ, start_response)

    app.wsgi_app = streamed


@pytest.mark.parametrize(
    "data",
    [
        pytest.param(b'{"tolerable_rate": 0.05}' + b" " * 1000, id="valid-then-padding"),
        pytest.param(b'{"tolerable_rate": 0.05' + b" " * 1000 + b"}", id="padding-inside"),
    ],
)
def test_streamed_body_over_the_limit_is_413(small_body_app: Any, data: bytes) -> None:
    # Without a Content-Length the limit is met while reading; the body must still be
    # refused as too large, not cut at the limit and parsed (400) or answered (200).
    _as_streamed(small_body_app)
    client = small_body_app.test_client()
    assert len(data) > small_body_app.config["SETTINGS"].max_body_bytes
    _problem(_post_json_text(client, SIZE, data), 413, SIZE)
    _assert_ordinary_request_works(client, SIZE)


def test_streamed_body_of_exactly_the_limit_is_accepted(small_body_app: Any) -> None:
    _as_streamed(small_body_app)
    client = small_body_app.test_client()
    limit = small_body_app.config["SETTINGS"].max_body_bytes
    data = b'{"tolerable_rate": 0.05}'.ljust(limit)
    response = _post_json_text(client, SIZE, data)
    assert response.status_code == 200, response.get_data(as_text=True)


# --- 422: invalid input ---------------------------------------------------------

NOT_NUMBERS = [("a string", "0.05"), ("a boolean", True), ("null", None), ("an object", {})]


def _invalid_cases() -> list[Any]:
    cases: list[Any] = []

    def add(case_id: str, path: str, body: Any, field: str, *fragments: str) -> None:
        cases.append(pytest.param(path, body, field, fragments, id=case_id))

    # Missing required fields.
    add("missing-tolerable", SIZE, {"expected_rate": 0.01}, "tolerable_rate", "Missing")
    add("missing-sample-size", EVALUATION, {"deviations": 0}, "sample_size", "Missing")
    add("missing-deviations", EVALUATION, {"sample_size": 60}, "deviations", "Missing")
    add("missing-population-size", SIZE, {"tolerable_rate": 0.05, "population": {}},
        "population.size", "Missing")
    # Wrong types: no coercion of strings, booleans, null or objects.
    for kind, value in NOT_NUMBERS:
        add(f"tolerable-{kind}", SIZE, {"tolerable_rate": value}, "tolerable_rate")
        add(f"sample-size-{kind}", EVALUATION, {"sample_size": value, "deviations": 0},
            "sample_size")
    for kind, value in NOT_NUMBERS[:2]:
        add(f"tolerable-message-{kind}", SIZE, {"tolerable_rate": value}, "tolerable_rate",
            f"not {kind}")
    add("fractional-sample-size", EVALUATION, {"sample_size": 60.5, "deviations": 0},
        "sample_size", "whole number")
    add("population-size-string", SIZE, {"tolerable_rate": 0.05, "population": {"size": "100"}},
        "population.size", "not a string")
    add("method-number", SIZE, {"tolerable_rate": 0.05, "method": 1}, "method", "string")
    # Out of range.
    for value in (0, 1, -0.1, 0.0, 1.5):
        add(f"tolerable-{value}", SIZE, {"tolerable_rate": value}, "tolerable_rate",
            "between 0 and 1")
    for value in (0, 1, -0.5):
        add(f"confidence-{value}", SIZE, {"tolerable_rate": 0.05, "confidence": value},
            "confidence")
    add("expected-negative", SIZE, {"tolerable_rate": 0.05, "expected_rate": -0.01},
        "expected_rate")
    add("sample-size-zero", EVALUATION, {"sample_size": 0, "deviations": 0}, "sample_size",
        "at least 1")
    add("deviations-negative", EVALUATION, {"sample_size": 60, "deviations": -1}, "deviations",
        "at least 0")
    add("population-size-zero", SIZE, {"tolerable_rate": 0.05, "population": {"size": 0}},
        "population.size", "at least 1")
    # A rate given as a percentage.
    add("tolerable-percent", SIZE, {"tolerable_rate": 5}, "tolerable_rate", "percentage", "0.05")
    add("tolerable-percent-decimal", SIZE, {"tolerable_rate": 7.5}, "tolerable_rate",
        "percentage", "0.075")
    add("confidence-percent", SIZE, {"tolerable_rate": 0.05, "confidence": 95}, "confidence",
        "percentage", "0.95")
    add("evaluation-tolerable-percent", EVALUATION,
        {"sample_size": 60, "deviations": 0, "tolerable_rate": 5}, "tolerable_rate", "percentage")
    # A count too large to carry exactly in JSON clients.
    add("sample-size-10**400", EVALUATION, f'{{"sample_size": {10**400}, "deviations": 0}}',
        "sample_size", "at most")
    add("population-size-2**53", SIZE,
        {"tolerable_rate": 0.05, "population": {"size": 2**53}}, "population.size", "at most")
    # Unknown fields are refused, not ignored.
    add("unknown-field", SIZE, {"tolerable_rate": 0.05, "tolerable": 0.05}, "tolerable",
        "not a field")
    add("unknown-nested-field", EVALUATION,
        {"sample_size": 60, "deviations": 0, "population": {"size": 100, "colour": "red"}},
        "population.colour", "not a field")
    # Inconsistent inputs.
    add("expected-equals-tolerable", SIZE, {"tolerable_rate": 0.05, "expected_rate": 0.05},
        "expected_rate", "below")
    add("expected-above-tolerable", SIZE, {"tolerable_rate": 0.05, "expected_rate": 0.06},
        "expected_rate", "below")
    add("deviations-above-sample", EVALUATION, {"sample_size": 10, "deviations": 11},
        "deviations", "sample_size")
    add("sample-above-population", EVALUATION,
        {"sample_size": 60, "deviations": 0, "population": {"size": 59}}, "sample_size",
        "population.size")
    # Methods.
    add("method-unknown", SIZE, {"tolerable_rate": 0.05, "method": "normal"}, "method",
        "binomial", "hypergeometric", "poisson")
    add("method-unknown-evaluation", EVALUATION,
        {"sample_size": 60, "deviations": 0, "method": "Binomial"}, "method")
    add("hypergeometric-without-population", SIZE,
        {"tolerable_rate": 0.05, "method": "hypergeometric"}, "population.size", "population")
    add("hypergeometric-without-population-evaluation", EVALUATION,
        {"sample_size": 60, "deviations": 0, "method": "hypergeometric"}, "population.size",
        "population")
    # Plans the service cannot or will not size.
    add("plan-over-the-cap", SIZE, {"tolerable_rate": 0.07, "expected_rate": 0.0699},
        "expected_rate", "too close", "at most")
    add("population-too-small", SIZE,
        {"tolerable_rate": 0.05, "expected_rate": 0.01, "population": {"size": 10}},
        "expected_rate", "population of 10 items")
    # The body is JSON but not an object.
    for case_id, text in (("array", "[1, 2]"), ("string", '"0.05"'), ("number", "0.05"),
                          ("null", "null")):
        add(f"body-{case_id}", SIZE, text, "body", "JSON object")
    return cases


@pytest.mark.parametrize(("path", "body", "field", "fragments"), _invalid_cases())
def test_invalid_input_is_422_naming_the_field(
    client: Any, path: str, body: Any, field: str, fragments: tuple[str, ...]
) -> None:
    text = body if isinstance(body, str) else json.dumps(body)
    started = time.monotonic()
    response = _post_json_text(client, path, text)
    elapsed = time.monotonic() - started

    problem = _problem(response, 422, path)
    assert field in problem["errors"], problem["errors"]
    assert field in problem["detail"]
    message = " ".join(problem["errors"][field])
    for fragment in fragments:
        assert fragment in message
    assert elapsed < FAST_SECONDS


def test_several_invalid_fields_are_all_named(client: Any) -> None:
    body = {"sample_size": "sixty", "deviations": None, "colour": "red"}
    problem = _problem(_post_json_text(client, EVALUATION, json.dumps(body)), 422, EVALUATION)
    assert set(problem["errors"]) == {"sample_size", "deviations", "colour"}


@pytest.mark.parametrize("expected_rate", [1e-19, 5e-324])
def test_tiny_expected_rate_is_answered_not_a_server_error(
    client: Any, expected_rate: float
) -> None:
    # A valid request per the contract (0 ≤ expected_rate < tolerable_rate); it must get a
    # plan or a 422 explaining why not, never a 500.
    response = client.post(SIZE, json={"tolerable_rate": 0.05, "expected_rate": expected_rate})
    assert response.status_code in (200, 422), response.get_data(as_text=True)


# --- routing ------------------------------------------------------------------


@pytest.mark.parametrize("path", ["/v1", "/v1/sample_size", "/v2/sample-size", "/v1/health/"])
def test_unknown_path_is_404(client: Any, path: str) -> None:
    body = _problem(client.post(path, json={"tolerable_rate": 0.05}), 404, path)
    assert path in body["detail"]


@pytest.mark.parametrize(
    ("method", "path", "allowed"),
    [
        ("GET", SIZE, "POST"),
        ("PUT", SIZE, "POST"),
        ("DELETE", EVALUATION, "POST"),
        ("PATCH", EVALUATION, "POST"),
        ("POST", "/v1/health", "GET"),
        ("DELETE", "/openapi.yaml", "GET"),
        ("POST", "/", "GET"),
    ],
)
def test_wrong_verb_is_405_with_allow(client: Any, method: str, path: str, allowed: str) -> None:
    response = client.open(path, method=method)
    body = _problem(response, 405, path)
    assert allowed in {m.strip() for m in response.headers["Allow"].split(",")}
    assert method in body["detail"]


# --- hostile bodies: quick answers, and the service still works ---------------


def _timed(client: Any, path: str, text: str | bytes) -> tuple[Any, float]:
    started = time.monotonic()
    response = _post_json_text(client, path, text)
    return response, time.monotonic() - started


@pytest.mark.parametrize("path", [SIZE, EVALUATION])
@pytest.mark.parametrize(
    "text",
    [
        pytest.param("[" * 10_000 + "]" * 10_000, id="arrays"),
        pytest.param('{"a":' * 10_000 + "1" + "}" * 10_000, id="objects"),
        pytest.param('{"population": ' + "[" * 10_000 + "]" * 10_000 + "}", id="in-a-field"),
    ],
)
def test_deep_nesting_is_400(client: Any, path: str, text: str) -> None:
    response, elapsed = _timed(client, path, text)
    body = _problem(response, 400, path)
    assert "nested" in body["detail"]
    assert elapsed < FAST_SECONDS
    _assert_ordinary_request_works(client, path)


@pytest.mark.parametrize(
    ("path", "field"),
    [(SIZE, "tolerable_rate"), (EVALUATION, "sample_size"), (EVALUATION, "deviations")],
)
def test_long_array_where_a_number_is_expected_is_422(client: Any, path: str, field: str) -> None:
    body = {**ORDINARY[path], field: [0.05] * 100_000}
    response, elapsed = _timed(client, path, json.dumps(body))
    problem = _problem(response, 422, path)
    assert field in problem["errors"]
    assert "array" in " ".join(problem["errors"][field])
    # The answer does not repeat the 100,000 elements back.
    assert len(response.get_data()) < 2_000
    assert elapsed < FAST_SECONDS
    _assert_ordinary_request_works(client, path)


@pytest.mark.parametrize("path", [SIZE, EVALUATION])
def test_million_character_label_is_422(client: Any, path: str) -> None:
    body = {**ORDINARY[path], "population": {"size": 5000, "label": "N" * 1_000_000}}
    response, elapsed = _timed(client, path, json.dumps(body))
    problem = _problem(response, 422, path)
    assert "population.label" in problem["errors"]
    assert "200 characters" in " ".join(problem["errors"]["population.label"])
    assert len(response.get_data()) < 2_000
    assert elapsed < FAST_SECONDS
    _assert_ordinary_request_works(client, path)


# The largest population.size the contract accepts (2**53 − 1, see schemas.fields).
LARGEST_POPULATION = 2**53 - 1

_CHILD = """
import json, sys
from service import create_app
from service.settings import Settings
client = create_app(Settings()).test_client()
response = client.post(sys.argv[1], data=sys.argv[2], content_type="application/json")
print(json.dumps({"status": response.status_code, "body": response.get_json()}))
"""


@pytest.mark.parametrize(
    ("path", "body"),
    [
        (SIZE, {"tolerable_rate": 0.05, "population": {"size": LARGEST_POPULATION}}),
        (SIZE, {"tolerable_rate": 0.05, "expected_rate": 0.01,
                "population": {"size": LARGEST_POPULATION}}),
        (EVALUATION, {"sample_size": 100, "deviations": 2,
                      "population": {"size": LARGEST_POPULATION}}),
    ],
    ids=["zero-deviation-plan", "plan", "evaluation"],
)
def test_largest_accepted_population_is_answered_promptly(path: str, body: dict[str, Any]) -> None:
    # Run in a child process so that a computation that does not finish is stopped by the
    # timeout (a generous hang guard, including the child's start-up) instead of blocking.
    budget = 20
    try:
        completed = subprocess.run(
            [sys.executable, "-c", _CHILD, path, json.dumps(body)],
            cwd=ROOT,
            capture_output=True,
            text=True,
            timeout=budget,
            check=False,
        )
    except subprocess.TimeoutExpired:
        pytest.fail(f"POST {path} with population.size {LARGEST_POPULATION:,} got no answer "
                    f"within {budget} s")
    assert completed.returncode == 0, completed.stderr[-2000:]
    outcome = json.loads(completed.stdout.strip().splitlines()[-1])
    # Either an answer or a 422 saying the population is too large for the method.
    assert outcome["status"] in (200, 422), outcome
    if outcome["status"] == 422:
        assert "population.size" in outcome["body"]["errors"]
