"""A completed test sheet written back with an ``Evaluation`` sheet added.

The workbook is written again from the values read (xlsxwriter cannot edit a file): every
sheet in its order with the values of its cells, the result columns restricted again to the
three words, the record sheet hidden and protected again, and a first sheet ``Evaluation``
with what a reviewer must see: the selection, the confidence and model, the treatment of
items not tested, one row per attribute, each attribute's summary, the warnings and the
caution. Formatting the reviewer added is not kept; every value is. Every text is a string
cell, never a formula (:mod:`service.render.xlsx`); a formula the reviewer wrote comes
back as the value it last showed.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from service.render.test_sheet import result_validation, seal
from service.render.xlsx import new_workbook, write_cell, write_rows
from service.sampling.test_sheets.layout import (
    EVALUATION_SHEET,
    RECORD_SHEET,
    TESTS_SHEET,
    result_header,
)
from service.sampling.wording import CAUTION

_COLUMNS = (
    ("attribute", "attribute"),
    ("items evaluated", "sample_size"),
    ("deviations evaluated", "deviations"),
    ("passed", "passed"),
    ("deviations found", "deviations_found"),
    ("not tested", "not_tested"),
    ("sample deviation rate", "sample_deviation_rate"),
    ("upper deviation limit", "upper_deviation_limit"),
    ("allowance for sampling risk", "allowance_for_sampling_risk"),
    ("tolerable rate", "tolerable_rate"),
    ("conclusion", "conclusion"),
)


def _facts(document: Mapping[str, Any]) -> list[tuple[str, Any]]:
    treatment = {
        None: "none were marked not tested",
        "count_as_deviation": "counted as deviations",
        "drop": "left out; the sample evaluated is smaller",
    }[document.get("not_tested")]
    return [
        ("selection fingerprint", document["selection_fingerprint"]),
        ("population fingerprint", document["population_fingerprint"]),
        ("population size", document["population_size"]),
        ("items selected", document["sample_size"]),
        ("seed", document["seed"]),
        ("algorithm", document["algorithm"]),
        ("confidence", document["confidence"]),
        ("model", document["method"]),
        ("items not tested", treatment),
    ]


def _evaluation_sheet(workbook: Any, document: Mapping[str, Any]) -> None:
    sheet = workbook.add_worksheet(EVALUATION_SHEET)
    bold = workbook.add_format({"bold": True})
    wrap = workbook.add_format({"text_wrap": True, "valign": "top"})
    sheet.write_string(0, 0, "Evaluation of the test sheet", bold)
    row = 2
    for label, value in _facts(document):
        sheet.write_string(row, 0, label, bold)
        write_cell(sheet, row, 1, value)
        row += 1
    row += 1
    for column, (heading, _) in enumerate(_COLUMNS):
        sheet.write_string(row, column, heading, bold)
    for evaluation in document["evaluations"]:
        row += 1
        for column, (_, key) in enumerate(_COLUMNS):
            write_cell(sheet, row, column, evaluation.get(key))
    row += 2
    lines = [("summary", e["attribute"] + ": " + e["summary"]) for e in document["evaluations"]]
    lines += [("warning", warning) for warning in document["warnings"]]
    lines.append(("caution", CAUTION))
    for label, text in lines:
        sheet.write_string(row, 0, label, bold)
        sheet.write_string(row, 1, text, wrap)
        row += 1
    sheet.set_column(0, 0, 26)
    sheet.set_column(1, 1, 90)
    sheet.set_column(2, len(_COLUMNS) - 1, 16)
    sheet.activate()


def render_evaluated_sheet(document: dict[str, Any], result: Any) -> bytes:
    """The completed sheet of ``result`` with the evaluation ``document`` added, as XLSX."""
    sheet = result.sheet
    workbook, buffer = new_workbook()
    _evaluation_sheet(workbook, document)
    record = None
    for name, rows in sheet.sheets:
        written = workbook.add_worksheet(name)
        write_rows(written, rows)
        if name == TESTS_SHEET and rows:
            heading = [str(cell) if cell is not None else "" for cell in rows[0]]
            for attribute in sheet.recorded.attributes:
                column = heading.index(result_header(attribute))
                result_validation(written, column, len(rows) - 1, attribute)
        if name == RECORD_SHEET:
            record = written
    if record is not None:
        seal(workbook, record, sheet.recorded.selection_fingerprint, CAUTION)
    workbook.close()
    return buffer.getvalue()
