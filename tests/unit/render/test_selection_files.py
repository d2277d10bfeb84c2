"""The selected records of a population file in the CSV, the XLSX and the test sheet.

The file is invented: Harbour Lane Provisions Ltd's purchase order export, with a vendor
name that a spreadsheet would run as a formula and a column named like one of the
service's own. Expected cells come from the file itself, read with Python's csv module;
the workbooks are read back with openpyxl.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path
from typing import Any

import openpyxl

from schemas.selection import SelectionResult, SelectionSchema
from service.render.records_csv import render_records_csv
from service.render.records_xlsx import render_records_xlsx
from service.render.selection_report import selection_report
from service.render.test_sheet import render_test_sheet
from service.sampling.populations.canonical import select_from_file
from service.sampling.populations.reading import PopulationFile, open_population
from service.sampling.test_sheets.reading import read_test_sheet
from service.sampling.test_sheets.results import tally_test_sheet

HEADER = ["doc_no", "date", "amount", "vendor", "item"]
VENDORS = ["Quayside Dairy", "=cmd|' /C calc'!A0", "Saltmarsh Bakery", "@Gull Fisheries"]


def _export(path: Path) -> tuple[Path, dict[str, dict[str, str]]]:
    rows = [
        [f"HLP-{k:04d}", f"2026-10-{k % 28 + 1:02d}", f"{k * 37 % 5000}.{k % 100:02d}",
         VENDORS[k % len(VENDORS)], f"line {k}"]
        for k in range(1, 41)
    ]
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerows([HEADER, *rows])
    path.write_text(out.getvalue(), encoding="utf-8")
    with path.open(newline="", encoding="utf-8") as handle:
        by_id = {row["doc_no"]: row for row in csv.DictReader(handle)}
    return path, by_id


def _report(
    tmp_path: Path, attributes: tuple[str, ...] = (), sample_size: int = 12
) -> tuple[Any, dict[str, Any]]:
    path, by_id = _export(tmp_path / "orders.csv")
    description = PopulationFile(id_column="doc_no")
    with open_population(path, description) as table:
        selection = select_from_file(table, sample_size, "harbour-lane", "random", max_items=1000)
    result = SelectionResult(selection, description, seed_generated=False)  # type: ignore[arg-type]
    document = SelectionSchema().dump(result)
    return selection_report(document, result, attributes), by_id


def test_records_carry_every_column_of_the_file(tmp_path: Path) -> None:
    report, by_id = _report(tmp_path)
    assert report.records.columns == (
        "draw", "item", "position", "where in the file", "doc_no", "date", "amount", "vendor",
        "file: item",
    )
    for draw, row in enumerate(report.records.rows, start=1):
        assert row[0] == draw
        source = by_id[str(row[1])]
        assert list(row[4:]) == [source[name] for name in HEADER]
    pulled = [row[0] for row in report.pull_list.rows]
    assert pulled == sorted(row[1] for row in report.records.rows)


def test_csv_guards_the_files_own_cells(tmp_path: Path) -> None:
    report, _ = _report(tmp_path, sample_size=40)  # every record, every vendor
    text = render_records_csv(report).removeprefix("\ufeff")
    cells = [cell for row in csv.reader(io.StringIO(text, newline="")) for cell in row]
    assert not [c for c in cells if c.startswith(("=", "+", "-", "@", "\t", "\r"))]
    assert "'=cmd|' /C calc'!A0" in cells and "'@Gull Fisheries" in cells


def test_xlsx_keeps_the_files_cells_as_text(tmp_path: Path) -> None:
    report, by_id = _report(tmp_path)
    workbook = openpyxl.load_workbook(io.BytesIO(render_records_xlsx(report)))
    rows = list(workbook["Records"].iter_rows(min_row=2))
    for row in rows:
        assert all(cell.data_type != "f" for cell in row)
        source = by_id[row[1].value]
        assert [cell.value for cell in row[4:]] == [source[name] for name in HEADER]


def test_a_file_test_sheet_comes_back_with_its_items(tmp_path: Path) -> None:
    report, _ = _report(tmp_path, ("goods received",))
    workbook = openpyxl.load_workbook(io.BytesIO(render_test_sheet(report)))
    sheet = workbook["Tests"]
    heading = [cell.value for cell in sheet[1]]
    column = heading.index("goods received: result") + 1
    for line in range(2, sheet.max_row + 1):
        sheet.cell(line, column).value = "passed"
    path = tmp_path / "done.xlsx"
    workbook.save(path)
    completed = read_test_sheet(path)
    assert completed.recorded.population is None  # a file's items are the reference
    assert completed.extra_columns == tuple(report.records.columns[3:])
    tally = tally_test_sheet(completed)
    assert tally.attributes[0].passed == 12


def test_a_cell_longer_than_a_worksheet_holds_is_cut_visibly(tmp_path: Path) -> None:
    long_text = "goods described " * 3000  # 48,000 characters
    path = tmp_path / "long.csv"
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerows(
        [["doc_no", "description"], *([f"HLP-{k}", long_text] for k in range(1, 4))]
    )
    path.write_text(out.getvalue(), encoding="utf-8")
    description = PopulationFile(id_column="doc_no")
    with open_population(path, description) as table:
        selection = select_from_file(table, 3, "long", "random", max_items=10)
    result = SelectionResult(selection, description, seed_generated=False)  # type: ignore[arg-type]
    report = selection_report(SelectionSchema().dump(result), result)
    workbook = openpyxl.load_workbook(io.BytesIO(render_records_xlsx(report)))
    cell = workbook["Records"].cell(2, 6).value
    # The most characters a cell holds (Excel specifications and limits; xlsxwriter enforces it).
    assert len(cell) == 32_767
    assert cell.startswith(long_text[:1000])
    assert cell.endswith(f"… [cut: {len(long_text):,} characters in all]")
    text = render_records_csv(report)
    assert long_text in text  # CSV has no such limit: the text is whole
