"""The Python client against the real gunicorn server on a free 127.0.0.1 port."""

from __future__ import annotations

import csv
import hashlib
import io
import secrets
from collections.abc import Iterator

import pytest

from sampling_client import (
    AuthenticationFailed,
    RequestRejected,
    SamplingClient,
    ServiceUnavailable,
    api,
)
from service.sampling.wording import CAUTION
from tests.functional.servers import free_port, running_server

pytestmark = pytest.mark.functional

KEY = secrets.token_urlsafe(32)


@pytest.fixture(scope="module")
def client(tmp_path_factory: pytest.TempPathFactory) -> Iterator[SamplingClient]:
    with running_server(tmp_path_factory.mktemp("client")) as server, SamplingClient(
        server.url
    ) as client:
        yield client


@pytest.fixture(scope="module")
def keyed_url(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """A server that accepts only KEY, configured by the digest of the key."""
    digest = "sha256:" + hashlib.sha256(KEY.encode("utf-8")).hexdigest()
    with running_server(tmp_path_factory.mktemp("keyed"), env={"SAMPLING_API_KEYS": digest},
                        workers=1) as server:
        yield server.url


def test_published_sample_sizes(client: SamplingClient) -> None:
    # AICPA Audit Guide "Audit Sampling", table A-1 (recalled from memory), 5% risk of
    # overreliance, large population: tolerable 5%, expected 1% → 93 items, 1 deviation
    # allowed; tolerable 5%, expected 0 → 59 items, none allowed.
    plan = client.sample_size(tolerable_rate=0.05, expected_rate=0.01, confidence=0.95)
    assert (plan["sample_size"], plan["allowed_deviations"]) == (93, 1)
    plan = client.sample_size({"tolerable_rate": 0.05, "expected_rate": 0})
    assert (plan["sample_size"], plan["allowed_deviations"]) == (59, 0)


def test_evaluation_with_no_deviation(client: SamplingClient) -> None:
    result = client.evaluation(sample_size=59, deviations=0, tolerable_rate=0.05)
    # Clopper & Pearson (1934) with no deviation: the upper limit solves (1 − p)^n = 1 − c.
    assert result["upper_deviation_limit"] == pytest.approx(1 - 0.05 ** (1 / 59), rel=1e-12)
    assert result["conclusion"] == "supports_reliance"


def test_a_422_is_request_rejected_carrying_the_field_message(client: SamplingClient) -> None:
    with pytest.raises(RequestRejected) as caught:
        client.call("sample-size", {"tolerable_rate": 5}, request_id="nt-wp-2026-17")
    error = caught.value
    assert error.status == 422
    assert error.errors["tolerable_rate"] == [
        "must be a fraction strictly between 0 and 1; got 5, which looks like a percentage: "
        "rates are fractions, so 5% is 0.05"]
    assert error.request_id == "nt-wp-2026-17"
    assert "tolerable_rate: must be a fraction strictly between 0 and 1" in str(error)


def test_a_service_that_is_down_is_unavailable_with_a_clear_message() -> None:
    url = f"http://127.0.0.1:{free_port()}"  # nothing listens there
    with SamplingClient(url, retries=1, backoff=0.05) as down, pytest.raises(
        ServiceUnavailable
    ) as caught:
        down.sample_size(tolerable_rate=0.05)
    assert str(caught.value) == (
        f"cannot reach the attribute sampling service at {url} (connection refused; 2 tries)")
    assert caught.value.attempts == 2


def test_markdown_text(client: SamplingClient) -> None:
    text = client.markdown("sample-size", {"tolerable_rate": 0.05, "expected_rate": 0.01})
    assert text.startswith("### Sample size for a test of controls\n")
    assert "| sample\\_size | 93 |" in text
    assert text.rstrip("\n").endswith(f"> {CAUTION}")


def test_the_selection_csv_lists_the_json_selection(client: SamplingClient) -> None:
    request = {"population": {"ranges": [{"first": 10001, "last": 14200}],
                              "exclude": [10007, 10233]},
               "sample_size": 25, "seed": "northwind-2026-q3"}
    chosen = client.selection(request)
    text = client.selection_csv(request)
    assert text.startswith("\ufeffselection,")  # the header block, then the draws
    rows = list(csv.reader(io.StringIO(text.removeprefix("\ufeff"))))
    start = rows.index(["draw", "item", "position"]) + 1
    rows = rows[start:rows.index([], start)]
    assert rows == [[str(k), str(item), str(position)] for k, (item, position) in
                    enumerate(zip(chosen["items"], chosen["positions"], strict=True), 1)]


def test_a_chunked_batch_answers_as_single_calls(client: SamplingClient) -> None:
    requests_ = [{"tolerable_rate": rate, "expected_rate": 0.01} for rate in
                 (0.04, 0.05, 0.06, 0.07, 0.08)]
    items = [{"id": f"nt-{i}", "operation": "sample-size", "request": body}
             for i, body in enumerate(requests_)]
    document = client.batch(items, chunk_size=2)
    assert [r["id"] for r in document["results"]] == [item["id"] for item in items]
    for answer, body in zip(document["results"], requests_, strict=True):
        assert answer["result"] == client.sample_size(body)


def test_an_operation_the_client_does_not_list_is_found_in_the_spec(
    client: SamplingClient, monkeypatch: pytest.MonkeyPatch
) -> None:
    # As for an endpoint newer than the client: its path comes from GET /openapi.yaml.
    monkeypatch.delitem(api.OPERATION_PATHS, "plan-curve")
    with SamplingClient(client.base_url) as fresh:
        assert fresh.path_of("plan-curve") == "/v1/plans/curve"
        curve = fresh.call("plan-curve", {"sample_size": 59, "allowed_deviations": 0,
                                          "tolerable_rate": 0.05})
    # Binomial, no deviation allowed: P(X = 0) = 0.95^59 at the tolerable rate.
    assert curve["risk_of_overreliance"] == pytest.approx(0.95**59, rel=1e-12)


def test_health_and_ready(client: SamplingClient) -> None:
    assert client.health()["status"] == "ok"
    assert client.ready() == {"status": "ready"}


def test_without_a_key_the_keyed_service_refuses(keyed_url: str) -> None:
    with SamplingClient(keyed_url) as anonymous:
        assert anonymous.health()["status"] == "ok"  # health stays open
        with pytest.raises(AuthenticationFailed) as caught:
            anonymous.sample_size(tolerable_rate=0.05)
    assert caught.value.status == 401
    assert (caught.value.challenge or "").startswith("Bearer")
    assert "none was given" in str(caught.value)


def test_a_wrong_key_is_refused(keyed_url: str) -> None:
    with SamplingClient(keyed_url, api_key=KEY + "x") as wrong, pytest.raises(
        AuthenticationFailed, match="did not accept the API key"
    ):
        wrong.sample_size(tolerable_rate=0.05)


def test_the_right_key_is_accepted(keyed_url: str) -> None:
    with SamplingClient(keyed_url, api_key=KEY) as keyed:
        assert keyed.sample_size(tolerable_rate=0.05, expected_rate=0.01)["sample_size"] == 93
