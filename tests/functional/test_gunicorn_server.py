"""The real server: gunicorn with docker/gunicorn.conf.py, on a free 127.0.0.1 port."""

from __future__ import annotations

import os
import subprocess
import sys
from collections.abc import Iterator
from typing import Any

import pytest
import requests
import yaml
from prometheus_client.parser import text_string_to_metric_families
from scipy import stats

from service.web.openapi import build_yaml
from tests.functional.servers import (
    GUNICORN,
    HOST,
    ROOT,
    START_SECONDS,
    free_port,
    gunicorn_command,
    running_server,
)

pytestmark = pytest.mark.functional

REQUEST_SECONDS = 10.0


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """The real gunicorn with two workers; its base URL."""
    assert GUNICORN.exists(), f"gunicorn not found beside {sys.executable}"
    with running_server(tmp_path_factory.mktemp("gunicorn")) as running:
        yield running.url


@pytest.fixture
def http() -> Iterator[requests.Session]:
    with requests.Session() as session:
        yield session


def _post(http: requests.Session, url: str, body: Any) -> requests.Response:
    return http.post(url, json=body, timeout=REQUEST_SECONDS)


def test_health(server: str, http: requests.Session) -> None:
    response = http.get(f"{server}/v1/health", timeout=REQUEST_SECONDS)
    assert response.status_code == 200
    assert response.headers["Content-Type"].startswith("application/json")
    body = response.json()
    assert body["status"] == "ok"
    assert isinstance(body["version"], str) and body["version"]


def test_sample_size(server: str, http: requests.Session) -> None:
    response = _post(http, f"{server}/v1/sample-size",
                     {"tolerable_rate": 0.05, "expected_rate": 0.01})
    assert response.status_code == 200, response.text
    plan = response.json()
    # AICPA Audit Guide: Audit Sampling, table A-1 (recalled from memory): 93 items, 1 allowed.
    assert (plan["sample_size"], plan["allowed_deviations"]) == (93, 1)


def test_evaluation(server: str, http: requests.Session) -> None:
    response = _post(http, f"{server}/v1/evaluation",
                     {"sample_size": 100, "deviations": 2, "tolerable_rate": 0.07})
    assert response.status_code == 200, response.text
    result = response.json()
    # Clopper–Pearson upper bound, scipy.stats as reference library.
    assert result["upper_deviation_limit"] == pytest.approx(
        float(stats.beta.ppf(0.95, 3, 98)), rel=1e-12
    )
    assert result["conclusion"] == "supports_reliance"


def test_invalid_input_is_problem_details(server: str, http: requests.Session) -> None:
    response = _post(http, f"{server}/v1/sample-size", {"tolerable_rate": 5})
    assert response.status_code == 422
    assert response.headers["Content-Type"] == "application/problem+json"
    problem = response.json()
    assert {"type", "title", "status", "detail", "instance"} <= set(problem)
    assert problem["status"] == 422
    assert "percentage" in " ".join(problem["errors"]["tolerable_rate"])


def test_unknown_path_is_404(server: str, http: requests.Session) -> None:
    response = http.get(f"{server}/v1/nothing-here", timeout=REQUEST_SECONDS)
    assert response.status_code == 404
    assert response.headers["Content-Type"] == "application/problem+json"
    assert response.json()["status"] == 404


def test_body_over_the_limit_is_413(server: str, http: requests.Session) -> None:
    # Over the default 1 MiB limit, sent in chunks without a Content-Length.
    chunk = b" " * 65_536

    def body() -> Iterator[bytes]:
        yield b'{"tolerable_rate": 0.05'
        for _ in range(20):
            yield chunk
        yield b"}"

    response = http.post(
        f"{server}/v1/sample-size",
        data=body(),
        headers={"Content-Type": "application/json"},
        timeout=REQUEST_SECONDS,
    )
    assert response.status_code == 413
    assert response.headers["Content-Type"] == "application/problem+json"
    # The workers still answer.
    assert _post(http, f"{server}/v1/sample-size", {"tolerable_rate": 0.05}).status_code == 200


def test_openapi_document(server: str, http: requests.Session) -> None:
    response = http.get(f"{server}/openapi.yaml", timeout=REQUEST_SECONDS)
    assert response.status_code == 200
    assert response.headers["Content-Type"].startswith("application/yaml")
    assert response.content.decode("utf-8") == build_yaml()
    document = yaml.safe_load(response.content)
    assert document["openapi"].startswith("3.1")
    assert {"/v1/sample-size", "/v1/evaluation", "/v1/health"} <= set(document["paths"])


@pytest.mark.parametrize(
    ("name", "raw"),
    [("SAMPLING_MAX_BATCH_WORK", "lots"), ("SAMPLING_MAX_ITEM", "5"),
     ("SAMPLING_API_KEYS", "plain-key"), ("SAMPLING_CORS_ORIGINS", "example.com"),
     ("PROMETHEUS_MULTIPROC_DIR", "/proc/version")],
)
def test_a_bad_setting_stops_start_up_with_the_variable_named(name: str, raw: str) -> None:
    env = {**os.environ, "HOST": HOST, "PORT": str(free_port()), "WEB_CONCURRENCY": "1",
           name: raw}
    finished = subprocess.run(
        gunicorn_command(),
        cwd=ROOT,
        env=env,
        capture_output=True,
        timeout=START_SECONDS,
        check=False,
    )
    assert finished.returncode != 0
    output = finished.stderr.decode(errors="replace")
    assert name in output
    assert "Traceback" not in output


def test_request_id_headers_markdown_and_batch_through_the_server(
    server: str, http: requests.Session
) -> None:
    response = http.post(
        f"{server}/v1/sample-size",
        json={"tolerable_rate": 0.05},
        headers={"Accept": "text/markdown", "X-Request-ID": "functional-1"},
        timeout=REQUEST_SECONDS,
    )
    assert response.status_code == 200
    assert response.headers["Content-Type"] == "text/markdown; charset=utf-8"
    assert response.headers["X-Request-ID"] == "functional-1"
    assert response.headers["X-Content-Type-Options"] == "nosniff"
    assert response.headers["Cache-Control"] == "no-store"
    assert "| sample\\_size | 59 |" in response.text
    batch = http.post(
        f"{server}/v1/batch",
        json={"operations": [
            {"id": "a", "operation": "evaluation", "request": {"sample_size": 60, "deviations": 0}},
            {"id": "b", "operation": "nothing", "request": {}},
        ]},
        timeout=REQUEST_SECONDS,
    )
    assert [r["status"] for r in batch.json()["results"]] == [200, 422]
    assert http.get(f"{server}/v1/ready", timeout=REQUEST_SECONDS).json() == {"status": "ready"}


def test_metrics_count_requests_with_the_default_metrics_folder(
    server: str, http: requests.Session
) -> None:
    # The server was started without PROMETHEUS_MULTIPROC_DIR: the settings module makes
    # the folder, and must do so before the Prometheus client is imported.
    assert "PROMETHEUS_MULTIPROC_DIR" not in os.environ
    assert _post(http, f"{server}/v1/evaluation",
                 {"sample_size": 60, "deviations": 0}).status_code == 200
    text = http.get(f"{server}/metrics", timeout=REQUEST_SECONDS).text
    counted = {
        (sample.labels["endpoint"], sample.labels["status"]): sample.value
        for family in text_string_to_metric_families(text)
        for sample in family.samples
        if sample.name == "sampling_http_requests_total"
    }
    assert counted.get(("/v1/evaluation", "200"), 0) >= 1


def test_one_json_log_line_per_request(tmp_path_factory: pytest.TempPathFactory) -> None:
    """The server logs each request once, as JSON; gunicorn's own access line is off."""
    import json

    with running_server(tmp_path_factory.mktemp("one-line"), workers=1) as running, \
            requests.Session() as session:
        for index in range(3):
            response = session.post(f"{running.url}/v1/sample-size", timeout=REQUEST_SECONDS,
                                    json={"tolerable_rate": 0.05},
                                    headers={"X-Request-ID": f"one-line-{index}"})
            assert response.status_code == 200
        log = running.log()
    for index in range(3):
        lines = [line for line in log.splitlines() if f"one-line-{index}" in line]
        assert len(lines) == 1, lines
        entry = json.loads(lines[0])
        assert entry["path"] == "/v1/sample-size" and entry["status"] == 200
