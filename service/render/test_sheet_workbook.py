"""What every test sheet's workbook shares, attribute or monetary-unit, blank or evaluated.

A blank test sheet ends with the ``Selection`` sheet for people to read and the ``record``
sheet the service reads back, hidden and protected, the selection fingerprint named in the
workbook's metadata (:func:`finish_test_sheet`). An evaluated one is the completed workbook
written again from the values read (xlsxwriter cannot edit a file), a first sheet
``Evaluation`` added, the ``Tests`` sheet's entry columns restricted again and the record
sheet sealed again (:func:`write_evaluated_workbook`). The ``Evaluation`` sheet is a title,
the facts, one or more tables and the closing lines (summary, warnings, caution)
(:func:`write_evaluation_sheet`). Every text is a string cell, never a formula
(:mod:`service.render.xlsx`).
"""

from __future__ import annotations

import io
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from service.render.selection_report import Cell, SelectionReport
from service.render.xlsx import new_workbook, write_cell, write_facts, write_rows
from service.sampling.test_sheets.layout import (
    EVALUATION_SHEET,
    FINGERPRINT_NAME,
    FINGERPRINT_PROPERTY,
    RECORD_SHEET,
    SELECTION_SHEET,
    TESTS_SHEET,
)
from service.sampling.wording import CAUTION

CopiedSheets = Iterable[tuple[str, Sequence[Sequence[Cell | float | None]]]]


def seal(workbook: Any, record: Any, fingerprint: str, caution: str) -> None:
    """Hide and protect the record sheet; name the fingerprint in the workbook's metadata."""
    record.protect()
    record.very_hidden()
    workbook.define_name(FINGERPRINT_NAME, f'="{fingerprint}"')
    workbook.set_custom_property(FINGERPRINT_PROPERTY, fingerprint)
    workbook.set_properties(
        {"title": f"Test sheet, selection {fingerprint[:16]}", "comments": caution}
    )


def finish_test_sheet(
    workbook: Any,
    buffer: io.BytesIO,
    report: SelectionReport,
    formats: tuple[Any, Any],
    record_rows: Iterable[Sequence[Cell | float | None]],
    fingerprint: str,
) -> bytes:
    """Add the ``Selection`` sheet (bold and wrapping ``formats``) and the sealed
    ``record`` sheet after the ``Tests`` sheet; the bytes of the closed workbook."""
    bold, wrap = formats
    write_facts(workbook.add_worksheet(SELECTION_SHEET), report, bold, wrap)
    record = workbook.add_worksheet(RECORD_SHEET)
    write_rows(record, record_rows)
    seal(workbook, record, fingerprint, report.caution)
    workbook.close()
    return buffer.getvalue()


@dataclass(frozen=True)
class KeyedTable:
    """A table of the ``Evaluation`` sheet: (heading, key) per column, one row per
    document; ``shown`` turns a document's value into the cell's."""

    columns: Sequence[tuple[str, str]]
    documents: Sequence[Mapping[str, Any]]
    shown: Callable[[Any], Any] = lambda value: value


def write_evaluation_sheet(
    workbook: Any,
    title: str,
    facts: Sequence[tuple[str, Any]],
    tables: Sequence[KeyedTable],
    lines: Sequence[tuple[str, str]],
    widths: tuple[int, int, int],
) -> None:
    """The active first sheet ``Evaluation``: ``title``; each fact, label and value; each
    table; each closing line, label and text.

    ``widths`` are those of the label column, the value column and the other columns of
    the first table.
    """
    sheet = workbook.add_worksheet(EVALUATION_SHEET)
    bold = workbook.add_format({"bold": True})
    wrap = workbook.add_format({"text_wrap": True, "valign": "top"})
    sheet.write_string(0, 0, title, bold)
    row = 2
    for label, value in facts:
        sheet.write_string(row, 0, label, bold)
        write_cell(sheet, row, 1, value)
        row += 1
    row += 1
    for table in tables:
        for column, (heading, _) in enumerate(table.columns):
            sheet.write_string(row, column, heading, bold)
        for document in table.documents:
            row += 1
            for column, (_, key) in enumerate(table.columns):
                write_cell(sheet, row, column, table.shown(document.get(key)))
        row += 2
    for label, text in lines:
        sheet.write_string(row, 0, label, bold)
        sheet.write_string(row, 1, text, wrap)
        row += 1
    label_width, value_width, other_width = widths
    sheet.set_column(0, 0, label_width)
    sheet.set_column(1, 1, value_width)
    sheet.set_column(2, len(tables[0].columns) - 1, other_width)
    sheet.activate()


def write_evaluated_workbook(
    write_evaluation: Callable[[Any], None],
    sheets: CopiedSheets,
    fingerprint: str,
    restrict_tests: Callable[[Any, list[str], int], None],
) -> bytes:
    """A completed test sheet written again after the sheet ``write_evaluation`` adds.

    ``sheets`` are the completed workbook's sheets by name, as the values of their cells;
    ``restrict_tests`` restricts the entry columns of the ``Tests`` sheet again, given the
    sheet, its heading and its number of rows below the heading.
    """
    workbook, buffer = new_workbook()
    write_evaluation(workbook)
    record = None
    for name, rows in sheets:
        written = workbook.add_worksheet(name)
        write_rows(written, rows)
        if name == TESTS_SHEET and rows:
            heading = [str(cell) if cell is not None else "" for cell in rows[0]]
            restrict_tests(written, heading, len(rows) - 1)
        if name == RECORD_SHEET:
            record = written
    if record is not None:
        seal(workbook, record, fingerprint, CAUTION)
    workbook.close()
    return buffer.getvalue()
