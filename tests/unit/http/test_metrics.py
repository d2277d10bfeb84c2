"""Prometheus metrics: requests by endpoint, method and status, latency, in flight.

The expected figures come from counting the requests the test itself sends; the
exposition is read back with the official client's own text parser.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from flask.testing import FlaskClient
from prometheus_client.parser import text_string_to_metric_families

from service import create_app
from service.settings import Settings
from service.web.metrics import MetricsDirectoryError


@pytest.fixture(autouse=True)
def _single_process(monkeypatch: pytest.MonkeyPatch) -> None:
    # These tests read the process's own values, as a single process serves them.
    monkeypatch.delenv("PROMETHEUS_MULTIPROC_DIR", raising=False)


def _samples(client: FlaskClient) -> dict[tuple[str, tuple[tuple[str, str], ...]], float]:
    response = client.get("/metrics")
    assert response.status_code == 200
    assert response.headers["Content-Type"].startswith("text/plain; version=0.0.4")
    return {
        (sample.name, tuple(sorted(sample.labels.items()))): sample.value
        for family in text_string_to_metric_families(response.get_data(as_text=True))
        for sample in family.samples
    }


def _count(samples: dict, endpoint: str, method: str, status: str) -> float:
    key = ("sampling_http_requests_total",
           (("endpoint", endpoint), ("method", method), ("status", status)))
    return samples.get(key, 0.0)


def test_requests_are_counted_by_endpoint_method_and_status(client: FlaskClient) -> None:
    before = _samples(client)
    for _ in range(3):
        assert client.post("/v1/sample-size", json={"tolerable_rate": 0.05}).status_code == 200
    assert client.post("/v1/sample-size", json={"tolerable_rate": 5}).status_code == 422
    assert client.get("/v1/no-such-path").status_code == 404
    after = _samples(client)
    for args, sent in [
        (("/v1/sample-size", "POST", "200"), 3),
        (("/v1/sample-size", "POST", "422"), 1),
        (("unmatched", "GET", "404"), 1),
    ]:
        assert _count(after, *args) - _count(before, *args) == sent


def test_latency_is_a_histogram_per_endpoint(client: FlaskClient) -> None:
    def count(samples: dict) -> float:
        key = ("sampling_http_request_duration_seconds_count",
               (("endpoint", "/v1/evaluation"), ("method", "POST")))
        return samples.get(key, 0.0)

    before = _samples(client)
    client.post("/v1/evaluation", json={"sample_size": 60, "deviations": 0})
    after = _samples(client)
    assert count(after) - count(before) == 1
    buckets = [(dict(labels)["le"], value) for (name, labels), value in after.items()
               if name == "sampling_http_request_duration_seconds_bucket"
               and dict(labels)["endpoint"] == "/v1/evaluation"]
    assert [le for le, _ in buckets][-1] == "+Inf"
    values = [value for _, value in buckets]
    assert values == sorted(values) and values[-1] == count(after)


def test_the_in_flight_gauge_counts_the_scrape_itself_and_nothing_left_over(
    client: FlaskClient,
) -> None:
    client.post("/v1/sample-size", json={"tolerable_rate": 5})
    client.get("/v1/no-such-path")
    assert _samples(client)[("sampling_http_requests_in_flight", ())] == 1


def test_openmetrics_when_the_scraper_asks_for_it(client: FlaskClient) -> None:
    openmetrics = "application/openmetrics-text; version=1.0.0"
    response = client.get("/metrics", headers={"Accept": openmetrics})
    assert response.headers["Content-Type"].startswith("application/openmetrics-text")
    assert response.get_data(as_text=True).endswith("# EOF\n")


def test_no_body_or_item_reaches_the_metrics(client: FlaskClient) -> None:
    selected = client.post("/v1/selection", json={
        "population": {"items": ["PO-NW-SECRET-0001", "PO-NW-SECRET-0002"]},
        "sample_size": 1, "seed": "metrics-check",
    })
    assert selected.status_code == 200
    assert "SECRET" not in client.get("/metrics").get_data(as_text=True)


def test_a_folder_named_after_the_client_was_imported_stops_start_up(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # This process imported the client without the variable, so its values are single
    # process: a scrape would read the (empty) folder and report nothing.
    monkeypatch.setenv("PROMETHEUS_MULTIPROC_DIR", str(tmp_path))
    with pytest.raises(MetricsDirectoryError, match="set after the Prometheus client"):
        create_app(Settings())


@pytest.mark.parametrize("make", ["missing", "file"])
def test_an_unusable_multiprocess_folder_stops_start_up(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, make: str
) -> None:
    target = tmp_path / "metrics"
    if make == "file":
        target.write_text("not a folder", encoding="utf-8")
    monkeypatch.setenv("PROMETHEUS_MULTIPROC_DIR", str(target))
    with pytest.raises(MetricsDirectoryError, match="PROMETHEUS_MULTIPROC_DIR"):
        create_app(Settings())
