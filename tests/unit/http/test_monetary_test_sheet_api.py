"""The monetary-unit test sheet: made by /v1/monetary/selection, completed with openpyxl (as
a reviewer's spreadsheet would, independently of the service's writer and reader), and
evaluated by /v1/monetary/evaluation, against the JSON evaluation of the same misstatements.

The scenario is invented: the trade receivables of Kestrel Marine Supplies Ltd at year end.
"""

from __future__ import annotations

import io
import json
from collections.abc import Callable, Iterator
from decimal import Decimal
from fractions import Fraction
from typing import Any

import openpyxl
import pytest
from flask.testing import FlaskClient

from service import create_app
from service.sampling.wording import CAUTION
from service.settings import Settings

XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
LEDGER = [{"id": f"KMS-{50000 + k}", "amount": f"{(k * 7919) % 40000 + 15}.{k % 100:02d}"}
          for k in range(1, 401)]
LEDGER[5]["amount"] = "420000.00"  # individually significant
LEDGER[6]["amount"] = "-310.00"  # a credit balance: excluded
LEDGER[7]["id"] = "=HYPERLINK(\"http://example.invalid\",\"open\")"
SELECTION = {"population": LEDGER, "sample_size": 45, "seed": "kestrel-ye-2026",
             "method": "cell"}


@pytest.fixture(scope="module")
def api() -> Iterator[FlaskClient]:
    yield create_app(Settings()).test_client()


@pytest.fixture(scope="module")
def selection(api: FlaskClient) -> dict[str, Any]:
    response = api.post("/v1/monetary/selection", json=SELECTION)
    assert response.status_code == 200
    body: dict[str, Any] = response.json
    return body


@pytest.fixture(scope="module")
def blank(api: FlaskClient) -> bytes:
    response = api.post("/v1/monetary/selection", json=SELECTION, headers={"Accept": XLSX})
    assert response.status_code == 200
    assert response.mimetype == XLSX
    return response.data


def _columns(sheet: Any) -> dict[str, int]:
    return {cell.value: cell.column for cell in sheet[1]}


def _completed(
    blank: bytes,
    audited: dict[int, Any] | None = None,
    edit: Callable[[Any], None] | None = None,
) -> bytes:
    """Every audited amount equal to the book amount but ``audited`` (sheet row → value)."""
    workbook = openpyxl.load_workbook(io.BytesIO(blank))
    sheet = workbook["Tests"]
    at = _columns(sheet)
    for row in range(2, sheet.max_row + 1):
        value = (audited or {}).get(row, sheet.cell(row, at["book amount"]).value)
        sheet.cell(row, at["audited amount"]).value = value
    if edit is not None:
        edit(workbook)
    out = io.BytesIO()
    workbook.save(out)
    return out.getvalue()


def _evaluate(api: FlaskClient, sheet: bytes, request: dict[str, Any] | None = None,
              **kw: Any) -> Any:
    return api.post(
        "/v1/monetary/evaluation",
        data={"file": (io.BytesIO(sheet), "completed.xlsx"),
              "request": json.dumps(request or {})},
        content_type="multipart/form-data",
        **kw,
    )


def _rows(blank: bytes) -> list[dict[str, Any]]:
    sheet = openpyxl.load_workbook(io.BytesIO(blank))["Tests"]
    names = [c.value for c in sheet[1]]
    return [dict(zip(names, (c.value for c in row), strict=True))
            for row in sheet.iter_rows(min_row=2)]


MISSTATED = {
    # sheet row → audited amount; the taints are chosen, the amounts follow from the book
    3: "half",  # first sampled item: 50% overstatement
    7: "fifth",  # 20% overstatement
    11: "over",  # an understatement of 100.00
}


def _audited(blank: bytes) -> tuple[dict[int, Any], list[dict[str, Any]]]:
    """The audited amounts written for MISSTATED rows and the JSON misstatements they make,
    plus an individually significant item short by 1,000.00."""
    rows = _rows(blank)
    audited: dict[int, Any] = {}
    found: list[dict[str, Any]] = []
    for number, row in enumerate(rows, start=2):
        book = Decimal(str(row["book amount"]))
        if row["selection"] == "individually significant":
            value = book - 1000
        elif MISSTATED.get(number) == "half":
            value = (book / 2).quantize(Decimal("0.01"))
        elif MISSTATED.get(number) == "fifth":
            value = (book * Decimal("0.8")).quantize(Decimal("0.01"))
        elif MISSTATED.get(number) == "over":
            value = book + 100
        else:
            continue
        audited[number] = float(value)
        found.append({
            "id": row["item"], "book_amount": str(book), "audited_amount": str(value),
            "hits": row["hits"] or 1,
            "individually_significant": row["selection"] == "individually significant",
        })
    return audited, found


EVALUATION_FIELDS = (
    "book_value", "sample_size", "sampling_interval", "selection_method", "confidence",
    "tolerable_misstatement", "overstatement", "understatement", "net_most_likely_misstatement",
    "limits", "conclusion", "currency_decimals", "summary", "warnings",
)


def test_the_sheet_is_laid_out_for_the_test(blank: bytes, selection: dict[str, Any]) -> None:
    workbook = openpyxl.load_workbook(io.BytesIO(blank))
    assert workbook.sheetnames == ["Tests", "Selection", "record"]
    assert workbook["record"].sheet_state == "veryHidden"
    assert workbook["record"].protection.sheet
    rows = _rows(blank)
    assert [r["line"] for r in rows] == list(range(1, len(rows) + 1))
    significant = [r for r in rows if r["selection"] == "individually significant"]
    assert [r["item"] for r in significant] == ["KMS-50006"]
    sampled = [r for r in rows if r["selection"] == "sampled"]
    assert [r["item"] for r in sampled] == [i["id"] for i in selection["items"]]
    assert [Decimal(str(r["book amount"])) for r in sampled] == [
        Decimal(i["amount"]) for i in selection["items"]
    ]
    assert sum(r["hits"] for r in sampled) == selection["units_drawn"]
    tests = workbook["Tests"]
    validations = tests.data_validations.dataValidation
    audited_column = openpyxl.utils.get_column_letter(_columns(tests)["audited amount"])
    assert [v.type for v in validations] == ["decimal"]
    assert str(validations[0].sqref).startswith(f"{audited_column}2:")
    facts = {r[0].value: r[1].value for r in workbook["Selection"].iter_rows() if r[0].value}
    assert facts["selection fingerprint"] == selection["selection_fingerprint"]
    assert facts["population fingerprint"] == selection["population_fingerprint"]
    assert facts["seed"] == "kestrel-ye-2026"
    assert facts["algorithm"] == selection["algorithm"]
    assert facts["caution"] == CAUTION


def test_a_formula_like_identifier_is_written_as_text(blank: bytes) -> None:
    sheet = openpyxl.load_workbook(io.BytesIO(blank))["Tests"]
    cells = [c for c in sheet["C"] if isinstance(c.value, str) and c.value.startswith("=")]
    for cell in cells:
        assert cell.data_type == "s"
    record = openpyxl.load_workbook(io.BytesIO(blank))["record"]
    assert all(c.data_type != "f" for row in record.iter_rows() for c in row)


def test_a_completed_sheet_evaluates_as_the_json_form(
    api: FlaskClient, blank: bytes, selection: dict[str, Any]
) -> None:
    audited, found = _audited(blank)
    request = {"confidence": 0.9, "tolerable_misstatement": "250000"}
    by_sheet = _evaluate(api, _completed(blank, audited), request)
    assert by_sheet.status_code == 200, by_sheet.get_data(as_text=True)
    by_json = api.post("/v1/monetary/evaluation", json={
        "book_value": selection["sampled_value"],
        "sample_size": selection["units_drawn"],
        "selection_method": "cell",
        **request,
        "misstatements": found,
    })
    assert by_json.status_code == 200, by_json.get_data(as_text=True)
    got, expected = by_sheet.json, by_json.json
    for key in EVALUATION_FIELDS:
        assert got[key] == expected[key], key
    assert got["overstatement"]["known_misstatement"] == "1000.00"
    assert got["understatement"]["misstatements"] == 1
    assert got["selection_fingerprint"] == selection["selection_fingerprint"]
    assert got["items_not_tested"] == 0
    assert len(got["misstatements"]) == 4
    for entry in got["misstatements"]:
        book, audited = Decimal(entry["book_amount"]), Decimal(entry["audited_amount"])
        assert Fraction(entry["taint"]) == Fraction(book - audited) / Fraction(book)


def test_an_untested_item_is_refused_unless_treated(
    api: FlaskClient, blank: bytes, selection: dict[str, Any]
) -> None:
    rows = _rows(blank)
    sheet = _completed(blank, {4: None})
    refused = _evaluate(api, sheet)
    assert refused.status_code == 422
    assert "sheet row 4" in refused.json["errors"]["not_tested"][0]
    treated = _evaluate(api, sheet, {"not_tested": "count_as_misstated"})
    assert treated.status_code == 200, treated.get_data(as_text=True)
    row = rows[2]
    by_json = api.post("/v1/monetary/evaluation", json={
        "book_value": selection["sampled_value"], "sample_size": selection["units_drawn"],
        "selection_method": "cell",
        "misstatements": [{"id": row["item"], "book_amount": str(row["book amount"]),
                           "audited_amount": "0", "hits": row["hits"]}],
    }).json
    for key in ("overstatement", "limits", "net_most_likely_misstatement"):
        assert treated.json[key] == by_json[key], key
    assert treated.json["items_not_tested"] == 1
    assert any("not tested" in w for w in treated.json["warnings"])


def _delete_row(workbook: Any) -> None:
    workbook["Tests"].delete_rows(5)


def _change_item(workbook: Any) -> None:
    workbook["Tests"].cell(6, 3).value = "KMS-99999"


def _change_book(workbook: Any) -> None:
    cell = workbook["Tests"].cell(7, 4)
    cell.value = cell.value + 0.01


def _add_row(workbook: Any) -> None:
    sheet = workbook["Tests"]
    sheet.append([999, "sampled", "KMS-77777", 10.0, 1, "5", 10.0])


@pytest.mark.parametrize(
    ("edit", "expected"),
    [
        (_delete_row, "missing 1: line 4"),
        (_change_item, "changed 1: sheet row 6, line 5: item 'KMS-99999' in the sheet"),
        (_change_book, "changed 1: sheet row 7, line 6: book amount"),
        (_add_row, "added 1: sheet row"),
    ],
)
def test_a_tampered_sheet_is_refused_listing_the_rows(
    api: FlaskClient, blank: bytes, edit: Callable[[Any], None], expected: str
) -> None:
    response = _evaluate(api, _completed(blank, edit=edit))
    assert response.status_code == 422
    assert response.mimetype == "application/problem+json"
    assert expected in response.json["errors"]["file"][0]


def test_a_tampered_record_sheet_is_refused(api: FlaskClient, blank: bytes) -> None:
    def edit(workbook: Any) -> None:
        record = workbook["record"]
        for row in record.iter_rows():
            if row[0].value == "units_drawn":
                row[1].value = int(row[1].value) + 1

    response = _evaluate(api, _completed(blank, edit=edit))
    assert response.status_code == 422
    assert "the record sheet is damaged" in response.json["errors"]["file"][0]


@pytest.mark.parametrize(
    ("value", "expected"),
    [("twelve", "'twelve' is not a decimal amount"), (10.005, "more than 2 decimal places")],
)
def test_a_bad_audited_amount_names_its_row(
    api: FlaskClient, blank: bytes, value: Any, expected: str
) -> None:
    response = _evaluate(api, _completed(blank, {5: value}))
    assert response.status_code == 422
    message = response.json["errors"]["file"][0]
    assert "sheet row 5, audited amount" in message and expected in message


def test_a_sheet_that_is_not_a_monetary_test_sheet_is_refused(api: FlaskClient) -> None:
    attribute_sheet = api.post(
        "/v1/selection",
        json={"population": {"size": 300}, "sample_size": 5, "seed": "x", "attributes": ["a"]},
        headers={"Accept": XLSX},
    ).data
    response = _evaluate(api, attribute_sheet)
    assert response.status_code == 422
    assert "monetary-unit test sheet" in response.json["errors"]["file"][0]
    not_xlsx = _evaluate(api, b"invoice,balance\n1,2\n")
    assert not_xlsx.status_code == 422
    assert "not an XLSX workbook" in not_xlsx.json["errors"]["file"][0]


def test_the_request_part_is_checked(api: FlaskClient, blank: bytes) -> None:
    sheet = _completed(blank)
    unknown = _evaluate(api, sheet, {"not_tested": "ignore"})
    assert unknown.status_code == 422
    assert "not_tested" in unknown.json["errors"]
    too_large = _evaluate(api, sheet, {"tolerable_misstatement": "999999999"})
    assert too_large.status_code == 422
    assert "tolerable_misstatement" in too_large.json["errors"]


def test_the_workbook_comes_back_with_its_evaluation(api: FlaskClient, blank: bytes) -> None:
    audited, _ = _audited(blank)
    completed = _completed(blank, audited)
    request = {"tolerable_misstatement": "250000"}
    response = _evaluate(api, completed, request, headers={"Accept": XLSX})
    assert response.status_code == 200
    workbook = openpyxl.load_workbook(io.BytesIO(response.data))
    assert workbook.sheetnames == ["Evaluation", "Tests", "Selection", "record"]
    assert workbook["record"].sheet_state == "veryHidden"
    texts = [c.value for row in workbook["Evaluation"].iter_rows() for c in row if c.value]
    assert CAUTION in texts
    again = _evaluate(api, response.data, request)
    assert again.status_code == 200
    assert again.json == _evaluate(api, completed, request).json


def test_the_evaluation_as_markdown_carries_the_caution(api: FlaskClient, blank: bytes) -> None:
    response = _evaluate(api, _completed(blank), headers={"Accept": "text/markdown"})
    assert response.status_code == 200
    text = response.get_data(as_text=True)
    fingerprint = _evaluate(api, _completed(blank)).json["selection_fingerprint"]
    assert fingerprint in text
    assert CAUTION in text


def test_the_chart_of_a_completed_sheet_is_the_chart_of_its_json_evaluation(
    api: FlaskClient, blank: bytes, selection: dict[str, Any]
) -> None:
    # The web page draws the limits of an uploaded sheet by sending it again for SVG; the
    # chart must be the one the same misstatements give as JSON.
    audited, found = _audited(blank)
    request = {"confidence": 0.9, "tolerable_misstatement": "250000"}
    svg = {"Accept": "image/svg+xml"}
    by_sheet = _evaluate(api, _completed(blank, audited), request, headers=svg)
    assert by_sheet.status_code == 200, by_sheet.get_data(as_text=True)
    assert by_sheet.mimetype == "image/svg+xml"
    by_json = api.post("/v1/monetary/evaluation", headers=svg, json={
        "book_value": selection["sampled_value"],
        "sample_size": selection["units_drawn"],
        "selection_method": "cell",
        **request,
        "misstatements": found,
    })
    assert by_json.status_code == 200
    assert by_sheet.get_data() == by_json.get_data()
