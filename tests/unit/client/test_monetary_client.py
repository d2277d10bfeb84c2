"""The client's monetary-unit sampling methods, against the service itself (no sockets)."""

from __future__ import annotations

import csv
import io

import requests

from sampling_client import SamplingClient

URL = "http://127.0.0.1:8000"
LEDGER = [{"id": f"KV-{i:04d}", "amount": f"{100 + 37 * i}.25"} for i in range(1, 41)]


def client_of(session: requests.Session) -> SamplingClient:
    return SamplingClient(URL, session=session)


def test_monetary_sample_size(app_session: requests.Session) -> None:
    # Worked example recalled from memory: BV 2,500,000, TM 125,000, 95% -> 60 items.
    plan = client_of(app_session).monetary_sample_size(
        book_value="2500000.00", tolerable_misstatement=125000
    )
    assert plan["sample_size"] == 60 and plan["sampling_interval"] == "41666.67"


def test_monetary_selection_json_and_csv_agree(app_session: requests.Session) -> None:
    client = client_of(app_session)
    body = {"population": LEDGER, "sample_size": 8, "seed": "kestrel", "method": "cell"}
    chosen = client.monetary_selection(body)
    sheet = client.monetary_selection_csv(body)
    rows = list(csv.DictReader(io.StringIO(sheet.removeprefix("\ufeff"))))
    assert [row["item"] for row in rows if row["selection"] == "sampled"] == [
        item["id"] for item in chosen["items"]
    ]
    assert sum(item["hits"] for item in chosen["items"]) == 8


def test_monetary_evaluation(app_session: requests.Session) -> None:
    # Worked by hand: interval 10,000, taints 0.5 and 0.2 -> projected 7,000.
    result = client_of(app_session).monetary_evaluation(
        book_value="600000.00",
        sample_size=60,
        misstatements=[
            {"id": "A", "book_amount": "4000.00", "audited_amount": "2000.00"},
            {"id": "B", "book_amount": "5000.00", "audited_amount": "4000.00"},
        ],
    )
    assert result["overstatement"]["projected_misstatement"] == "7000.00"
    assert {row["method"] for row in result["limits"]} == {
        "stringer", "stringer_binomial", "cell", "betting"}
