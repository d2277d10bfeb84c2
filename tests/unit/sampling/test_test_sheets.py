"""Reading a completed test sheet back, checking its rows and counting its results.

The sheets are made by the service (POST /v1/selection through the Flask test client) and
completed the way a reviewer's spreadsheet would, with openpyxl, a general-purpose reader
and writer independent of the service's own (xlsxwriter writes, python-calamine reads).
The scenario is invented: Harbour Lane Provisions Ltd's purchase orders 5001-5400.
"""

from __future__ import annotations

import io
import zipfile
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import openpyxl
import pytest
from flask.testing import FlaskClient

from service import create_app
from service.sampling.errors import InvalidInput
from service.sampling.test_sheets import workbook as sheet_workbook
from service.sampling.test_sheets.reading import read_test_sheet
from service.sampling.test_sheets.results import SheetMismatch, tally_test_sheet
from service.settings import Settings

XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
ATTRIBUTES = ["approved before release", "three-way match"]
HARBOUR = {
    "population": {"ranges": [{"first": 5001, "last": 5400}], "exclude": [5013]},
    "sample_size": 12,
    "seed": "harbour-lane-2026-q4",
    "attributes": ATTRIBUTES,
}
FORMULA_LIKE = ["=SUM(A1:A9)", "+44 20 7946", "-12", "@risk", "\rHLP-2"]
LISTED = {
    "population": {"items": [f"HLP-PO-{k:05d}" for k in range(1, 9)] + FORMULA_LIKE},
    "sample_size": 13,
    "seed": "listed",
    "attributes": ["three-way match"],
}


@pytest.fixture(scope="module")
def api() -> Iterator[FlaskClient]:
    yield create_app(Settings()).test_client()


def _sheet(api: FlaskClient, body: dict[str, Any]) -> tuple[dict[str, Any], bytes]:
    document = api.post("/v1/selection", json=body).get_json()
    response = api.post("/v1/selection", json=body, headers={"Accept": XLSX})
    assert response.status_code == 200
    return document, response.data


def _complete(
    data: bytes, tmp_path: Path, fill: Callable[[Any], None], name: str = "done.xlsx"
) -> Path:
    workbook = openpyxl.load_workbook(io.BytesIO(data))
    fill(workbook)
    path = tmp_path / name
    workbook.save(path)
    return path


def _all(word: str, *, except_: dict[tuple[int, int], str] | None = None) -> Callable[[Any], None]:
    """Every result cell set to ``word``, except (sheet row, attribute index) → other word."""

    def fill(workbook: Any) -> None:
        sheet = workbook["Tests"]
        heading = [cell.value for cell in sheet[1]]
        columns = [heading.index(f"{a}: result") + 1 for a in heading_attributes(heading)]
        for line in range(2, sheet.max_row + 1):
            for k, column in enumerate(columns):
                sheet.cell(line, column).value = (except_ or {}).get((line, k), word)

    return fill


def heading_attributes(heading: list[Any]) -> list[str]:
    return [h.removesuffix(": result") for h in heading if h and h.endswith(": result")]


def test_one_deviation_in_one_attribute_is_counted(api: FlaskClient, tmp_path: Path) -> None:
    document, data = _sheet(api, HARBOUR)
    path = _complete(data, tmp_path, _all("passed", except_={(5, 1): "deviation"}))
    sheet = read_test_sheet(path)
    assert sheet.recorded.selection_fingerprint == document["selection_fingerprint"]
    assert sheet.recorded.population_size == 399
    assert [row.item for row in sheet.rows] == document["items"]
    tally = tally_test_sheet(sheet)
    first, second = tally.attributes
    assert (first.attribute, first.sample_size, first.deviations, first.passed) == (
        "approved before release", 12, 0, 12,
    )
    assert (second.attribute, second.sample_size, second.deviations, second.passed) == (
        "three-way match", 12, 1, 11,
    )
    assert tally.warnings == ()


def test_results_ignore_case_and_surrounding_spaces(api: FlaskClient, tmp_path: Path) -> None:
    _, data = _sheet(api, HARBOUR)
    path = _complete(data, tmp_path, _all(" Passed ", except_={(2, 0): "DEVIATION"}))
    assert tally_test_sheet(read_test_sheet(path)).attributes[0].deviations == 1


def test_identifiers_that_look_like_formulas_come_back_exactly(
    api: FlaskClient, tmp_path: Path
) -> None:
    document, data = _sheet(api, LISTED)
    path = _complete(data, tmp_path, _all("passed"))
    sheet = read_test_sheet(path)
    assert [row.item for row in sheet.rows] == document["items"]
    assert set(FORMULA_LIKE) <= {row.item for row in sheet.rows}
    assert tally_test_sheet(sheet).attributes[0].deviations == 0


def _refusal(path: Path) -> str:
    with pytest.raises(SheetMismatch) as caught:
        tally_test_sheet(read_test_sheet(path))
    assert caught.value.field == "file"
    return caught.value.message


def test_a_removed_row_is_refused_and_named(api: FlaskClient, tmp_path: Path) -> None:
    document, data = _sheet(api, HARBOUR)

    def remove(workbook: Any) -> None:
        _all("passed")(workbook)
        workbook["Tests"].delete_rows(4)  # draw 3

    message = _refusal(_complete(data, tmp_path, remove))
    assert f"missing 1: draw 3 (item {document['items'][2]})" in message
    assert "added" not in message and "changed" not in message


def test_an_added_row_is_refused_and_named(api: FlaskClient, tmp_path: Path) -> None:
    _, data = _sheet(api, HARBOUR)

    def add(workbook: Any) -> None:
        _all("passed")(workbook)
        workbook["Tests"].append([13, 5399, 399, "passed", None, "passed"])

    message = _refusal(_complete(data, tmp_path, add))
    assert "added 1: sheet row 14 (draw 13, item 5399)" in message
    assert "missing" not in message


def test_a_changed_identifier_is_refused_and_named(api: FlaskClient, tmp_path: Path) -> None:
    document, data = _sheet(api, HARBOUR)
    replacement = 5400 if document["items"][4] != 5400 else 5399

    def change(workbook: Any) -> None:
        _all("passed")(workbook)
        workbook["Tests"].cell(6, 2).value = replacement  # draw 5

    message = _refusal(_complete(data, tmp_path, change))
    assert (
        f"changed 1: sheet row 6, draw 5: item {replacement} in the sheet, "
        f"{document['items'][4]} in the selection"
    ) in message


def test_all_three_kinds_are_listed_together(api: FlaskClient, tmp_path: Path) -> None:
    _, data = _sheet(api, LISTED)

    def tamper(workbook: Any) -> None:
        _all("passed")(workbook)
        sheet = workbook["Tests"]
        sheet.cell(3, 2).value = "HLP-PO-99999"
        sheet.delete_rows(5)
        sheet.append([None, "HLP-PO-77777", None, "passed"])

    message = _refusal(_complete(data, tmp_path, tamper))
    assert "missing 1: draw 4" in message
    assert "added 1:" in message and "'HLP-PO-77777'" in message
    assert "changed 1: sheet row 3, draw 2: item 'HLP-PO-99999'" in message


def test_an_edited_record_sheet_does_not_re_perform(api: FlaskClient, tmp_path: Path) -> None:
    _, data = _sheet(api, HARBOUR)

    def edit(workbook: Any) -> None:
        _all("passed")(workbook)
        record = workbook["record"]
        for row in record.iter_rows():
            if row[0].value == "seed":
                row[1].value = "another seed"

    assert "does not re-perform" in _refusal(_complete(data, tmp_path, edit))


def test_not_tested_items_need_a_treatment(api: FlaskClient, tmp_path: Path) -> None:
    _, data = _sheet(api, HARBOUR)
    marks = {(2, 0): "not tested", (3, 0): "not tested", (4, 0): "deviation"}
    sheet = read_test_sheet(_complete(data, tmp_path, _all("passed", except_=marks)))
    with pytest.raises(InvalidInput) as caught:
        tally_test_sheet(sheet)
    assert caught.value.field == "not_tested"
    assert "2 for 'approved before release'" in caught.value.message

    counted = tally_test_sheet(sheet, "count_as_deviation").attributes[0]
    assert (counted.sample_size, counted.deviations, counted.not_tested) == (12, 3, 2)

    dropped_tally = tally_test_sheet(sheet, "drop")
    dropped = dropped_tally.attributes[0]
    assert (dropped.sample_size, dropped.deviations, dropped.not_tested) == (10, 1, 2)
    assert dropped_tally.attributes[1].sample_size == 12
    (warning,) = dropped_tally.warnings
    assert "2 of 12 items were not tested" in warning and "smaller sample" in warning


def test_dropping_every_item_leaves_nothing_to_evaluate(
    api: FlaskClient, tmp_path: Path
) -> None:
    _, data = _sheet(api, LISTED)
    sheet = read_test_sheet(_complete(data, tmp_path, _all("not tested")))
    with pytest.raises(InvalidInput, match="nothing to evaluate"):
        tally_test_sheet(sheet, "drop")


def test_blank_and_unknown_results_are_named(api: FlaskClient, tmp_path: Path) -> None:
    _, data = _sheet(api, HARBOUR)
    marks = {(2, 0): "", (3, 1): "ok"}
    path = _complete(data, tmp_path, _all("passed", except_=marks))
    with pytest.raises(InvalidInput) as caught:
        tally_test_sheet(read_test_sheet(path))
    message = caught.value.message
    assert "1 results are blank: sheet row 2, 'approved before release'" in message
    assert "sheet row 3, 'three-way match': 'ok'" in message


def test_a_file_that_is_not_a_workbook_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "notes.xlsx"
    path.write_text("draw,item\n1,5001\n")
    with pytest.raises(InvalidInput, match="not a ZIP archive"):
        read_test_sheet(path)


def test_a_workbook_that_is_not_a_test_sheet_is_refused(tmp_path: Path) -> None:
    workbook = openpyxl.Workbook()
    workbook.active.append(["draw", "item"])
    path = tmp_path / "other.xlsx"
    workbook.save(path)
    with pytest.raises(InvalidInput, match="has no sheet named 'record'"):
        read_test_sheet(path)


def test_a_missing_result_column_is_named(api: FlaskClient, tmp_path: Path) -> None:
    _, data = _sheet(api, HARBOUR)

    def drop_column(workbook: Any) -> None:
        workbook["Tests"].delete_cols(6)  # three-way match: result

    with pytest.raises(InvalidInput, match="no column 'three-way match: result'"):
        read_test_sheet(_complete(data, tmp_path, drop_column))


def test_archives_that_inflate_too_far_are_refused(
    api: FlaskClient, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    bomb = tmp_path / "bomb.xlsx"
    with zipfile.ZipFile(bomb, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("xl/worksheets/sheet1.xml", b"\0" * (4 * 1024 * 1024))
    with pytest.raises(InvalidInput, match="more than 200 times"):
        read_test_sheet(bomb)
    _, data = _sheet(api, HARBOUR)
    path = tmp_path / "sheet.xlsx"
    path.write_bytes(data)
    monkeypatch.setattr(sheet_workbook, "MAX_UNCOMPRESSED_BYTES", 1000)
    with pytest.raises(InvalidInput, match="at most 1,000 bytes uncompressed"):
        read_test_sheet(path)


@pytest.mark.parametrize(
    ("key", "value", "words"),
    [
        ("sample_size", "twelve", "sizes or attributes are damaged"),
        ("attributes", "[1", "attributes or population is damaged"),
        ("population", "[5001, 5400]", "population is damaged"),
        ("population", '{"size": "all"}', "population is damaged"),
        ("layout", "test-sheet/0", "this service reads 'test-sheet/1'"),
    ],
)
def test_a_damaged_record_sheet_is_refused(
    api: FlaskClient, tmp_path: Path, key: str, value: str, words: str
) -> None:
    _, data = _sheet(api, HARBOUR)

    def damage(workbook: Any) -> None:
        _all("passed")(workbook)
        for row in workbook["record"].iter_rows():
            if row[0].value == key:
                row[1].value = value

    with pytest.raises(InvalidInput, match=words) as caught:
        tally_test_sheet(read_test_sheet(_complete(data, tmp_path, damage)))
    assert caught.value.field == "file"
