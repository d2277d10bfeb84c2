"""POST /v1/selection with population.file, through the Flask test client.

The reference for every file selection is the same identifiers sent as
``population.items`` in a plain JSON request.
"""

from __future__ import annotations

import csv
import io
import json
import random
from typing import Any

import pytest
from flask.testing import FlaskClient

SELECTION = "/v1/selection"
HEADER = ["doc_no", "posted", "amount", "vendor"]
# Fictional purchase orders of Harbour Lane Provisions Ltd.
ROWS = [
    [f"HLP-PO-{20000 + k}", f"2026-{1 + k % 12:02d}-15", f"{k * 13 % 9000}.{k % 100:02d}",
     f"Vendor {k % 5}"]
    for k in range(1, 251)
]


def _csv(rows: list[list[str]]) -> bytes:
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(HEADER)
    writer.writerows(rows)
    return out.getvalue().encode()


def _upload(client: FlaskClient, request: dict[str, Any], content: bytes, **kw: Any) -> Any:
    return client.post(
        SELECTION,
        data={"file": (io.BytesIO(content), "orders.csv"), "request": json.dumps(request)},
        content_type="multipart/form-data",
        **kw,
    )


@pytest.mark.parametrize("method", ["random", "systematic"])
def test_a_file_selects_as_its_identifiers_do(client: FlaskClient, method: str) -> None:
    shuffled = list(ROWS)
    random.Random(4).shuffle(shuffled)
    request = {
        "population": {"file": {"id_column": "doc_no", "amount_column": "amount"}},
        "sample_size": 12,
        "seed": "harbour-lane-q3",
        "method": method,
    }
    by_file = _upload(client, request, _csv(shuffled))
    assert by_file.status_code == 200, by_file.get_data(as_text=True)
    listed = {**request, "population": {"items": [row[0] for row in ROWS]}}
    by_list = client.post(SELECTION, json=listed).json
    got = by_file.json
    for key in ("items", "positions", "population_fingerprint", "selection_fingerprint"):
        assert got[key] == by_list[key], key
    by_id = {row[0]: dict(zip(HEADER, row, strict=True)) for row in ROWS}
    assert got["columns"] == HEADER
    assert got["records"] == [by_id[item] for item in got["items"]]
    pulled = got["pull_list"]
    assert [p["item"] for p in pulled] == sorted(got["items"])
    assert [got["items"][p["draw"] - 1] for p in pulled] == [p["item"] for p in pulled]
    line_of = {row[0]: k + 2 for k, row in enumerate(shuffled)}
    assert all(p["where"] == f"line {line_of[p['item']]}" for p in pulled)
    assert "records of the file" in got["summary"]


def test_the_file_selection_as_csv_carries_the_records(client: FlaskClient) -> None:
    request = {"population": {"file": {"id_column": "doc_no"}}, "sample_size": 3, "seed": "s"}
    response = _upload(client, request, _csv(ROWS), headers={"Accept": "text/csv"})
    assert response.status_code == 200
    text = response.get_data(as_text=True)
    chosen = _upload(client, request, _csv(ROWS)).json["items"]
    for item in chosen:
        assert item in text


def test_repeated_identifiers_are_422_with_their_lines(client: FlaskClient) -> None:
    rows = [*ROWS[:10], ROWS[2]]
    request = {"population": {"file": {"id_column": "doc_no"}}, "sample_size": 3}
    response = _upload(client, request, _csv(rows))
    assert response.status_code == 422
    message = response.json["errors"]["population.file.id_column"][0]
    # The third record is on line 4; its repeat, the eleventh record, on line 12.
    assert f"'{ROWS[2][0]}' at line 4, line 12" in message


def test_a_file_population_without_a_file_is_told_how_to_send_one(client: FlaskClient) -> None:
    request = {"population": {"file": {"id_column": "doc_no"}}, "sample_size": 3}
    response = client.post(SELECTION, json=request)
    assert response.status_code == 422
    assert "multipart/form-data" in response.json["errors"]["file"][0]


def test_an_upload_with_another_population_form_is_refused(client: FlaskClient) -> None:
    request = {"population": {"size": 100}, "sample_size": 3}
    response = _upload(client, request, _csv(ROWS))
    assert response.status_code == 422
    assert "population.file" in response.json["errors"]["population"][0]


def test_a_sample_larger_than_the_filtered_population_is_refused(client: FlaskClient) -> None:
    request = {
        "population": {"file": {"id_column": "doc_no",
                                "filters": [{"column": "vendor", "comparison": "=",
                                             "value": "Vendor 1"}]}},
        "sample_size": 51,
    }
    response = _upload(client, request, _csv(ROWS))
    assert response.status_code == 422
    assert "exceeds the population size 50" in response.json["errors"]["sample_size"][0]
