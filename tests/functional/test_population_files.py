"""Population files through the real gunicorn server, uploaded with requests.

The server's temporary folder (TMPDIR) is one of the test's own, so the test can see
that no uploaded file or database is left behind once the answers are made.
"""

from __future__ import annotations

import csv
import io
import json
import sys
from collections.abc import Iterator
from decimal import Decimal
from pathlib import Path
from typing import Any

import pytest
import requests

from service.sampling.selection import ItemPopulation, select
from tests.functional.servers import GUNICORN, running_server

pytestmark = pytest.mark.functional
REQUEST_SECONDS = 30.0

# Fictional purchase orders of Harbour Lane Provisions Ltd.
ROWS = [
    (f"HLP-PO-{10000 + k}", f"2026-{1 + k % 12:02d}-{1 + k % 28:02d}",
     f"{(k * 7919) % 250000 / 100:.2f}", f"Vendor {k % 13}")
    for k in range(1, 401)
]
HEADER = ("doc_no", "posted", "amount", "vendor")


def _csv(rows: list[tuple[str, ...]]) -> bytes:
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(HEADER)
    writer.writerows(rows)
    return out.getvalue().encode()


@pytest.fixture(scope="module")
def temporary(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return tmp_path_factory.mktemp("server-tmp")


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory, temporary: Path) -> Iterator[str]:
    assert GUNICORN.exists(), f"gunicorn not found beside {sys.executable}"
    env = {"TMPDIR": str(temporary), "SAMPLING_MAX_FILE_BYTES": "200000"}
    with running_server(tmp_path_factory.mktemp("gunicorn"), env=env) as running:
        yield running.url


def _left_behind(temporary: Path) -> list[str]:
    """Upload folders and population databases still there (the metrics folder stays)."""
    return [p.name for p in temporary.iterdir() if p.name.startswith(
        ("sampling-upload-", "sampling-population-"))]


def _upload(url: str, request: dict[str, Any], content: bytes, **headers: str) -> Any:
    return requests.post(
        url,
        files={
            "file": ("orders.csv", content, "text/csv"),
            "request": (None, json.dumps(request), "application/json"),
        },
        headers=headers,
        timeout=REQUEST_SECONDS,
    )


def test_a_profile_reconciles_with_an_independent_total(server: str, temporary: Path) -> None:
    total = sum((Decimal(row[2]) for row in ROWS), Decimal(0))  # Python's decimal module
    request = {
        "population": {"file": {"id_column": "doc_no", "amount_column": "amount"}},
        "control_total": str(total),
        "control_count": len(ROWS),
        "strata": 3,
    }
    response = _upload(f"{server}/v1/populations/profile", request, _csv(ROWS))
    assert response.status_code == 200, response.text
    body = response.json()
    assert Decimal(body["amounts"]["total"]) == total
    assert body["reconciliation"]["reconciles"] is True
    assert sum(s["items"] for s in body["strata"]["strata"]) == sum(
        1 for row in ROWS if Decimal(row[2]) > 0
    )
    assert _left_behind(temporary) == []


def test_a_file_over_the_limit_is_413_and_leaves_nothing(server: str, temporary: Path) -> None:
    big = _csv(ROWS * 20)
    assert len(big) > 200_000
    request = {"population": {"file": {"id_column": "doc_no"}}}
    response = _upload(f"{server}/v1/populations/profile", request, big)
    assert response.status_code == 413
    assert response.headers["Content-Type"] == "application/problem+json"
    assert "SAMPLING_MAX_FILE_BYTES" in response.json()["detail"]
    assert _left_behind(temporary) == []


def test_a_request_part_that_is_not_json_is_400(server: str) -> None:
    response = requests.post(
        f"{server}/v1/populations/profile",
        files={"file": ("orders.csv", _csv(ROWS)), "request": (None, "id_column=doc_no")},
        timeout=REQUEST_SECONDS,
    )
    assert response.status_code == 400
    assert list(response.json()["errors"]) == ["request"]


def test_a_file_selection_matches_the_items_selection(server: str, temporary: Path) -> None:
    shuffled = sorted(ROWS, key=lambda row: row[3] + row[0][::-1])  # another row order
    request = {
        "population": {"file": {"id_column": "doc_no"}},
        "sample_size": 15,
        "seed": "harbour-lane-2026-q3",
    }
    response = _upload(f"{server}/v1/selection", request, _csv(shuffled))
    assert response.status_code == 200, response.text
    body = response.json()
    reference = select(ItemPopulation(tuple(r[0] for r in ROWS)), 15, "harbour-lane-2026-q3")
    assert tuple(body["items"]) == reference.items
    assert body["population_fingerprint"] == reference.population_fingerprint
    assert body["selection_fingerprint"] == reference.selection_fingerprint
    by_id = {row[0]: dict(zip(HEADER, row, strict=True)) for row in ROWS}
    assert body["records"] == [by_id[item] for item in body["items"]]
    assert _left_behind(temporary) == []
