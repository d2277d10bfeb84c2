"""Monetary-unit sampling endpoints through the Flask test client."""

from __future__ import annotations

import csv
import io
import json
from typing import Any

import pytest
from flask.testing import FlaskClient

SIZE = "/v1/monetary/sample-size"
SELECTION = "/v1/monetary/selection"
EVALUATION = "/v1/monetary/evaluation"

# Receivables of a fictional company, Kestrel Valley Foods Ltd.
LEDGER = [
    {"id": "KV-1001", "amount": "12500.00"},
    {"id": "KV-1002", "amount": 480.00},
    {"id": "KV-1003", "amount": "3125.50"},
    {"id": "KV-1004", "amount": 99.9},
    {"id": "KV-1005", "amount": "770.25"},
    {"id": "KV-1006", "amount": 0},
    {"id": "KV-1007", "amount": "-150.00"},
    {"id": "KV-1008", "amount": "2044.00"},
    {"id": "KV-1009", "amount": "56000.00"},
    {"id": "KV-1010", "amount": "1333.00"},
]


def post(client: FlaskClient, path: str, body: Any, accept: str = "application/json") -> Any:
    return client.post(path, json=body, headers={"Accept": accept})


def problem_fields(response: Any) -> dict[str, list[str]]:
    assert response.status_code == 422, response.get_data(as_text=True)
    assert response.headers["Content-Type"] == "application/problem+json"
    body = json.loads(response.get_data(as_text=True))
    return dict(body["errors"])


def test_sample_size_worked_example(client: FlaskClient) -> None:
    # Worked example recalled from memory: BV 2,500,000, TM 125,000, 95% -> 60 items,
    # interval 41,666.67.
    answer = post(client, SIZE, {"book_value": 2500000, "tolerable_misstatement": "125000"})
    assert answer.status_code == 200
    body = answer.get_json()
    assert body["sample_size"] == 60
    assert body["sampling_interval"] == "41666.67"
    assert body["sampling_interval_exact"] == "125000/3"
    assert body["individually_significant_threshold"] == "41666.67"
    assert "professional judgement" in body["summary"]


def test_expansion_factor_example(client: FlaskClient) -> None:
    # Recalled from memory: EM 27,722 with expansion factor 1.6 -> about 93 items.
    body = post(client, SIZE, {"book_value": 2500000, "tolerable_misstatement": 125000,
                               "expected_misstatement": 27722,
                               "method": "expansion_factor"}).get_json()
    assert body["sample_size"] == 93


@pytest.mark.parametrize(
    ("body", "field"),
    [
        ({"book_value": 100, "tolerable_misstatement": 100}, "tolerable_misstatement"),
        ({"book_value": 100, "tolerable_misstatement": 10, "expected_misstatement": 10},
         "expected_misstatement"),
        ({"book_value": -100, "tolerable_misstatement": 10}, "book_value"),
        ({"book_value": "1,000", "tolerable_misstatement": 10}, "book_value"),
        ({"book_value": True, "tolerable_misstatement": 10}, "book_value"),
        ({"book_value": 100, "tolerable_misstatement": 10.001}, "tolerable_misstatement"),
        ({"book_value": 1234567890123.456, "tolerable_misstatement": 10}, "book_value"),
        ({"book_value": 100, "tolerable_misstatement": 10, "method": "guess"}, "method"),
        ({"tolerable_misstatement": 10}, "book_value"),
    ],
)
def test_sample_size_bad_input_names_the_field(
    client: FlaskClient, body: dict[str, Any], field: str
) -> None:
    assert field in problem_fields(post(client, SIZE, body))


def test_selection_lists_items_hits_and_fingerprints(client: FlaskClient) -> None:
    body = post(client, SELECTION, {"population": LEDGER, "sample_size": 6,
                                    "seed": "kestrel-2026-ar"}).get_json()
    assert body["algorithm"] == "sha256-counter-monetary-units/v1"
    assert [i["id"] for i in body["individually_significant"]] == [
        "KV-1009", "KV-1001", "KV-1003", "KV-1008"]
    assert body["excluded_count"] == 2 and body["excluded_total"] == "-150.00"
    assert body["book_value"] == "76352.65"  # summed by hand from LEDGER's positive amounts
    assert sum(item["hits"] for item in body["items"]) == body["units_drawn"] == 2
    again = post(client, SELECTION, {"population": LEDGER[::-1], "sample_size": 6,
                                     "seed": "kestrel-2026-ar"}).get_json()
    assert again == body


def test_selection_as_a_csv_test_sheet(client: FlaskClient) -> None:
    answer = post(client, SELECTION, {"population": LEDGER, "sample_size": 6, "seed": "k"},
                  accept="text/csv")
    assert answer.headers["Content-Type"].startswith("text/csv")
    rows = list(csv.reader(io.StringIO(answer.get_data(as_text=True).removeprefix("\ufeff"))))
    assert rows[0] == ["selection", "item", "book_amount", "hits", "units", "audited_amount"]
    assert rows[1][:3] == ["individually significant", "KV-1009", "56000.00"]
    assert all(row[5] == "" for row in rows[1:])


def test_selection_markdown_carries_the_caution(client: FlaskClient) -> None:
    text = post(client, SELECTION, {"population": LEDGER, "sample_size": 6, "seed": "k"},
                accept="text/markdown").get_data(as_text=True)
    assert "professional judgement" in text and "| KV-1009 | 56000\\.00 |" in text


@pytest.mark.parametrize(
    ("body", "field"),
    [
        ({"population": [{"id": "A", "amount": "x"}], "sample_size": 1}, "population[0].amount"),
        ({"population": [{"id": "A", "amount": "1.234"}], "sample_size": 1},
         "population[0].amount"),
        ({"population": [{"id": "A"}], "sample_size": 1}, "population[0].amount"),
        ({"population": [{"id": 5, "amount": 1}], "sample_size": 1}, "population[0].id"),
        ({"population": [{"id": "A", "amount": 1}, {"id": "A", "amount": 2}],
          "sample_size": 1}, "population"),
        ({"population": [], "sample_size": 1}, "population"),
        ({"population": [{"id": "A", "amount": 0}], "sample_size": 1}, "population"),
        ({"population": [{"id": "A", "amount": 1}], "sample_size": 0}, "sample_size"),
        ({"population": [{"id": "A", "amount": 1}], "sample_size": 1, "method": "x"}, "method"),
    ],
)
def test_selection_bad_input_names_the_field(
    client: FlaskClient, body: dict[str, Any], field: str
) -> None:
    assert field in problem_fields(post(client, SELECTION, body))


STRINGER_EXAMPLE = {
    "book_value": "600000.00",
    "sample_size": 60,
    "misstatements": [
        {"id": "KV-2001", "book_amount": "4000.00", "audited_amount": "2000.00"},
        {"id": "KV-2002", "book_amount": 5000, "audited_amount": 4000},
    ],
    "tolerable_misstatement": 45000,
}


def test_evaluation_stringer_by_hand(client: FlaskClient) -> None:
    # Worked by hand: interval 10,000, taints 0.5 and 0.2 -> Stringer about 41,800,
    # projected 7,000.
    body = post(client, EVALUATION, STRINGER_EXAMPLE).get_json()
    assert body["overstatement"]["projected_misstatement"] == "7000.00"
    stringer = next(row for row in body["limits"]
                    if row["direction"] == "overstatement" and row["method"] == "stringer")
    assert float(stringer["upper_misstatement_limit"]) == pytest.approx(41_800, abs=10)
    assert stringer["conclusion"] == "within tolerable misstatement"
    assert body["net_most_likely_misstatement"] == "7000.00"
    assert "professional judgement" in body["summary"]


def test_evaluation_markdown_has_the_limits_table(client: FlaskClient) -> None:
    text = post(client, EVALUATION, STRINGER_EXAMPLE, accept="text/markdown").get_data(
        as_text=True)
    assert "| direction | method |" in text and "stringer\\_binomial" in text


@pytest.mark.parametrize(
    ("change", "field"),
    [
        ({"book_value": "-5"}, "book_value"),
        ({"sampling_interval": "9000.00"}, "sampling_interval"),
        ({"misstatements": [{"id": "A", "book_amount": "abc", "audited_amount": 1}]},
         "misstatements[0].book_amount"),
        ({"misstatements": [{"id": "A", "book_amount": 10, "audited_amount": None}]},
         "misstatements[0].audited_amount"),
        ({"misstatements": [{"id": "A", "book_amount": 0, "audited_amount": -3}]},
         "misstatements[0].book_amount"),
        ({"sample_size": 1}, "misstatements"),
        ({"tolerable_misstatement": "600000.00"}, "tolerable_misstatement"),
        ({"selection_method": "systematic"}, "selection_method"),
        ({"misstatements": [{"id": "A", "book_amount": 1, "audited_amount": 0, "extra": 1}]},
         "misstatements[0].extra"),
    ],
)
def test_evaluation_bad_input_names_the_field(
    client: FlaskClient, change: dict[str, Any], field: str
) -> None:
    assert field in problem_fields(post(client, EVALUATION, {**STRINGER_EXAMPLE, **change}))


def test_many_bad_items_are_named_by_index_then_counted(client: FlaskClient) -> None:
    population = [{"id": f"KV-{i}", "amount": "12.5x"} for i in range(7)]
    errors = problem_fields(post(client, SELECTION, {"population": population,
                                                     "sample_size": 1}))
    assert [f"population[{i}].amount" in errors for i in range(7)] == [True] * 5 + [False] * 2
    assert any("7 entries are invalid" in m for m in errors["population"])


def test_numbers_and_strings_give_the_same_selection(client: FlaskClient) -> None:
    # 480.0, 99.9 and 0 as JSON numbers read as the decimals "480.00", "99.90" and "0.00".
    as_text = [{"id": item["id"], "amount": f"{float(item['amount']):.2f}"} for item in LEDGER]
    first = post(client, SELECTION, {"population": LEDGER, "sample_size": 6, "seed": "k"})
    second = post(client, SELECTION, {"population": as_text, "sample_size": 6, "seed": "k"})
    assert first.get_json() == second.get_json()
