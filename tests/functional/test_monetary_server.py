"""Monetary-unit sampling through the real gunicorn server on a loopback port."""

from __future__ import annotations

import csv
import io
import json
import sys
import xml.etree.ElementTree as ET
from collections.abc import Iterator
from pathlib import Path

import pytest
import requests

from tests.functional.servers import GUNICORN, ROOT, running_server

pytestmark = pytest.mark.functional

SECONDS = 10.0
EXAMPLES = Path(ROOT) / "examples"


@pytest.fixture(scope="module")
def url(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    assert GUNICORN.exists(), f"gunicorn not found beside {sys.executable}"
    with running_server(tmp_path_factory.mktemp("gunicorn-monetary"), workers=1) as server:
        yield server.url


def test_plan_select_and_evaluate_over_http(url: str) -> None:
    with requests.Session() as http:
        # Worked example recalled from memory: BV 2,500,000, TM 125,000, 95% -> 60 items.
        plan = http.post(f"{url}/v1/monetary/sample-size", timeout=SECONDS,
                         json={"book_value": "2500000.00", "tolerable_misstatement": 125000})
        assert plan.status_code == 200
        assert plan.json()["sample_size"] == 60
        assert plan.json()["sampling_interval"] == "41666.67"

        body = json.loads((EXAMPLES / "kestrel-receivables.json").read_text())
        chosen = http.post(f"{url}/v1/monetary/selection", json=body, timeout=SECONDS)
        assert chosen.status_code == 200
        # The README's published test vector.
        assert [item["units"][0] for item in chosen.json()["items"]] == [
            265004, 1683064, 3101123, 4519183, 5937243]
        sheet = http.post(f"{url}/v1/monetary/selection", json=body, timeout=SECONDS,
                          headers={"Accept": "text/csv"})
        rows = list(csv.DictReader(io.StringIO(sheet.text.removeprefix("\ufeff"))))
        assert [r["item"] for r in rows if r["selection"] == "sampled"] == [
            item["id"] for item in chosen.json()["items"]]

        evaluation = json.loads((EXAMPLES / "kestrel-evaluation.json").read_text())
        result = http.post(f"{url}/v1/monetary/evaluation", json=evaluation, timeout=SECONDS)
        assert result.status_code == 200
        stringer = next(row for row in result.json()["limits"]
                        if row["direction"] == "overstatement" and row["method"] == "stringer")
        # By hand: 2,500,000 / 93 x (2.9957 + 1.7482 x 0.5 + 1.5519 x 0.2) = about 112,370.
        assert float(stringer["upper_misstatement_limit"]) == pytest.approx(112_370, abs=5)
        chart = http.post(f"{url}/v1/monetary/evaluation", json=evaluation, timeout=SECONDS,
                          headers={"Accept": "image/svg+xml"})
        assert chart.headers["Content-Type"].startswith("image/svg+xml")
        ET.fromstring(chart.text)  # noqa: S314 - the service's own output


def test_bad_amount_is_a_problem_naming_the_field(url: str) -> None:
    answer = requests.post(f"{url}/v1/monetary/evaluation", timeout=SECONDS, json={
        "book_value": "1000.00", "sample_size": 10,
        "misstatements": [{"id": "A", "book_amount": "ten", "audited_amount": 1}]})
    assert answer.status_code == 422
    assert answer.headers["Content-Type"] == "application/problem+json"
    assert "misstatements[0].book_amount" in answer.json()["errors"]


def test_a_ledger_file_and_its_test_sheet_through_the_client_and_command(
    url: str, tmp_path: Path
) -> None:
    import subprocess

    import openpyxl

    from sampling_client import SamplingClient
    from sampling_client.api import XLSX

    ledger = EXAMPLES / "kestrel-receivables-ledger.csv"
    request = {"population": {"file": {"id_column": "invoice", "amount_column": "balance"}},
               "sample_size": 8, "seed": "kestrel-valley-ar-2026-12"}
    with SamplingClient(url) as client:
        chosen = client.monetary_selection_from_file(ledger, request)
        # The README's published test vector, from the same items as a JSON list.
        assert chosen["selection_fingerprint"] == (
            "d1cd7d4483dd7f385157708c6d5eb64bb3592b430d5b9d9e471b8f882bbd6654")
        blank = tmp_path / "sheet.xlsx"
        blank.write_bytes(client.monetary_selection_from_file_as(XLSX, ledger, request))
        book = openpyxl.load_workbook(blank)
        tests = book["Tests"]
        at = {cell.value: cell.column for cell in tests[1]}
        for row in range(2, tests.max_row + 1):
            tests.cell(row, at["audited amount"], tests.cell(row, at["book amount"]).value)
        tests.cell(2, at["audited amount"], 55700.00)  # line 1: KV-0009, short by 500.00
        completed = tmp_path / "completed.xlsx"
        book.save(completed)
        evaluated = client.monetary_sheet_evaluation(completed, tolerable_misstatement="20000")
        assert evaluated["overstatement"]["known_misstatement"] == "500.00"
        assert evaluated["selection_fingerprint"] == chosen["selection_fingerprint"]

    command = [sys.executable, "-m", "sampling_client"]
    out = tmp_path / "by-command.xlsx"
    made = subprocess.run(
        [*command, "monetary-selection", "--url", url, "--file", str(ledger),
         "--id-column", "invoice", "--amount-column", "balance", "--sample-size", "8",
         "--seed", "kestrel-valley-ar-2026-12", "--xlsx", "--output", str(out)],
        cwd=ROOT, capture_output=True, timeout=60, check=False,
    )
    assert made.returncode == 0, made.stderr
    assert openpyxl.load_workbook(out)["Tests"].max_row == 9
    judged = subprocess.run(
        [*command, "monetary-evaluation", "--url", url, "--test-sheet", str(completed),
         "--tolerable-misstatement", "20000", "--json"],
        cwd=ROOT, capture_output=True, timeout=60, check=False,
    )
    assert judged.returncode == 0, judged.stderr
    assert json.loads(judged.stdout) == evaluated
    refused = subprocess.run(
        [*command, "monetary-evaluation", "--url", url, "--test-sheet", str(ledger)],
        cwd=ROOT, capture_output=True, timeout=60, check=False,
    )
    assert refused.returncode == 3
    assert b"not an XLSX workbook" in refused.stderr
