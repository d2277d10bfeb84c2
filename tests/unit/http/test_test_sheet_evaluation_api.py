"""POST /v1/evaluation with a completed test sheet, through the Flask test client.

The scenario is invented: Harbour Lane Provisions Ltd's purchase orders 5001-5400, tested
for two attributes. Sheets are made by POST /v1/selection and completed with openpyxl, as a
reviewer's spreadsheet would, independently of the service's own writer and reader.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Callable, Iterator
from typing import Any

import openpyxl
import pytest
from flask.testing import FlaskClient
from scipy import stats

from service import create_app
from service.sampling.wording import CAUTION
from service.settings import Settings

XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
ATTRIBUTES = ["approved before release", "three-way match"]
SELECTION = {
    "population": {"ranges": [{"first": 5001, "last": 5400}], "exclude": [5013, 5207]},
    "sample_size": 40,
    "seed": "harbour-lane-2026-q4",
    "attributes": ATTRIBUTES,
}
N = 398
RATES = {"approved before release": 0.07, "three-way match": 0.1}


@pytest.fixture(scope="module")
def api() -> Iterator[FlaskClient]:
    yield create_app(Settings()).test_client()


@pytest.fixture(scope="module")
def blank_sheet(api: FlaskClient) -> bytes:
    response = api.post("/v1/selection", json=SELECTION, headers={"Accept": XLSX})
    assert response.status_code == 200
    return response.data


def _completed(blank: bytes, marks: dict[tuple[int, int], str] | None = None,
               edit: Callable[[Any], None] | None = None) -> bytes:
    """Every result 'passed' but ``marks`` ((sheet row, attribute index) → word)."""
    workbook = openpyxl.load_workbook(io.BytesIO(blank))
    sheet = workbook["Tests"]
    for line in range(2, sheet.max_row + 1):
        for k in range(len(ATTRIBUTES)):
            sheet.cell(line, 4 + 2 * k).value = (marks or {}).get((line, k), "passed")
    if edit is not None:
        edit(workbook)
    out = io.BytesIO()
    workbook.save(out)
    return out.getvalue()


def _evaluate(api: FlaskClient, sheet: bytes, request: dict[str, Any],
              accept: str = "application/json") -> Any:
    return api.post(
        "/v1/evaluation",
        data={"file": (io.BytesIO(sheet), "completed.xlsx"), "request": json.dumps(request)},
        content_type="multipart/form-data",
        headers={"Accept": accept},
    )


def _ok(response: Any) -> dict[str, Any]:
    assert response.status_code == 200, response.get_data(as_text=True)
    document = response.get_json()
    assert isinstance(document, dict)
    return document


def test_one_deviation_gives_what_the_json_evaluation_gives(
    api: FlaskClient, blank_sheet: bytes
) -> None:
    sheet = _completed(blank_sheet, {(9, 1): "deviation"})
    document = _ok(_evaluate(api, sheet, {"confidence": 0.95, "tolerable_rates": RATES}))
    first, second = document["evaluations"]
    assert (first["attribute"], first["deviations"], first["passed"]) == (ATTRIBUTES[0], 0, 40)
    assert (second["attribute"], second["deviations"], second["passed"]) == (ATTRIBUTES[1], 1, 39)
    assert document["population_size"] == N and document["sample_size"] == 40
    for evaluation, deviations in ((first, 0), (second, 1)):
        direct = _ok(api.post("/v1/evaluation", json={
            "population": {"size": N},
            "sample_size": 40,
            "deviations": deviations,
            "confidence": 0.95,
            "tolerable_rate": RATES[evaluation["attribute"]],
        }))
        counts = ("attribute", "passed", "deviations_found", "not_tested")
        assert {k: v for k, v in evaluation.items() if k not in counts} == direct
    assert document["summary"].endswith(CAUTION)


def test_the_binomial_limit_is_the_clopper_pearson_bound(
    api: FlaskClient, blank_sheet: bytes
) -> None:
    sheet = _completed(blank_sheet, {(9, 1): "deviation", (20, 1): "deviation"})
    document = _ok(_evaluate(api, sheet, {"confidence": 0.9, "method": "binomial"}))
    limit = document["evaluations"][1]["upper_deviation_limit"]
    # Clopper & Pearson (1934): the one-sided upper bound for d deviations in n is the
    # confidence quantile of Beta(d + 1, n − d); computed with scipy.stats.
    assert limit == pytest.approx(stats.beta.ppf(0.9, 3, 38), rel=1e-9)


@pytest.mark.parametrize(
    ("edit", "listed"),
    [
        (lambda wb: wb["Tests"].delete_rows(12), "missing 1: draw 11"),
        (lambda wb: wb["Tests"].append([41, 5001, 1, "passed", None, "passed"]),
         "added 1: sheet row 42 (draw 41, item 5001)"),
        (lambda wb: setattr(wb["Tests"].cell(3, 2), "value", 5013), "changed 1: sheet row 3"),
    ],
    ids=["row removed", "row added", "identifier changed"],
)
def test_a_tampered_sheet_is_refused(
    api: FlaskClient, blank_sheet: bytes, edit: Callable[[Any], None], listed: str
) -> None:
    response = _evaluate(api, _completed(blank_sheet, edit=edit), {})
    assert response.status_code == 422
    assert response.mimetype == "application/problem+json"
    (message,) = response.get_json()["errors"]["file"]
    assert "not exactly the selection's" in message and listed in message


def test_not_tested_items_are_refused_unless_treated(
    api: FlaskClient, blank_sheet: bytes
) -> None:
    marks = {(2, 0): "not tested", (3, 0): "not tested", (4, 0): "deviation"}
    sheet = _completed(blank_sheet, marks)
    refused = _evaluate(api, sheet, {})
    assert refused.status_code == 422
    assert "count_as_deviation" in refused.get_json()["errors"]["not_tested"][0]

    counted = _ok(_evaluate(api, sheet, {"not_tested": "count_as_deviation"}))
    first = counted["evaluations"][0]
    assert (first["sample_size"], first["deviations"], first["not_tested"]) == (40, 3, 2)

    dropped = _ok(_evaluate(api, sheet, {"not_tested": "drop"}))
    first = dropped["evaluations"][0]
    assert (first["sample_size"], first["deviations"], first["not_tested"]) == (38, 1, 2)
    assert any("smaller sample" in warning for warning in dropped["warnings"])
    direct = _ok(api.post("/v1/evaluation", json={
        "population": {"size": N}, "sample_size": 38, "deviations": 1}))
    assert first["upper_deviation_limit"] == direct["upper_deviation_limit"]


def test_the_xlsx_answer_is_the_workbook_with_an_evaluation_sheet(
    api: FlaskClient, blank_sheet: bytes
) -> None:
    sheet = _completed(blank_sheet, {(9, 1): "deviation"})
    request = {"tolerable_rates": RATES}
    response = _evaluate(api, sheet, request, accept=XLSX)
    assert response.status_code == 200 and response.mimetype == XLSX
    workbook = openpyxl.load_workbook(io.BytesIO(response.data))
    assert workbook.sheetnames == ["Evaluation", "Tests", "Selection", "record"]
    assert workbook["record"].sheet_state == "veryHidden"
    for worksheet in workbook.worksheets:
        assert all(c.data_type != "f" for row in worksheet.iter_rows() for c in row)
    sent = openpyxl.load_workbook(io.BytesIO(sheet))
    assert [[c.value for c in r] for r in workbook["Tests"].iter_rows()] == [
        [c.value for c in r] for r in sent["Tests"].iter_rows()
    ]
    assert len(workbook["Tests"].data_validations.dataValidation) == 2
    cells = [c.value for row in workbook["Evaluation"].iter_rows() for c in row]
    assert CAUTION in cells and "does_not_support_reliance" in cells
    # The evaluated workbook is still a test sheet: sent again, it evaluates the same.
    again = _ok(_evaluate(api, response.data, request))
    assert again == _ok(_evaluate(api, sheet, request))


def test_markdown_answer_names_each_attribute(api: FlaskClient, blank_sheet: bytes) -> None:
    response = _evaluate(api, _completed(blank_sheet), {}, accept="text/markdown")
    assert response.status_code == 200
    text = response.get_data(as_text=True)
    assert all(attribute in text for attribute in ATTRIBUTES)
    assert CAUTION in text


@pytest.mark.parametrize(
    ("request_part", "field", "words"),
    [
        ({"tolerable_rates": {"three way match": 0.05}}, "tolerable_rates", "does not have"),
        ({"tolerable_rates": {"three-way match": 5}}, "tolerable_rates.three-way match.value",
         ""),
        ({"population": {"size": 400}}, "population.size", "recorded in the sheet (398)"),
        ({"tolerable_rates": {"three-way match": 0.00001}}, "tolerable_rates.three-way match",
         "0.0001"),
        ({"not_tested": "ignore"}, "not_tested", "must be one of"),
        ({"sample_size": 40}, "sample_size", "not a field"),
    ],
)
def test_bad_requests_name_the_field(
    api: FlaskClient, blank_sheet: bytes, request_part: dict[str, Any], field: str, words: str
) -> None:
    response = _evaluate(api, _completed(blank_sheet), request_part)
    assert response.status_code == 422, response.get_data(as_text=True)
    errors = response.get_json()["errors"]
    assert field in errors, errors
    assert words in " ".join(errors[field])


def test_a_file_that_is_not_a_test_sheet_is_refused(api: FlaskClient) -> None:
    response = _evaluate(api, b"draw,item\r\n1,5001\r\n", {})
    assert response.status_code == 422
    assert "not a ZIP archive" in response.get_json()["errors"]["file"][0]


def test_the_json_form_is_unchanged_and_offers_no_xlsx(api: FlaskClient) -> None:
    body = {"sample_size": 40, "deviations": 1}
    assert api.post("/v1/evaluation", json=body).status_code == 200
    assert api.post("/v1/evaluation", json=body, headers={"Accept": XLSX}).status_code == 406


def test_a_population_files_test_sheet_round_trip(api: FlaskClient) -> None:
    """An uploaded export (its rows written by Python's csv module) gives a test sheet with
    the file's columns, and the completed sheet evaluates like the same counts as JSON."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(["doc_no", "amount", "vendor"])
    rows = {f"HLP-{k:04d}": [f"{k}.50", "=HYPERLINK(1)" if k % 7 == 0 else "Quayside Dairy"]
            for k in range(1, 121)}
    writer.writerows([doc, *cells] for doc, cells in rows.items())
    request = {"population": {"file": {"id_column": "doc_no"}}, "sample_size": 30,
               "seed": "harbour-lane-file", "attributes": ["goods received"]}
    response = api.post(
        "/v1/selection",
        data={"file": (io.BytesIO(out.getvalue().encode()), "orders.csv"),
              "request": json.dumps(request)},
        content_type="multipart/form-data",
        headers={"Accept": XLSX},
    )
    assert response.status_code == 200, response.get_data(as_text=True)
    workbook = openpyxl.load_workbook(io.BytesIO(response.data))
    sheet = workbook["Tests"]
    heading = [cell.value for cell in sheet[1]]
    assert heading[4:7] == ["doc_no", "amount", "vendor"]
    for row in sheet.iter_rows(min_row=2):
        assert [row[5].value, row[6].value] == rows[row[1].value]
        assert row[6].data_type == "s"
    result = heading.index("goods received: result") + 1
    for line in range(2, sheet.max_row + 1):
        sheet.cell(line, result).value = "deviation" if line in (4, 9) else "passed"
    completed = io.BytesIO()
    workbook.save(completed)
    rates = {"tolerable_rates": {"goods received": 0.2}}
    document = _ok(_evaluate(api, completed.getvalue(), rates))
    (evaluation,) = document["evaluations"]
    direct = _ok(api.post("/v1/evaluation", json={
        "population": {"size": 120}, "sample_size": 30, "deviations": 2, "tolerable_rate": 0.2}))
    assert evaluation["deviations"] == 2
    assert evaluation["upper_deviation_limit"] == direct["upper_deviation_limit"]
    assert evaluation["conclusion"] == direct["conclusion"]
