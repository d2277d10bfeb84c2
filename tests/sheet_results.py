"""Filling in an attribute test sheet as a reviewer would, for the tests that send one back."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import openpyxl


def fill_attribute_results(
    sheet: Path, completed: Path, attributes: Sequence[str], deviation_draw: int
) -> None:
    """Save to ``completed`` the test sheet at ``sheet`` with every draw passed for every
    attribute, except draw ``deviation_draw``, a deviation for the last attribute."""
    book = openpyxl.load_workbook(sheet)
    tests = book["Tests"]
    header = [cell.value for cell in tests[1]]
    column = {name: header.index(name) + 1 for name in header}
    for row in range(2, tests.max_row + 1):
        draw = tests.cell(row, column["draw"]).value
        for attribute in attributes[:-1]:
            tests.cell(row, column[f"{attribute}: result"], "passed")
        tests.cell(row, column[f"{attributes[-1]}: result"],
                   "deviation" if draw == deviation_draw else "passed")
    book.save(completed)
