"""Metrics summed over two real gunicorn workers, and API keys on a real server."""

from __future__ import annotations

import hashlib
import re
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest
import requests
from prometheus_client.parser import text_string_to_metric_families

from tests.functional.servers import Server, running_server

pytestmark = pytest.mark.functional

REQUEST_SECONDS = 10.0
KEY = "northwind-scheduler-5d1e"
SIZING_REQUESTS = 60


@pytest.fixture(scope="module")
def metrics_server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[tuple[Server, Path]]:
    folder = tmp_path_factory.mktemp("metrics")
    with running_server(tmp_path_factory.mktemp("log"),
                        env={"PROMETHEUS_MULTIPROC_DIR": str(folder)}) as server:
        yield server, folder


def _sizing_count(url: str) -> float:
    text = requests.get(f"{url}/metrics", timeout=REQUEST_SECONDS).text
    for family in text_string_to_metric_families(text):
        for sample in family.samples:
            if (sample.name == "sampling_http_requests_total"
                    and sample.labels == {"endpoint": "/v1/sample-size", "method": "POST",
                                          "status": "200"}):
                return sample.value
    return 0.0


def test_every_scrape_counts_the_requests_of_both_workers(
    metrics_server: tuple[Server, Path],
) -> None:
    server, folder = metrics_server

    def size(_: int) -> int:
        return requests.post(f"{server.url}/v1/sample-size", json={"tolerable_rate": 0.05},
                             timeout=REQUEST_SECONDS).status_code

    # Eight clients at once keep both workers busy.
    with ThreadPoolExecutor(max_workers=8) as pool:
        statuses = list(pool.map(size, range(SIZING_REQUESTS)))
    assert statuses == [200] * SIZING_REQUESTS
    # Each process writes its own counter file, named after its pid.
    pids = {m.group(1) for f in folder.glob("counter_*.db")
            if (m := re.fullmatch(r"counter_(\d+)\.db", f.name))}
    assert len(pids) >= 2, f"only {pids} served requests"
    # Whichever worker answers the scrape, it reports the sum over both.
    assert [_sizing_count(server.url) for _ in range(6)] == [SIZING_REQUESTS] * 6


@pytest.fixture(scope="module")
def locked_server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    digest = "sha256:" + hashlib.sha256(KEY.encode()).hexdigest()
    with running_server(tmp_path_factory.mktemp("locked"),
                        env={"SAMPLING_API_KEYS": digest}) as server:
        yield server


def test_a_real_server_with_keys_refuses_without_one(locked_server: Server) -> None:
    url = f"{locked_server.url}/v1/sample-size"
    refused = requests.post(url, json={"tolerable_rate": 0.05}, timeout=REQUEST_SECONDS)
    assert refused.status_code == 401
    assert refused.headers["Content-Type"] == "application/problem+json"
    assert refused.headers["WWW-Authenticate"] == 'Bearer realm="attribute-sampling"'
    wrong = requests.post(url, json={"tolerable_rate": 0.05}, timeout=REQUEST_SECONDS,
                          headers={"Authorization": "Bearer not-the-key"})
    assert wrong.status_code == 401
    assert 'error="invalid_token"' in wrong.headers["WWW-Authenticate"]
    accepted = requests.post(url, json={"tolerable_rate": 0.05}, timeout=REQUEST_SECONDS,
                             headers={"Authorization": f"Bearer {KEY}"})
    assert accepted.status_code == 200
    # AICPA Audit Guide: Audit Sampling, table A-1 (recalled from memory): 59 items.
    assert accepted.json()["sample_size"] == 59
    assert requests.get(f"{locked_server.url}/v1/health", timeout=REQUEST_SECONDS).ok
    assert requests.get(f"{locked_server.url}/metrics", timeout=REQUEST_SECONDS).status_code == 401
    # The key never reaches the logs.
    assert KEY not in locked_server.log()
