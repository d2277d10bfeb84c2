"""The test sheet: an XLSX workbook in which the results of a test of controls are recorded.

The layout is fixed in :mod:`service.sampling.test_sheets.layout`, which the reader of a
completed sheet shares. Each attribute's result column accepts, by data validation, only
the words of :data:`~service.sampling.test_sheets.layout.RESULT_WORDS`; its notes column is
free text. Every text is a string cell, never a formula (:mod:`service.render.xlsx`).
"""

from __future__ import annotations

import json
from typing import Any

from service.render.selection_report import Cell, SelectionReport
from service.render.test_sheet_workbook import finish_test_sheet
from service.render.xlsx import new_workbook, write_table
from service.sampling.test_sheets.layout import (
    ITEMS_MARKER,
    LAYOUT,
    RESULT_WORDS,
    TESTS_SHEET,
    notes_header,
    result_header,
)

_RESULT_WIDTH, _NOTES_WIDTH = 14, 40


def _fact(report: SelectionReport, label: str) -> Cell:
    return dict(report.facts)[label]


def record_rows(report: SelectionReport) -> list[tuple[Cell, ...]]:
    """The record sheet's rows: the keys of the layout with their values, then the items."""
    population = json.dumps(report.population) if report.population is not None else ""
    rows: list[tuple[Cell, ...]] = [
        ("layout", LAYOUT),
        ("selection_fingerprint", _fact(report, "selection fingerprint")),
        ("population_fingerprint", _fact(report, "population fingerprint")),
        ("population_size", _fact(report, "population size")),
        ("sample_size", _fact(report, "sample size")),
        ("seed", _fact(report, "seed")),
        ("method", _fact(report, "method")),
        ("algorithm", _fact(report, "algorithm")),
        ("attributes", json.dumps(list(report.attributes), ensure_ascii=False)),
        ("population", population),
        (ITEMS_MARKER,),
    ]
    rows += [(row[0], row[1], row[2]) for row in report.records.rows]
    return rows


def result_validation(sheet: Any, column: int, rows: int, attribute: str) -> None:
    """Restrict rows 1..``rows`` of ``column`` to the three result words."""
    if rows:
        sheet.data_validation(
            1,
            column,
            rows,
            column,
            {
                "validate": "list",
                "source": list(RESULT_WORDS),
                "error_title": "Result",
                "error_message": "Choose passed, deviation or not tested.",
                "input_title": "Result",
                "input_message": f"{attribute}: passed, deviation or not tested",
            },
        )


def _tests_sheet(workbook: Any, report: SelectionReport, bold: Any) -> None:
    sheet = workbook.add_worksheet(TESTS_SHEET)
    table = report.records
    write_table(sheet, table, bold)
    result_style = workbook.add_format({"bg_color": "#FFF8E1"})
    for k, attribute in enumerate(report.attributes):
        column = len(table.columns) + 2 * k
        sheet.write_string(0, column, result_header(attribute), bold)
        sheet.write_string(0, column + 1, notes_header(attribute), bold)
        sheet.set_column(column, column, _RESULT_WIDTH, result_style)
        sheet.set_column(column + 1, column + 1, _NOTES_WIDTH)
        result_validation(sheet, column, len(table.rows), attribute)
    sheet.freeze_panes(1, 2)


def render_test_sheet(report: SelectionReport) -> bytes:
    """The report as a test sheet, the bytes of an XLSX workbook."""
    workbook, buffer = new_workbook()
    bold = workbook.add_format({"bold": True})
    wrap = workbook.add_format({"text_wrap": True, "valign": "top"})
    _tests_sheet(workbook, report, bold)
    fingerprint = str(_fact(report, "selection fingerprint"))
    return finish_test_sheet(
        workbook, buffer, report, (bold, wrap), record_rows(report), fingerprint
    )
