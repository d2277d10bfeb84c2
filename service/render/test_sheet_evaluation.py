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

from service.render.test_sheet import result_validation
from service.render.test_sheet_workbook import (
    KeyedTable,
    write_evaluated_workbook,
    write_evaluation_sheet,
)
from service.sampling.test_sheets.layout import result_header
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
    lines = [("summary", e["attribute"] + ": " + e["summary"]) for e in document["evaluations"]]
    lines += [("warning", warning) for warning in document["warnings"]]
    lines.append(("caution", CAUTION))
    write_evaluation_sheet(
        workbook,
        "Evaluation of the test sheet",
        _facts(document),
        [KeyedTable(_COLUMNS, document["evaluations"])],
        lines,
        (26, 90, 16),
    )


def render_evaluated_sheet(document: dict[str, Any], result: Any) -> bytes:
    """The completed sheet of ``result`` with the evaluation ``document`` added, as XLSX."""
    sheet = result.sheet

    def restrict(written: Any, heading: list[str], rows: int) -> None:
        for attribute in sheet.recorded.attributes:
            result_validation(written, heading.index(result_header(attribute)), rows, attribute)

    return write_evaluated_workbook(
        lambda workbook: _evaluation_sheet(workbook, document),
        sheet.sheets,
        sheet.recorded.selection_fingerprint,
        restrict,
    )
