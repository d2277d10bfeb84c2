"""The test sheet's round trip through the real gunicorn server, over HTTP with requests:
select with attributes, download the sheet, complete it as a reviewer would (openpyxl),
send it back for evaluation, and compare with the evaluation of the same counts as JSON.

The scenario is invented: Harbour Lane Provisions Ltd's purchase orders 5001-5400.
"""

from __future__ import annotations

import io
import json
from collections.abc import Iterator

import openpyxl
import pytest
import requests

from tests.functional.servers import running_server

pytestmark = pytest.mark.functional

XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
SELECTION = {
    "population": {"ranges": [{"first": 5001, "last": 5400}], "exclude": [5013]},
    "sample_size": 25,
    "seed": "harbour-lane-2026-q4",
    "attributes": ["approved before release", "three-way match"],
}
RATES = {"approved before release": 0.1, "three-way match": 0.1}


@pytest.fixture(scope="module")
def url(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    with running_server(tmp_path_factory.mktemp("test-sheets")) as server:
        yield server.url


def _complete(sheet: bytes, deviation_row: int) -> bytes:
    workbook = openpyxl.load_workbook(io.BytesIO(sheet))
    tests = workbook["Tests"]
    for line in range(2, tests.max_row + 1):
        tests.cell(line, 4).value = "passed"
        tests.cell(line, 6).value = "deviation" if line == deviation_row else "passed"
    tests.cell(deviation_row, 7).value = "no goods received note on file"
    out = io.BytesIO()
    workbook.save(out)
    return out.getvalue()


def _evaluate(url: str, sheet: bytes, request: dict[str, object], accept: str) -> requests.Response:
    return requests.post(
        f"{url}/v1/evaluation",
        files={
            "file": ("completed.xlsx", sheet, XLSX),
            "request": (None, json.dumps(request), "application/json"),
        },
        headers={"Accept": accept},
        timeout=30,
    )


def test_select_download_fill_and_evaluate(url: str) -> None:
    downloaded = requests.post(
        f"{url}/v1/selection", json=SELECTION, headers={"Accept": XLSX}, timeout=30
    )
    assert downloaded.status_code == 200, downloaded.text
    assert downloaded.headers["Content-Type"] == XLSX
    completed = _complete(downloaded.content, deviation_row=7)

    answer = _evaluate(url, completed, {"tolerable_rates": RATES}, "application/json")
    assert answer.status_code == 200, answer.text
    document = answer.json()
    selection = requests.post(f"{url}/v1/selection", json=SELECTION, timeout=30).json()
    assert document["selection_fingerprint"] == selection["selection_fingerprint"]
    for evaluation, deviations in zip(document["evaluations"], (0, 1), strict=True):
        direct = requests.post(f"{url}/v1/evaluation", timeout=30, json={
            "population": {"size": 399}, "sample_size": 25, "deviations": deviations,
            "tolerable_rate": 0.1,
        }).json()
        counts = ("attribute", "passed", "deviations_found", "not_tested")
        assert {k: v for k, v in evaluation.items() if k not in counts} == direct

    workbook = _evaluate(url, completed, {"tolerable_rates": RATES}, XLSX)
    assert workbook.status_code == 200
    evaluated = openpyxl.load_workbook(io.BytesIO(workbook.content))
    assert evaluated.sheetnames[0] == "Evaluation"
    notes = [row[6].value for row in evaluated["Tests"].iter_rows(min_row=2)]
    assert "no goods received note on file" in notes


def test_a_tampered_sheet_is_refused_over_http(url: str) -> None:
    downloaded = requests.post(
        f"{url}/v1/selection", json=SELECTION, headers={"Accept": XLSX}, timeout=30
    )
    workbook = openpyxl.load_workbook(io.BytesIO(_complete(downloaded.content, 3)))
    workbook["Tests"].delete_rows(5)
    out = io.BytesIO()
    workbook.save(out)
    refused = _evaluate(url, out.getvalue(), {}, "application/json")
    assert refused.status_code == 422
    assert refused.headers["Content-Type"] == "application/problem+json"
    assert "missing 1: draw 4" in refused.json()["errors"]["file"][0]
