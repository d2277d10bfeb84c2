"""Selection endpoint: ``POST /v1/selection``, as JSON or, on request, as CSV."""

from __future__ import annotations

import csv
import io
from collections.abc import Mapping
from typing import Any

from schemas.selection import SelectionRequest, SelectionResult, SelectionSchema
from service.http.markdown import TicketLayout
from service.http.operations import Operation, blueprint
from service.sampling.selection import select
from service.settings import Settings

CSV = "text/csv"

# A spreadsheet reads a cell that starts with one of these as a formula (tab and carriage
# return are stripped first and the rest read again), so an identifier such as
# "=HYPERLINK(...)" would run when the file is opened. A leading single quote makes the cell
# text. Only the CSV is changed; the JSON carries the identifiers exactly.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def _select(inputs: dict[str, Any], settings: Settings) -> SelectionResult:
    seed = inputs.get("seed")
    selection = select(
        inputs["population"],
        inputs["sample_size"],
        seed,
        inputs["method"],
        max_items=settings.max_items,
    )
    return SelectionResult(selection, inputs["population"], seed_generated=seed is None)


def csv_cell(item: int | str) -> int | str:
    """The item as written to the CSV, with the formula guard applied to text."""
    if isinstance(item, str) and item.startswith(FORMULA_STARTS):
        return "'" + item
    return item


def render_csv(document: dict[str, Any], result: Any) -> str:
    """The selection as CSV: a header, then draw, item and position for each selected item.

    RFC 4180: fields quoted when they hold a comma, a quote or a line break; quotes doubled;
    CRLF after every record. The text starts with a byte order mark (U+FEFF): without it the
    most common spreadsheet program opens a UTF-8 file in the local legacy code page and
    garbles every non-ASCII identifier, while the other common ones skip the mark.
    """
    out = io.StringIO()
    out.write("\ufeff")
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(("draw", "item", "position"))
    writer.writerows(
        (draw, csv_cell(item), position)
        for draw, (item, position) in enumerate(
            zip(document["items"], document["positions"], strict=True), start=1
        )
    )
    return out.getvalue()


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
        summary="Select sample items reproducibly",
        description=(
            "Selects sample_size items from a population given as a count of numbered items, "
            "as document-number ranges less excluded numbers, or as a list of identifiers, by "
            "simple random sampling without replacement or systematically. The items depend "
            "only on the population, sample size, seed, method and algorithm version, all "
            "reported, so anyone can re-perform the selection; with the random method, a "
            "larger sample with the same seed starts with the same items. With "
            "Accept: text/csv the same selection comes as CSV (UTF-8 with a byte order mark, "
            "CRLF line ends, columns draw, item, position); in the CSV only, an identifier "
            "that starts with =, +, -, @, a tab or a carriage return is preceded by a single "
            "quote so that a spreadsheet shows it as text instead of running it as a formula."
        ),
        request=SelectionRequest,
        response=SelectionSchema,
        run=_select,
        tag="selection",
        renderers={CSV: render_csv},
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
