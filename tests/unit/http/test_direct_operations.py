"""Operations answered straight from WSGI give the answers the Flask views give.

Every request in the other test modules already goes through :mod:`service.http.direct`
(the app factory installs it); these tests compare it with the Flask view it stands in
front of, request for request, and check what it must leave to Flask and what it keeps.
"""

from __future__ import annotations

import hashlib
import json
from typing import Any

import pytest
from werkzeug.datastructures import Headers
from werkzeug.test import EnvironBuilder, run_wsgi_app

from service import create_app
from service.http import all_operations
from service.http.direct import AnswerMemo, DirectOperations
from service.settings import Settings
from tests.unit.http.test_markdown_api import EXAMPLES

KEY = "fictional-key-of-the-northwind-audit-team"


def _must_not_be_called(environ: dict[str, Any], start_response: Any) -> Any:
    raise AssertionError(f"deferred to Flask: {environ['REQUEST_METHOD']} {environ['PATH_INFO']}")


def _both(settings: Settings) -> tuple[Any, DirectOperations]:
    """The Flask app of ``settings`` (without the direct layer) and a direct layer that
    fails if it defers anything."""
    flask_app = create_app(settings).wsgi_app.flask  # type: ignore[attr-defined]
    return flask_app, DirectOperations(_must_not_be_called, all_operations(), settings)


def _call(wsgi: Any, **request: Any) -> tuple[str, Headers, bytes]:
    request.setdefault("method", "POST")
    headers = {"X-Request-ID": "direct-1", **request.pop("headers", {})}
    unknown_length = request.pop("unknown_length", False)
    length_text = request.pop("length_text", None)
    environ = EnvironBuilder(headers=headers, **request).get_environ()
    if unknown_length:
        # As a chunked body arrives: no Content-Length.
        del environ["CONTENT_LENGTH"]
    if length_text is not None:
        environ["CONTENT_LENGTH"] = length_text
    body, status, answer_headers = run_wsgi_app(wsgi, environ, buffered=True)
    return status, Headers(answer_headers), b"".join(body)


def _same_answer(flask_app: Any, direct: Any, **request: Any) -> tuple[str, bytes]:
    flask_status, flask_headers, flask_body = _call(flask_app, **request)
    status, headers, body = _call(direct, **request)
    assert status == flask_status
    assert body == flask_body
    assert sorted(headers.items()) == sorted(flask_headers.items())
    return status, body


def _operations() -> list[Any]:
    return [op for op in all_operations() if op.name in EXAMPLES]


@pytest.mark.parametrize("accept", ["application/json", "text/markdown", "", "*/*"])
@pytest.mark.parametrize("operation", _operations(), ids=lambda op: op.name)
def test_each_operation_answers_as_its_flask_view(operation: Any, accept: str) -> None:
    flask_app, direct = _both(Settings())
    body, _ = EXAMPLES[operation.name]
    headers = {"Accept": accept} if accept else {}
    status, _ = _same_answer(flask_app, direct, path=operation.path, json=body, headers=headers)
    assert status.startswith("200")


_LABELLED = '{"tolerable_rate": 0.05, "population": {"size": 4200, "label": %s}}'

PROBLEMS = [
    pytest.param({"json": {"tolerable_rate": 5}}, "422", id="invalid-input"),
    pytest.param({"data": "{", "content_type": "application/json"}, "400", id="malformed"),
    pytest.param({"data": '{"a": 1, "a": 2}', "content_type": "application/json"}, "400",
                 id="duplicate-key"),
    pytest.param({"json": {"tolerable_rate": 0.05, "population": {"label": "x\ud800"}}},
                 "422", id="lone-surrogate"),
    # A lone surrogate can only be spelled by a \u escape, in either case; the same
    # code points as UTF-8 bytes are not UTF-8.
    pytest.param({"data": _LABELLED % '"x\\uDFFF"', "content_type": "application/json"},
                 "422", id="lone-surrogate-upper-case"),
    pytest.param({"data": _LABELLED % '"\\ud83d\\ude00"', "content_type": "application/json"},
                 "200", id="surrogate-pair"),
    pytest.param({"data": (_LABELLED % '"@"').encode().replace(b"@", b"\xed\xa0\x80"),
                  "content_type": "application/json"}, "400", id="surrogate-bytes"),
    pytest.param({"json": {"tolerable_rate": 0.05, "expected_rate": 0.05}}, "422",
                 id="expected-not-below-tolerable"),
    pytest.param({"json": {"tolerable_rate": 0.05}, "content_type": "application/problem+json"},
                 "200", id="json-suffix-type"),
    pytest.param({"data": "", "content_type": "application/json", "content_length": 0}, "400",
                 id="empty-body"),
    pytest.param({"data": b"\xff{}", "content_type": "application/json"}, "400",
                 id="not-utf-8"),
]


@pytest.mark.parametrize(("request_args", "status"), PROBLEMS)
def test_problems_are_the_flask_views_problems(request_args: dict[str, Any], status: str) -> None:
    flask_app, direct = _both(Settings())
    answered, _ = _same_answer(flask_app, direct, path="/v1/sample-size", **request_args)
    assert answered.startswith(status)


def test_an_unexpected_error_is_a_500_problem_logged_with_the_request_id(
    monkeypatch: pytest.MonkeyPatch, caplog: pytest.LogCaptureFixture
) -> None:
    from service.http import operations

    def broken(*args: Any, **kwargs: Any) -> Any:
        raise RuntimeError("internal detail")

    flask_app, direct = _both(Settings())
    monkeypatch.setattr(operations, "run", broken)
    with caplog.at_level("ERROR", logger="service.web.problems"):
        status, body = _same_answer(
            flask_app, direct, path="/v1/sample-size", json={"tolerable_rate": 0.05}
        )
    assert status.startswith("500")
    problem = json.loads(body)
    assert problem["request_id"] == "direct-1" and "internal detail" not in body.decode()
    errors = [record for record in caplog.records if record.levelname == "ERROR"]
    assert len(errors) == 2  # one from each way
    assert all(record.exc_info and record.exc_info[0] is RuntimeError for record in errors)


def test_too_much_work_is_refused_alike() -> None:
    flask_app, direct = _both(Settings())
    body = {"margin": 0.002, "anticipated_rate": 0.1, "population": {"size": 10**9},
            "methods": ["exact"]}
    status, answer = _same_answer(
        flask_app, direct, path="/v1/estimation/sample-size", json=body
    )
    assert status.startswith("422")
    assert json.loads(answer)["type"] == "/problems/too-much-work"


@pytest.mark.parametrize(
    "authorization", [None, "Bearer wrong-key", f"Bearer {KEY}", "Basic abc"],
)
def test_api_keys_are_checked_alike(authorization: str | None) -> None:
    digest = hashlib.sha256(KEY.encode()).digest()
    flask_app, direct = _both(Settings(api_keys=frozenset({digest})))
    headers = {} if authorization is None else {"Authorization": authorization}
    status, _ = _same_answer(
        flask_app, direct, path="/v1/evaluation", json=EXAMPLES["evaluation"][0],
        headers=headers,
    )
    assert status.startswith("200" if authorization == f"Bearer {KEY}" else "401")


@pytest.mark.parametrize("origin", [None, "https://audit.northwind.example", "https://other.example"])
@pytest.mark.parametrize("body", [{"tolerable_rate": 0.05}, {"tolerable_rate": 5}])
def test_cors_headers_alike(origin: str | None, body: dict[str, Any]) -> None:
    flask_app, direct = _both(Settings(cors_origins=("https://audit.northwind.example",)))
    headers = {} if origin is None else {"Origin": origin}
    _same_answer(flask_app, direct, path="/v1/sample-size", json=body, headers=headers)


def test_an_unusable_request_id_is_replaced_both_ways() -> None:
    _, direct = _both(Settings())
    _, headers, body = _call(
        direct, path="/v1/sample-size", json={"tolerable_rate": 5},
        headers={"X-Request-ID": "has space"},
    )
    chosen = headers["X-Request-ID"]
    assert chosen != "has space" and len(chosen) == 32
    assert json.loads(body)["request_id"] == chosen


DEFERRED = [
    pytest.param({"method": "GET"}, id="other-method"),
    pytest.param({"path": "/v1/nowhere"}, id="unknown-path"),
    pytest.param({"path": "/v1/sample-size/"}, id="trailing-slash"),
    pytest.param({"headers": {"Accept": "application/xml"}}, id="accept-none-offered"),
    pytest.param({"headers": {"Accept": "text/markdown;q=0.9, application/json"}},
                 id="accept-ranked"),
    pytest.param({"data": "tolerable_rate=0.05", "content_type": "text/plain"},
                 id="not-json"),
    pytest.param({"headers": {"Content-Encoding": "gzip"}}, id="content-coding"),
    pytest.param({"data": {"request": json.dumps({"tolerable_rate": 0.05})}},
                 id="multipart"),
    pytest.param({"unknown_length": True}, id="no-content-length"),
    # A digit to str.isdigit, not to int(): a server that passed it on must not see a 500.
    pytest.param({"length_text": "\u00b2"}, id="superscript-length"),
    pytest.param({"length_text": "+24"}, id="signed-length"),
    pytest.param({"json": {"tolerable_rate": 0.05, "population": {"label": "x" * 2000}}},
                 id="over-the-body-limit"),
]


@pytest.mark.parametrize("overrides", DEFERRED)
def test_what_the_direct_layer_leaves_to_flask(overrides: dict[str, Any]) -> None:
    deferred: list[str] = []

    def flask_app(environ: dict[str, Any], start_response: Any) -> Any:
        deferred.append(environ["PATH_INFO"])
        start_response("204 NO CONTENT", [])
        return [b""]

    direct = DirectOperations(flask_app, all_operations(), Settings(max_body_bytes=1024))
    request: dict[str, Any] = {"path": "/v1/sample-size", "json": {"tolerable_rate": 0.05}}
    if "data" in overrides:
        request.pop("json")
    request.update(overrides)
    status, _, _ = _call(direct, **request)
    assert status.startswith("204")
    assert deferred == [request["path"]]


# --- the memo of answers -------------------------------------------------------------


def test_a_repeated_body_is_answered_from_the_memo_with_the_same_answer() -> None:
    flask_app, direct = _both(Settings())
    body = EXAMPLES["sample-size"][0]
    first = _call(direct, path="/v1/sample-size", json=body)
    assert len(direct.answers) == 1
    again = _call(direct, path="/v1/sample-size", json=body)
    assert len(direct.answers) == 1
    assert again[2] == first[2] == _call(flask_app, path="/v1/sample-size", json=body)[2]


def test_only_repeatable_json_successes_are_kept() -> None:
    _, direct = _both(Settings())
    # A selection without a seed draws one: its answer must not be given again.
    selection = {"population": {"size": 500}, "sample_size": 5}
    seeds = {
        json.loads(_call(direct, path="/v1/selection", json=selection)[2])["seed"]
        for _ in range(2)
    }
    assert len(seeds) == 2
    _call(direct, path="/v1/sample-size", json={"tolerable_rate": 5})
    _call(direct, path="/v1/sample-size", json=EXAMPLES["sample-size"][0],
          headers={"Accept": "text/markdown"})
    assert len(direct.answers) == 0


def test_every_repeatable_operation_answers_a_body_the_same_each_time() -> None:
    """The flag is a promise that the answer depends on the body alone."""
    flask_app = create_app(Settings()).wsgi_app.flask  # type: ignore[attr-defined]
    repeatable = [op for op in all_operations() if op.repeatable]
    assert {op.name for op in repeatable} >= {"sample-size", "evaluation"}
    for operation in repeatable:
        body = EXAMPLES[operation.name][0]
        answers = {_call(flask_app, path=operation.path, json=body)[2] for _ in range(2)}
        assert len(answers) == 1, operation.name


def test_the_memo_is_bounded_and_gives_up_the_oldest_first(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    monkeypatch.setattr(AnswerMemo, "ENTRIES", 3)
    memo = AnswerMemo()
    for i in range(5):
        memo.put("/v1/sample-size", b"%d" % i, b"answer %d" % i)
    assert len(memo) == 3
    assert memo.get("/v1/sample-size", b"0") is None
    assert memo.get("/v1/sample-size", b"4") == b"answer 4"
    memo.put("/v1/sample-size", b"x" * (AnswerMemo.MAX_BODY + 1), b"long body")
    memo.put("/v1/sample-size", b"y", b"x" * (AnswerMemo.MAX_ANSWER + 1))
    assert len(memo) == 3 and memo.get("/v1/sample-size", b"y") is None
