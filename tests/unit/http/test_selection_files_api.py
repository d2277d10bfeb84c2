"""POST /v1/selection answered as files: the records as CSV and XLSX, and the test sheet.

The scenario is invented: Harbour Lane Provisions Ltd's purchase orders HLP-PO-00001 onwards,
with a few identifiers that a spreadsheet would run as formulas. The files are read back with
independent, general-purpose readers: Python's csv module and openpyxl.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Iterator
from typing import Any

import openpyxl
import pytest
from flask.testing import FlaskClient

from service import create_app
from service.http import selection as selection_http
from service.sampling.wording import CAUTION
from service.settings import Settings

PATH = "/v1/selection"
XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
FORMULA_LIKE = ["=SUM(A1:A9)", "+44 20 7946", "-12", "@risk", "\tHLP-1", "\rHLP-2"]
ORDERS = [f"HLP-PO-{k:05d}" for k in range(1, 31)] + FORMULA_LIKE
ATTRIBUTES = ["approved before release", "three-way match"]
# The whole population, so every awkward identifier is among the selected records.
EVERYTHING = {"population": {"items": ORDERS}, "sample_size": len(ORDERS), "seed": "=1+1"}
HARBOUR = {
    "population": {"ranges": [{"first": 5001, "last": 5400}], "exclude": [5013, 5207]},
    "sample_size": 25,
    "seed": "harbour-lane-2026-q4",
    "attributes": ATTRIBUTES,
}


@pytest.fixture(scope="module")
def api() -> Iterator[FlaskClient]:
    yield create_app(Settings()).test_client()


def _json(api: FlaskClient, body: dict[str, Any]) -> dict[str, Any]:
    response = api.post(PATH, json=body)
    assert response.status_code == 200, response.get_data(as_text=True)
    document = response.get_json()
    assert isinstance(document, dict)
    return document


def _csv_sections(api: FlaskClient, body: dict[str, Any]) -> list[list[list[str]]]:
    response = api.post(PATH, json=body, headers={"Accept": "text/csv"})
    assert response.status_code == 200, response.get_data(as_text=True)
    text = response.get_data().decode("utf-8").removeprefix("\ufeff")
    rows = list(csv.reader(io.StringIO(text, newline="")))
    sections: list[list[list[str]]] = [[]]
    for row in rows:
        if row:
            sections[-1].append(row)
        else:
            sections.append([])
    return sections


def _workbook(api: FlaskClient, body: dict[str, Any]) -> Any:
    response = api.post(PATH, json=body, headers={"Accept": XLSX})
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.mimetype == XLSX
    return openpyxl.load_workbook(io.BytesIO(response.data))


def _as_openpyxl_reads(text: str) -> str:
    """openpyxl leaves a carriage return in its OOXML escape form ``_x000D_`` (ECMA-376
    Part 1, ST_Xstring) instead of decoding it; the workbook holds the escape, as the standard
    says, and other readers decode it."""
    return text.replace("\r", "_x000D_")


def _unguard(cell: str) -> str:
    """The CSV guard's documented inverse: drop the quote put before a formula-like text."""
    return cell[1:] if cell.startswith("'") and cell[1:].startswith(FORMULA_STARTS) else cell


# --------------------------------------------------------------------------- CSV


def test_csv_header_block_repeats_the_selection(api: FlaskClient) -> None:
    document = _json(api, HARBOUR)
    header, records, pull_list = _csv_sections(api, HARBOUR)
    assert header[0] == ["selection", "Selection of sample items"]
    facts = {row[0]: row[1] for row in header[1:] if row[0] != "warning"}
    assert facts["seed"] == HARBOUR["seed"]
    assert facts["method"] == "random"
    assert facts["algorithm"] == document["algorithm"]
    assert facts["population size"] == "398"  # 400 numbers less 2 excluded
    assert facts["population fingerprint"] == document["population_fingerprint"]
    assert facts["selection fingerprint"] == document["selection_fingerprint"]
    assert json.loads(facts["attributes tested"]) == ATTRIBUTES
    assert facts["caution"] == CAUTION
    assert facts["summary"] + " " + CAUTION == document["summary"]
    assert [row[1] for row in header if row[0] == "warning"] == document["warnings"]
    assert records[0] == ["records in draw order"]
    assert pull_list[0] == ["pull list sorted by identifier"]


def test_csv_records_in_draw_order_and_pull_list_by_identifier(api: FlaskClient) -> None:
    document = _json(api, HARBOUR)
    _, records, pull_list = _csv_sections(api, HARBOUR)
    assert records[1] == ["draw", "item", "position"]
    assert [[int(cell) for cell in row] for row in records[2:]] == [
        [draw, item, position]
        for draw, (item, position) in enumerate(
            zip(document["items"], document["positions"], strict=True), start=1
        )
    ]
    assert pull_list[1] == ["item", "draw", "position"]
    pulled = [int(row[0]) for row in pull_list[2:]]
    assert pulled == sorted(document["items"])
    draw_of = {int(row[1]): int(row[0]) for row in records[2:]}
    assert all(draw_of[int(row[0])] == int(row[1]) for row in pull_list[2:])


def test_csv_guards_every_text_cell_against_formulas(api: FlaskClient) -> None:
    document = _json(api, EVERYTHING)
    header, records, pull_list = _csv_sections(api, EVERYTHING)
    cells = [cell for section in (header, records, pull_list) for row in section for cell in row]
    assert not [cell for cell in cells if cell.startswith(FORMULA_STARTS)]
    assert dict(header[1:])["seed"] == "'=1+1"
    items = [_unguard(row[1]) for row in records[2:]]
    assert items == document["items"]
    assert {"'" + text for text in FORMULA_LIKE} <= {row[1] for row in records[2:]}
    # Code point order (Python's own str ordering) of the identifiers as given.
    assert [_unguard(row[0]) for row in pull_list[2:]] == sorted(ORDERS)


# --------------------------------------------------------------------------- XLSX


def _no_formula_anywhere(workbook: Any) -> None:
    for sheet in workbook.worksheets:
        for row in sheet.iter_rows():
            for cell in row:
                assert cell.data_type != "f", (sheet.title, cell.coordinate, cell.value)


def test_xlsx_records_keep_texts_exact_and_never_formulas(api: FlaskClient) -> None:
    document = _json(api, EVERYTHING)
    workbook = _workbook(api, EVERYTHING)
    assert workbook.sheetnames == ["Selection", "Records", "Pull list"]
    _no_formula_anywhere(workbook)
    records = [[c.value for c in row] for row in workbook["Records"].iter_rows()]
    assert records[0] == ["draw", "item", "position"]
    # exactly, no quote added
    assert [row[1] for row in records[1:]] == [_as_openpyxl_reads(i) for i in document["items"]]
    assert [row[2] for row in records[1:]] == document["positions"]
    for row in workbook["Records"].iter_rows(min_row=2, min_col=2, max_col=2):
        assert row[0].data_type == "s"
    pulled = [row[0].value for row in workbook["Pull list"].iter_rows(min_row=2, max_col=1)]
    assert pulled == [_as_openpyxl_reads(i) for i in sorted(ORDERS)]
    facts = {
        row[0].value: row[1].value
        for row in workbook["Selection"].iter_rows(min_row=3)
        if row[0].value
    }
    assert facts["seed"] == "=1+1"
    assert facts["selection fingerprint"] == document["selection_fingerprint"]
    assert facts["caution"] == CAUTION


def test_xlsx_without_attributes_is_the_records(api: FlaskClient) -> None:
    body = {key: value for key, value in HARBOUR.items() if key != "attributes"}
    assert _workbook(api, body).sheetnames == ["Selection", "Records", "Pull list"]
    assert "attributes" not in _json(api, body)


# --------------------------------------------------------------------------- test sheet


def test_test_sheet_result_columns_accept_only_the_three_words(api: FlaskClient) -> None:
    document = _json(api, HARBOUR)
    assert document["attributes"] == ATTRIBUTES
    workbook = _workbook(api, HARBOUR)
    assert workbook.sheetnames == ["Tests", "Selection", "record"]
    _no_formula_anywhere(workbook)
    sheet = workbook["Tests"]
    heading = [cell.value for cell in sheet[1]]
    assert heading == [
        "draw",
        "item",
        "position",
        "approved before release: result",
        "approved before release: notes",
        "three-way match: result",
        "three-way match: notes",
    ]
    n = document["sample_size"]
    assert [row[1].value for row in sheet.iter_rows(min_row=2)] == document["items"]
    validations = {str(v.sqref): v for v in sheet.data_validations.dataValidation}
    assert set(validations) == {f"D2:D{n + 1}", f"F2:F{n + 1}"}  # results only, not notes
    for validation in validations.values():
        assert validation.type == "list"
        assert validation.formula1 == '"passed,deviation,not tested"'
        assert validation.showErrorMessage


def test_test_sheet_stores_the_selection_for_the_service(api: FlaskClient) -> None:
    document = _json(api, HARBOUR)
    workbook = _workbook(api, HARBOUR)
    fingerprint = document["selection_fingerprint"]
    assert workbook.defined_names["SelectionFingerprint"].attr_text == f'"{fingerprint}"'
    assert workbook.custom_doc_props["selection_fingerprint"].value == fingerprint
    record = workbook["record"]
    assert record.sheet_state == "veryHidden"
    assert record.protection.sheet
    rows = [[c.value for c in row] for row in record.iter_rows()]
    facts = {row[0]: row[1] for row in rows[: rows.index(["items", None, None])]}
    assert facts["layout"] == "test-sheet/1"
    assert facts["selection_fingerprint"] == fingerprint
    assert facts["population_fingerprint"] == document["population_fingerprint"]
    assert json.loads(facts["population"]) == HARBOUR["population"]
    assert json.loads(facts["attributes"]) == ATTRIBUTES
    items = rows[rows.index(["items", None, None]) + 1 :]
    assert [row[1] for row in items] == document["items"]
    facts_sheet = {
        row[0].value: row[1].value
        for row in workbook["Selection"].iter_rows(min_row=3)
        if row[0].value
    }
    assert facts_sheet["caution"] == CAUTION


@pytest.mark.parametrize(
    ("attributes", "message"),
    [
        (["three-way match", "three-way match"], "repeated: three-way match"),
        ([""], "between 1 and 100 characters"),
        (["x" * 101], "between 1 and 100 characters"),
        ([f"attribute {k}" for k in range(21)], "between 1 and 20 attributes"),
        ([], "between 1 and 20 attributes"),
        ("three-way match", "must be an array of names, not a string"),
        ([0.05] * 100_000, "between 1 and 20 attributes; got 100,000"),
        (["approved", 7], "must be a string, not a number"),
    ],
)
def test_bad_attributes_are_refused(api: FlaskClient, attributes: Any, message: str) -> None:
    response = api.post(PATH, json={**HARBOUR, "attributes": attributes})
    assert response.status_code == 422
    problem = response.get_json()
    assert any(key.startswith("attributes") for key in problem["errors"]), problem
    assert message in json.dumps(problem["errors"])


def test_a_sample_too_large_for_a_worksheet_is_refused(
    api: FlaskClient, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(selection_http, "MAX_SHEET_ROWS", 30)
    response = api.post(PATH, json=HARBOUR, headers={"Accept": XLSX})
    assert response.status_code == 422
    assert "sample_size" in response.get_json()["errors"]
    assert api.post(PATH, json=HARBOUR, headers={"Accept": "text/csv"}).status_code == 200
