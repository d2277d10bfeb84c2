"""Writing XLSX workbooks with xlsxwriter, guarded against formula injection.

Every workbook is made by :func:`new_workbook`, which turns off xlsxwriter's conversion of
text that looks like a formula, a number or a URL, and every cell is written by
:func:`write_cell`: numbers as numbers, everything else with ``write_string``. No cell is
ever written as a formula, so a value such as ``=HYPERLINK(...)`` stays text, exactly.

A cell holds at most :data:`MAX_CELL_CHARACTERS` characters (the limit of the format's
spreadsheet programs); a longer text, which only a population file's own columns can hold,
is cut visibly: its first characters, then ``… [cut: N characters in all]``.
"""

from __future__ import annotations

import io
from collections.abc import Iterable, Sequence
from typing import Any

import xlsxwriter

from service.render.selection_report import Cell, SelectionReport, Table

XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"

MAX_CELL_CHARACTERS = 32_767

_OPTIONS = {
    "in_memory": True,
    "strings_to_formulas": False,
    "strings_to_numbers": False,
    "strings_to_urls": False,
}

# Widths in characters: wide enough to read, narrow enough to print.
_NARROW, _WIDE, _TEXT = 10, 24, 100


def new_workbook() -> tuple[Any, io.BytesIO]:
    """A workbook writing into memory, and the buffer its bytes land in on ``close()``."""
    buffer = io.BytesIO()
    return xlsxwriter.Workbook(buffer, _OPTIONS), buffer


def write_cell(
    sheet: Any, row: int, column: int, value: Cell | float | None, style: Any = None
) -> None:
    """One cell: a number as a number, any other value as text (never a formula)."""
    if value is None:
        return
    if isinstance(value, int | float) and not isinstance(value, bool):
        sheet.write_number(row, column, value, style)
    else:
        sheet.write_string(row, column, fitted(str(value)), style)


def fitted(text: str) -> str:
    """``text``, or its visibly cut form when it is longer than a cell holds.

    >>> cut = fitted("x" * 40_000)
    >>> len(cut), cut.endswith("x… [cut: 40,000 characters in all]")
    (32767, True)
    """
    if len(text) <= MAX_CELL_CHARACTERS:
        return text
    mark = f"… [cut: {len(text):,} characters in all]"
    return text[: MAX_CELL_CHARACTERS - len(mark)] + mark


def write_table(sheet: Any, table: Table, bold: Any, first_row: int = 0) -> int:
    """The heading row in bold, then the rows; returns the index of the row after the table."""
    for column, name in enumerate(table.columns):
        sheet.write_string(first_row, column, fitted(name), bold)
    for offset, row in enumerate(table.rows, start=1):
        for column, value in enumerate(row):
            write_cell(sheet, first_row + offset, column, value)
    sheet.set_column(0, max(len(table.columns) - 1, 0), _WIDE)
    return first_row + len(table.rows) + 1


def write_facts(sheet: Any, report: SelectionReport, bold: Any, wrap: Any) -> int:
    """The header block: title, facts, summary, warnings and caution; returns the next row."""
    sheet.write_string(0, 0, report.title, bold)
    rows: list[tuple[str, Cell]] = [*report.facts, ("summary", report.summary)]
    rows += [("warning", warning) for warning in report.warnings]
    rows.append(("caution", report.caution))
    for index, (label, value) in enumerate(rows, start=2):
        sheet.write_string(index, 0, label, bold)
        write_cell(sheet, index, 1, value, wrap)
    sheet.set_column(0, 0, _WIDE)
    sheet.set_column(1, 1, _TEXT)
    return len(rows) + 2


def write_rows(
    sheet: Any, rows: Iterable[Sequence[Cell | float | None]], first_row: int = 0
) -> None:
    for offset, row in enumerate(rows):
        for column, value in enumerate(row):
            write_cell(sheet, first_row + offset, column, value)
