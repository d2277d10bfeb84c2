"""POST /v1/populations/profile through the Flask test client."""

from __future__ import annotations

import io
import json
from decimal import Decimal
from typing import Any

from flask.testing import FlaskClient

PROFILE = "/v1/populations/profile"
CSV = (
    b"doc_no,posted,amount,vendor\n"
    b"HLP-PO-1001,2026-07-02,\"1,250.00\",Quay Foods\n"
    b"HLP-PO-1002,2026-07-09,310.40,Tide & Co\n"
    b"HLP-PO-1003,2026-08-14,-45.00,Quay Foods\n"
    b"HLP-PO-1002,2026-08-20,0.00,Saltmarsh Dairy\n"
)


def _post(client: FlaskClient, request: dict[str, Any], content: bytes = CSV) -> Any:
    return client.post(
        PROFILE,
        data={"file": (io.BytesIO(content), "orders.csv"), "request": json.dumps(request)},
        content_type="multipart/form-data",
    )


def test_a_profile_with_reconciliation(client: FlaskClient) -> None:
    request = {
        "population": {"file": {"id_column": "doc_no", "amount_column": "amount"}},
        "control_total": "1515.40",
        "control_count": 4,
    }
    response = _post(client, request)
    assert response.status_code == 200, response.get_data(as_text=True)
    body = response.json
    assert (body["rows_read"], body["rows_kept"], body["distinct_ids"]) == (4, 4, 3)
    assert body["repeated"] == [{"identifier": "HLP-PO-1002", "where": ["line 3", "line 5"]}]
    # 1250.00 + 310.40 − 45.00 + 0.00, by hand.
    assert body["amounts"]["total"] == "1515.40"
    assert body["amounts"]["negative_total"] == "-45.00"
    assert body["reconciliation"]["reconciles"] is True
    assert body["filename"] == "orders.csv"
    assert "support, and do not replace, professional judgement" in body["summary"]
    assert any("more than one record" in w for w in body["warnings"])


def test_a_file_that_does_not_reconcile_says_by_how_much(client: FlaskClient) -> None:
    request = {
        "population": {"file": {"id_column": "doc_no", "amount_column": "amount"}},
        "control_total": 1500,
    }
    body = _post(client, request).json
    assert Decimal(body["reconciliation"]["total_difference"]) == Decimal("15.40")
    assert "does not reconcile" in body["summary"]


def test_the_profile_as_markdown(client: FlaskClient) -> None:
    request = {"population": {"file": {"id_column": "doc_no"}}}
    response = client.post(
        PROFILE,
        data={"file": (io.BytesIO(CSV), "orders.csv"), "request": json.dumps(request)},
        content_type="multipart/form-data",
        headers={"Accept": "text/markdown"},
    )
    assert response.status_code == 200
    text = response.get_data(as_text=True)
    assert "| rows\\_kept | 4 |" in text  # the block escapes Markdown's underscore
    assert "professional judgement" in text


def test_a_missing_column_is_422_listing_the_columns(client: FlaskClient) -> None:
    response = _post(client, {"population": {"file": {"id_column": "document"}}})
    assert response.status_code == 422
    message = response.json["errors"]["population.file.id_column"][0]
    assert message.endswith("its columns are doc_no, posted, amount, vendor")


def test_a_bad_amount_is_422_naming_line_and_column(client: FlaskClient) -> None:
    content = CSV + b"HLP-PO-1004,2026-09-01,12 EUR,Quay Foods\n"
    request = {"population": {"file": {"id_column": "doc_no", "amount_column": "amount"}}}
    response = _post(client, request, content)
    assert response.status_code == 422
    message = response.json["errors"]["population.file.amount_column"][0]
    assert "column 'amount'" in message and "'12 EUR' at line 6" in message


def test_the_request_must_name_one_way_of_identifying_records(client: FlaskClient) -> None:
    response = _post(client, {"population": {"file": {"amount_column": "amount"}}})
    assert response.status_code == 422
    assert "id_column or row_numbers" in response.json["errors"]["population.file"][0]


def test_a_json_request_without_a_file_is_told_how_to_send_one(client: FlaskClient) -> None:
    response = client.post(PROFILE, json={"population": {"file": {"id_column": "doc_no"}}})
    assert response.status_code == 422
    assert "multipart/form-data" in response.json["errors"]["file"][0]


STRATIFIED = "/v1/populations/stratified-selection"


def test_a_stratified_selection_by_vendor_is_re_performable_per_stratum(
    client: FlaskClient,
) -> None:
    rows = [f"HLP-PO-{3000 + k},2026-07-01,{10 + k}.00,{'Quay' if k % 3 else 'Tide'}\n"
            for k in range(30)]
    content = b"doc_no,posted,amount,vendor\n" + "".join(rows).encode()
    request = {
        "population": {"file": {"id_column": "doc_no", "amount_column": "amount"}},
        "strata": {"column": "vendor", "top_threshold": "38"},
        "sample_size": 6,
        "seed": "harbour-lane-strata",
    }
    response = client.post(
        STRATIFIED,
        data={"file": (io.BytesIO(content), "orders.csv"), "request": json.dumps(request)},
        content_type="multipart/form-data",
    )
    assert response.status_code == 200, response.get_data(as_text=True)
    body = response.json
    strata = {s["label"]: s for s in body["strata"]}
    # Amounts 38.00 and 39.00 (k = 28, 29) are the top stratum; of the other 28 records,
    # 18 are Quay and 10 Tide: 6 × 18/28 = 3.86 and 6 × 10/28 = 2.14, so 4 and 2.
    assert [(s["label"], s["sample_size"]) for s in body["strata"]] == [
        ("Quay", 4), ("Tide", 2), ("top", 2)]
    assert strata["top"]["taken_in_full"] is True
    for label in ("Quay", "Tide"):
        members = [r.split(",")[0] for r in rows[:28] if r.rstrip().endswith("," + label)]
        alone = client.post(SELECTION_PATH, json={
            "population": {"items": members},
            "sample_size": strata[label]["sample_size"],
            "seed": strata[label]["seed"],
        }).json
        assert strata[label]["items"] == alone["items"]
        assert strata[label]["selection_fingerprint"] == alone["selection_fingerprint"]
    assert "taken in full" in body["summary"]


SELECTION_PATH = "/v1/selection"
