"""Selection endpoint: ``POST /v1/selection``, as JSON or, on request, as CSV or XLSX."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from schemas.selection import SelectionRequest, SelectionResult, SelectionSchema
from service.http.markdown import TicketLayout
from service.http.operations import Operation, blueprint
from service.http.populations import read_limits, uploaded
from service.render import cells
from service.render.records_csv import render_records_csv
from service.render.records_xlsx import render_records_xlsx
from service.render.selection_report import selection_report
from service.render.test_sheet import render_test_sheet
from service.render.xlsx import XLSX
from service.sampling.errors import InvalidInput
from service.sampling.populations.canonical import select_from_file
from service.sampling.populations.reading import PopulationFile, open_population
from service.sampling.selection import Selection, select
from service.sampling.test_sheets.layout import MAX_SHEET_ROWS, RECORD_KEYS
from service.settings import Settings
from service.web.problems import invalid_input

CSV = "text/csv"

# Kept for the command-line client, which guards its own CSV cells the same way.
FORMULA_STARTS = cells.FORMULA_STARTS


def _select(inputs: dict[str, Any], settings: Settings) -> SelectionResult:
    seed = inputs.get("seed")
    population = inputs["population"]
    selection: Selection
    if isinstance(population, PopulationFile):
        with open_population(uploaded(inputs), population, read_limits(settings)) as table:
            selection = select_from_file(
                table, inputs["sample_size"], seed, inputs["method"], max_items=settings.max_items
            )
    else:
        if inputs.get("upload") is not None:
            raise InvalidInput(
                "population", "a file was uploaded: describe it as population.file"
            )
        selection = select(
            population,
            inputs["sample_size"],
            seed,
            inputs["method"],
            max_items=settings.max_items,
        )
    attributes = inputs.get("attributes")
    return SelectionResult(
        selection,
        inputs["population"],
        seed_generated=seed is None,
        attributes=tuple(attributes) if attributes is not None else None,
    )


def csv_cell(item: int | str) -> int | str:
    """The item as written to the CSV, with the formula guard applied to text."""
    return cells.csv_cell(item)


def render_csv(document: dict[str, Any], result: Any) -> str:
    """The selection as CSV: the header block, the records in draw order, the pull list."""
    return render_records_csv(selection_report(document, result, document.get("attributes", ())))


def render_xlsx(document: dict[str, Any], result: Any) -> bytes:
    """The selection as XLSX: a test sheet when attributes are named, else the records."""
    # The record sheet of a test sheet holds its keys, a marker row and one row per item.
    if document["sample_size"] > MAX_SHEET_ROWS - len(RECORD_KEYS) - 2:
        raise invalid_input(
            {
                "sample_size": [
                    f"{document['sample_size']:,} rows do not fit a worksheet of "
                    f"{MAX_SHEET_ROWS:,} rows; ask for CSV or JSON"
                ]
            }
        )
    attributes = document.get("attributes", ())
    report = selection_report(document, result, attributes)
    return render_test_sheet(report) if attributes else render_records_xlsx(report)


_SELECTION_METHODS = {
    "random": "simple random sampling without replacement, partial Fisher–Yates shuffle "
    "(Fisher & Yates 1938; Durstenfeld 1964)",
    "systematic": "systematic selection, a fixed interval from a random start",
}


def _selection_method(document: Mapping[str, Any]) -> str:
    method = _SELECTION_METHODS.get(document["method"], document["method"])
    return (
        f"{method}; random stream from HMAC-SHA256 in counter mode (RFC 2104, FIPS 180-4), "
        f"algorithm {document['algorithm']}"
    )


OPERATIONS = [
    Operation(
        name="selection",
        path="/v1/selection",
        takes_item_lists=True,
        accepts_file=True,
        summary="Select sample items reproducibly",
        description=(
            "Selects sample_size items from a population given as a count of numbered items, "
            "as document-number ranges less excluded numbers, as a list of identifiers, or "
            "as a file of records (CSV, XLSX or Parquet, sent as the file part of a "
            "multipart/form-data request and described by population.file; the answer then "
            "adds the selected records with all their columns and a pull list), by "
            "simple random sampling without replacement or systematically. The items depend "
            "only on the population, sample size, seed, method and algorithm version, all "
            "reported, so anyone can re-perform the selection; with the random method, a "
            "larger sample with the same seed starts with the same items. With "
            "Accept: text/csv the same selection comes as CSV (UTF-8 with a byte order mark, "
            "CRLF line ends): a header block of the inputs, seed, method, algorithm, both "
            "fingerprints, summary, warnings and caution; then the records in draw order "
            "(draw, item, position and a file's own columns); then the pull list sorted by "
            "identifier. With Accept: application/vnd.openxmlformats-officedocument."
            "spreadsheetml.sheet it comes as an XLSX workbook with the same content on three "
            "sheets or, when the request names attributes, as a test sheet: the records with "
            "a result column (passed, deviation or not tested) and a notes column per "
            "attribute, to be completed and sent back to /v1/evaluation. In the CSV, a text "
            "that starts with =, +, -, @, a tab or a carriage return is preceded by a single "
            "quote so that a spreadsheet shows it as text instead of running it as a formula; "
            "in the XLSX every text is a string cell, never a formula."
        ),
        request=SelectionRequest,
        response=SelectionSchema,
        run=_select,
        tag="selection",
        renderers={CSV: render_csv, XLSX: render_xlsx},
        ticket=TicketLayout(
            answer=(
                "sample_size",
                "population_size",
                "seed",
                "seed_generated",
                "population_fingerprint",
                "selection_fingerprint",
            ),
            method=_selection_method,
            listed=("items", "positions"),
        ),
    ),
]

bp = blueprint("selection", OPERATIONS)
