"""The client over fake transports: what it sends, what it raises, when it tries again."""

from __future__ import annotations

import ast
from pathlib import Path
from typing import Any

import pytest
import requests

from sampling_client import api
from sampling_client.api import (
    OPERATION_PATHS,
    AuthenticationFailed,
    RequestRejected,
    SamplingClient,
    ServiceError,
    ServiceUnavailable,
    UnexpectedAnswer,
)
from service.http import all_operations
from tests.unit.client.fakes import ScriptedSession, make_response

URL = "http://127.0.0.1:8000"
PLAN = {"sample_size": 93, "allowed_deviations": 1}
INVALID = {
    "type": "/problems/invalid-input", "title": "Invalid input", "status": 422,
    "detail": "tolerable_rate: must be a fraction strictly between 0 and 1; got 5",
    "errors": {"tolerable_rate": ["must be a fraction strictly between 0 and 1; got 5"],
               "population.size": ["must be at least 1"]},
    "request_id": "wp-17",
}


def client_with(*script: Any, **kwargs: Any) -> tuple[SamplingClient, ScriptedSession, list[float]]:
    session = ScriptedSession(list(script))
    waits: list[float] = []
    client = SamplingClient(URL, session=session, sleep=waits.append,  # type: ignore[arg-type]
                            **kwargs)
    return client, session, waits


def refused() -> requests.ConnectionError:
    return requests.ConnectionError("HTTPConnectionPool: [Errno 111] Connection refused")


# ------------------------------------------------------------------ what is sent


def test_a_call_posts_json_with_the_timeout_and_returns_the_document() -> None:
    client, session, _ = client_with((200, PLAN, None), timeout=4.5)
    assert client.sample_size(tolerable_rate=0.05, population={"size": 4200}) == PLAN
    (call,) = session.calls
    assert call["method"] == "POST"
    assert call["url"] == f"{URL}/v1/sample-size"
    assert call["timeout"] == 4.5
    assert call["data"] == b'{"tolerable_rate": 0.05, "population": {"size": 4200}}'
    assert call["headers"]["Content-Type"] == "application/json"
    assert call["headers"]["Accept"] == "application/json"
    assert call["headers"]["User-Agent"].startswith("attribute-sampling-client/")
    assert "Authorization" not in call["headers"]
    assert call["allow_redirects"] is False


def test_a_call_can_give_its_own_timeout_and_request_id() -> None:
    client, session, _ = client_with((200, PLAN, None))
    client.call("sample-size", {"tolerable_rate": 0.05}, timeout=(1.0, 30.0),
                request_id="wp-2026-q3-17")
    assert session.calls[0]["timeout"] == (1.0, 30.0)
    assert session.calls[0]["headers"]["X-Request-ID"] == "wp-2026-q3-17"


def test_every_endpoint_method_goes_to_its_path() -> None:
    client, session, _ = client_with(*[(200, {}, None)] * 7)
    client.sample_size({"tolerable_rate": 0.05})
    client.evaluation(sample_size=60, deviations=0)
    client.selection(population={"size": 10}, sample_size=2)
    client.estimation_sample_size(margin=0.05)
    client.plan_curve(sample_size=59, allowed_deviations=0)
    client.plan_periodic(frequency="monthly", tolerable_rate=0.1)
    client.batch([])
    paths = [call["url"].removeprefix(URL) for call in session.calls]
    assert paths == ["/v1/sample-size", "/v1/evaluation", "/v1/selection",
                     "/v1/estimation/sample-size", "/v1/plans/curve", "/v1/plans/periodic",
                     "/v1/batch"]


def test_the_staged_strata_and_sequence_methods_go_to_their_paths() -> None:
    client, session, _ = client_with(*[(200, {}, None)] * 6,
                                     (200, b"<svg/>", {"Content-Type": "image/svg+xml"}))
    stages = [{"cumulative_sample_size": 59, "accept_if_at_most": 0, "fail_if_at_least": 1}]
    client.staged_plan(tolerable_rate=0.05)
    client.staged_evaluation(stages=stages, stage_reached=1, deviations=0)
    client.staged_curve(stages=stages)
    client.strata_evaluation(strata=[])
    client.evaluation(strata=[])
    client.sequence_evaluation(results=[False])
    assert client.staged_curve_svg(stages=stages) == "<svg/>"
    paths = [call["url"].removeprefix(URL) for call in session.calls]
    assert paths == ["/v1/plans/staged", "/v1/plans/staged/evaluation", "/v1/plans/staged/curve",
                     "/v1/evaluation/strata", "/v1/evaluation", "/v1/evaluation/sequence",
                     "/v1/plans/staged/curve"]
    assert session.calls[-1]["headers"]["Accept"] == "image/svg+xml"


def test_the_request_argument_and_keyword_fields_are_merged() -> None:
    client, session, _ = client_with((200, {}, None))
    client.evaluation({"sample_size": 60, "deviations": 2}, deviations=1)
    assert session.calls[0]["data"] == b'{"sample_size": 60, "deviations": 1}'


def test_the_api_key_is_sent_as_a_bearer_token_and_never_shown() -> None:
    client, session, _ = client_with((200, {}, None), api_key="k3y-Secret")
    client.health()
    assert session.calls[0]["headers"]["Authorization"] == "Bearer k3y-Secret"
    assert session.calls[0]["method"] == "GET"
    assert "k3y-Secret" not in repr(client)


@pytest.mark.parametrize("key", ["", "two words", "line\nbreak", "tab\t"])
def test_an_api_key_that_cannot_be_a_header_is_refused(key: str) -> None:
    with pytest.raises(ValueError, match="api_key"):
        SamplingClient(URL, api_key=key)


@pytest.mark.parametrize("url", ["127.0.0.1:8000", "ftp://host", "http://", "http://h/?q=1"])
def test_a_base_url_that_is_not_an_http_address_is_refused(url: str) -> None:
    with pytest.raises(ValueError, match="base_url"):
        SamplingClient(url)


@pytest.mark.parametrize("timeout", [0, -1, True, (1.0, 0)])
def test_a_timeout_that_is_not_positive_is_refused(timeout: Any) -> None:
    with pytest.raises(ValueError, match="timeout"):
        SamplingClient(URL, timeout=timeout)


def test_a_path_prefix_of_the_base_url_is_kept() -> None:
    session = ScriptedSession([(200, {}, None)])
    SamplingClient("https://audit.example.test/sampling/", session=session).health()  # type: ignore[arg-type]
    assert session.calls[0]["url"] == "https://audit.example.test/sampling/v1/health"


def test_nan_is_refused_before_anything_is_sent() -> None:
    client, session, _ = client_with()
    with pytest.raises(ValueError, match="NaN"):
        client.sample_size(tolerable_rate=float("nan"))
    assert session.calls == []


def test_text_answers_come_back_exactly() -> None:
    csv_text = "\ufeffdraw,item,position\r\n1,229,229\r\n"
    client, session, _ = client_with(
        (200, csv_text.encode("utf-8"), {"Content-Type": "text/csv; charset=utf-8"}),
        (200, b"### Sample size", {"Content-Type": "text/markdown; charset=utf-8"}),
    )
    assert client.selection_csv(population={"size": 500}, sample_size=1) == csv_text
    assert session.calls[0]["headers"]["Accept"] == "text/csv"
    assert client.markdown("sample-size", {"tolerable_rate": 0.05}) == "### Sample size"
    assert session.calls[1]["headers"]["Accept"] == "text/markdown"


def test_a_text_answer_of_another_type_is_unexpected() -> None:
    client, _, _ = client_with((200, PLAN, None))
    with pytest.raises(UnexpectedAnswer, match="not text/markdown"):
        client.markdown("sample-size", {"tolerable_rate": 0.05})


# ------------------------------------------------------------------ errors


def test_a_422_is_request_rejected_with_the_fields_and_their_messages() -> None:
    client, _, _ = client_with((422, INVALID, None))
    with pytest.raises(RequestRejected) as caught:
        client.sample_size(tolerable_rate=5)
    error = caught.value
    assert (error.status, error.title, error.request_id) == (422, "Invalid input", "wp-17")
    assert error.errors["tolerable_rate"] == ["must be a fraction strictly between 0 and 1; got 5"]
    assert error.problem["type"] == "/problems/invalid-input"
    assert "tolerable_rate: must be a fraction strictly between 0 and 1; got 5" in str(error)
    assert "population.size: must be at least 1" in str(error)
    assert not isinstance(error, AuthenticationFailed)


def test_a_4xx_without_problem_details_is_still_rejected_with_its_text() -> None:
    client, _, _ = client_with((404, b"<html>Not Found</html>", {"Content-Type": "text/html"}))
    with pytest.raises(RequestRejected) as caught:
        client.health()
    assert caught.value.status == 404
    assert caught.value.errors == {}
    assert "not problem details (text/html)" in str(caught.value)


@pytest.mark.parametrize(("key", "words"), [(None, "none was given"),
                                            ("wrong", "did not accept the API key")])
def test_a_401_is_authentication_failed_with_the_challenge(key: str | None, words: str) -> None:
    problem = {"type": "/problems/unauthorized", "title": "Unauthorized", "status": 401,
               "detail": "this service requires an API key"}
    client, session, _ = client_with(
        (401, problem, {"WWW-Authenticate": 'Bearer realm="attribute-sampling"'}), api_key=key)
    with pytest.raises(AuthenticationFailed) as caught:
        client.sample_size(tolerable_rate=0.05)
    assert isinstance(caught.value, RequestRejected)
    assert caught.value.challenge == 'Bearer realm="attribute-sampling"'
    assert words in str(caught.value)
    assert len(session.calls) == 1  # a refused key is not tried again


def test_a_success_that_is_not_json_is_an_unexpected_answer() -> None:
    client, _, _ = client_with((200, b"<html>router</html>", {"Content-Type": "text/html"}))
    with pytest.raises(UnexpectedAnswer, match="not JSON; is this the attribute sampling"):
        client.health()


def test_malformed_or_non_object_json_is_an_unexpected_answer() -> None:
    client, _, _ = client_with((200, b"{", {"Content-Type": "application/json"}),
                               (200, b"[1]", {"Content-Type": "application/json"}),
                               (200, b'{"a": NaN}', {"Content-Type": "application/json"}))
    for _ in range(3):
        with pytest.raises(UnexpectedAnswer):
            client.health()


def test_a_redirect_is_not_followed() -> None:
    client, _, _ = client_with((308, b"", {"Location": "https://elsewhere.test/v1/health"}))
    with pytest.raises(UnexpectedAnswer, match=r"redirect to https://elsewhere\.test"):
        client.health()


def test_every_error_shares_the_base_class() -> None:
    for kind in (RequestRejected, AuthenticationFailed, ServiceUnavailable, UnexpectedAnswer):
        assert issubclass(kind, ServiceError)


# ------------------------------------------------------------------ retries


def test_connection_errors_are_retried_with_exponential_backoff() -> None:
    client, session, waits = client_with(refused(), refused(), (200, PLAN, None),
                                         retries=3, backoff=0.2)
    assert client.sample_size(tolerable_rate=0.05) == PLAN
    assert len(session.calls) == 3
    assert waits == [0.2, 0.4]
    # The same body and headers each time.
    assert session.calls[0]["data"] == session.calls[2]["data"]


def test_the_backoff_is_bounded() -> None:
    client, _, waits = client_with(*[refused()] * 6, retries=5, backoff=1.0, max_backoff=3.0)
    with pytest.raises(ServiceUnavailable):
        client.health()
    assert waits == [1.0, 2.0, 3.0, 3.0, 3.0]


def test_connection_refused_after_the_retries_names_the_url() -> None:
    client, session, _ = client_with(refused(), refused(), retries=1)
    with pytest.raises(ServiceUnavailable) as caught:
        client.sample_size(tolerable_rate=0.05)
    text = str(caught.value)
    assert f"cannot reach the attribute sampling service at {URL}" in text
    assert "connection refused; 2 tries" in text
    assert (caught.value.status, caught.value.attempts) == (None, 2)
    assert len(session.calls) == 2


def test_a_connect_timeout_is_retried_and_reported() -> None:
    client, session, _ = client_with(requests.ConnectTimeout("x"), requests.ConnectTimeout("x"),
                                     retries=1, timeout=2.0)
    with pytest.raises(ServiceUnavailable, match="no connection within 2 s"):
        client.health()
    assert len(session.calls) == 2


def test_a_read_timeout_is_not_retried() -> None:
    # The service got the request and is computing: sending it again doubles the work.
    client, session, waits = client_with(requests.ReadTimeout("slow"), retries=3, timeout=3.0)
    with pytest.raises(ServiceUnavailable, match="no answer within 3 s"):
        client.selection(population={"size": 10**6}, sample_size=10**5)
    assert len(session.calls) == 1
    assert waits == []


def test_a_503_is_retried_honouring_retry_after() -> None:
    client, session, waits = client_with((503, b"", {"Retry-After": "2"}), (503, b"", None),
                                         (200, PLAN, None), retries=3, backoff=0.2)
    assert client.sample_size(tolerable_rate=0.05) == PLAN
    assert len(session.calls) == 3
    assert waits == [2.0, 0.4]


def test_a_retry_after_beyond_the_cap_ends_the_retries() -> None:
    client, session, waits = client_with((503, b"", {"Retry-After": "120"}), retries=3,
                                         max_retry_after=10.0)
    with pytest.raises(ServiceUnavailable, match="try again after 120") as caught:
        client.health()
    assert len(session.calls) == 1
    assert waits == []
    assert caught.value.status == 503


def test_a_lasting_503_is_service_unavailable_after_the_retries() -> None:
    problem = {"title": "Service Unavailable", "status": 503, "detail": "starting"}
    client, session, _ = client_with(*[(503, problem, None)] * 3, retries=2)
    with pytest.raises(ServiceUnavailable, match="HTTP 503 Service Unavailable after 3 tries"):
        client.ready()
    assert len(session.calls) == 3


@pytest.mark.parametrize("status", [500, 502, 504])
def test_other_server_errors_are_not_retried(status: int) -> None:
    problem = {"title": "Internal Server Error", "status": status,
               "detail": "the service failed to answer this request"}
    client, session, waits = client_with((status, problem, None), retries=3)
    with pytest.raises(ServiceUnavailable, match=f"HTTP {status}") as caught:
        client.sample_size(tolerable_rate=0.05)
    assert caught.value.status == status
    assert len(session.calls) == 1
    assert waits == []


@pytest.mark.parametrize("status", [400, 413, 422])
def test_client_errors_are_not_retried(status: int) -> None:
    client, session, waits = client_with((status, {**INVALID, "status": status}, None))
    with pytest.raises(RequestRejected):
        client.sample_size(tolerable_rate=5)
    assert len(session.calls) == 1
    assert waits == []


def test_no_retries_means_one_try() -> None:
    client, session, _ = client_with(refused(), retries=0)
    with pytest.raises(ServiceUnavailable, match="1 try"):
        client.health()
    assert len(session.calls) == 1


# ------------------------------------------------------------------ batch and operations


def test_a_long_batch_is_sent_in_chunks_and_the_results_joined() -> None:
    items = [{"id": f"c{i}", "operation": "sample-size", "request": {"tolerable_rate": 0.05}}
             for i in range(5)]
    answers = [(200, {"results": [{"id": item["id"], "status": 200} for item in chunk]}, None)
               for chunk in (items[0:2], items[2:4], items[4:5])]
    client, session, _ = client_with(*answers)
    document = client.batch(items, chunk_size=2)
    assert [r["id"] for r in document["results"]] == ["c0", "c1", "c2", "c3", "c4"]
    assert len(session.calls) == 3
    assert session.calls[2]["data"].count(b'"id"') == 1


def test_ids_must_be_unique_across_chunks() -> None:
    items = [{"id": "same", "operation": "sample-size", "request": {}}] * 3
    client, session, _ = client_with()
    with pytest.raises(ValueError, match=r"operations\[1\] repeats the id 'same'"):
        client.batch(items, chunk_size=2)
    assert session.calls == []


def test_the_default_chunk_is_the_service_default_batch_limit() -> None:
    from service.settings import Settings

    assert Settings().max_batch_operations == api.MAX_BATCH_OPERATIONS


def test_the_client_knows_the_path_of_every_operation_of_the_service() -> None:
    served = {op.name: op.path for op in all_operations()}
    assert served == OPERATION_PATHS


def test_an_operation_newer_than_the_client_is_found_in_the_spec() -> None:
    spec = (b"openapi: 3.1.0\npaths:\n  /v2/new-thing:\n    post:\n      operationId: new-thing\n"
            b"  /v1/health:\n    get:\n      operationId: health\n")
    client, session, _ = client_with((200, spec, {"Content-Type": "application/yaml"}),
                                     (200, {"ok": True}, None), (200, {"ok": True}, None))
    assert client.call("new-thing", {"x": 1}) == {"ok": True}
    assert client.call("new-thing", {"x": 2}) == {"ok": True}
    urls = [call["url"].removeprefix(URL) for call in session.calls]
    assert urls == ["/openapi.yaml", "/v2/new-thing", "/v2/new-thing"]  # the spec read once
    with pytest.raises(ValueError, match="no operation 'health-check'"):
        client.call("health-check", {})


def test_the_client_closes_only_a_session_it_made() -> None:
    session = ScriptedSession([])
    with SamplingClient(URL, session=session):  # type: ignore[arg-type]
        pass
    assert not session.closed
    made = SamplingClient(URL)
    made.close()


def test_a_prepared_fake_response_keeps_its_status() -> None:
    # Guards the fakes: a scripted Response object is passed through as it is.
    client, _, _ = client_with(make_response(422, INVALID))
    with pytest.raises(RequestRejected):
        client.health()


def test_the_client_module_needs_only_requests_and_the_standard_library() -> None:
    # The client is imported by programs that do not run the service: no Flask, no numpy.
    allowed = {"requests", "yaml", "sampling_client"}
    for name in ("api.py", "retrying.py"):
        source = (Path(api.__file__).parent / name).read_text(encoding="utf-8")
        imported = set()
        for node in ast.walk(ast.parse(source)):
            if isinstance(node, ast.Import):
                imported |= {alias.name.split(".")[0] for alias in node.names}
            elif isinstance(node, ast.ImportFrom) and node.module:
                imported.add(node.module.split(".")[0])
        import sys

        third_party = {m for m in imported if m not in sys.stdlib_module_names}
        assert third_party <= allowed, (name, third_party)
