"""Monetary-unit sampling endpoints: sample size, selection by amount, evaluation."""

from __future__ import annotations

import csv
import io
from collections.abc import Mapping
from decimal import Decimal
from fractions import Fraction
from typing import Any

from schemas.monetary import (
    MonetaryEvaluationRequest,
    MonetaryEvaluationSchema,
    MonetaryFileSelectionRequest,
    MonetaryPlanSchema,
    MonetarySampleSizeRequest,
    MonetarySelectionRequest,
    MonetarySelectionSchema,
    SelectionAnswer,
)
from schemas.monetary_test_sheets import (
    MonetarySheetEvaluationRequest,
    MonetarySheetEvaluationSchema,
)
from service.http.markdown import TicketLayout
from service.http.operations import Operation, blueprint
from service.http.populations import read_limits, uploaded
from service.http.selection import CSV, csv_cell
from service.render.margin_chart import MarginBar, render_margin_svg
from service.render.monetary_test_sheet import (
    render_evaluated_monetary_sheet,
    render_monetary_test_sheet,
)
from service.render.selection_report import RESERVED
from service.render.xlsx import XLSX
from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.monetary.amounts import to_units
from service.sampling.monetary.evaluation import Misstatement, evaluate_monetary_sample
from service.sampling.monetary.files import select_units_from_file
from service.sampling.monetary.selection import select_units
from service.sampling.monetary.sizing import MonetaryPlan, size_monetary_sample
from service.sampling.populations.reading import open_population
from service.sampling.test_sheets.monetary_reading import read_monetary_test_sheet
from service.sampling.test_sheets.monetary_results import (
    MonetarySheetEvaluation,
    evaluate_monetary_test_sheet,
)
from service.sampling.wording import CAUTION
from service.settings import Settings


def _units(value: Decimal | None, field: str, scale: int) -> int | None:
    return None if value is None else to_units(value, field, scale)


def _size(inputs: dict[str, Any], settings: Settings) -> MonetaryPlan:
    scale = inputs["currency_decimals"]
    return size_monetary_sample(
        to_units(inputs["book_value"], "book_value", scale),
        to_units(inputs["tolerable_misstatement"], "tolerable_misstatement", scale),
        to_units(inputs.get("expected_misstatement", Decimal(0)), "expected_misstatement", scale),
        inputs["confidence"],
        inputs["method"],
        scale=scale,
        max_sample_size=settings.max_sample_size,
    )


def _check_lists(payload: Any, settings: Settings) -> None:
    """Refuse a list longer than the settings allow before validating its entries."""
    if not isinstance(payload, Mapping):
        return
    for name in ("population", "misstatements"):
        listed = payload.get(name)
        if isinstance(listed, list) and len(listed) > settings.max_items:
            raise ComputationTooLarge(
                name, f"lists {len(listed):,} entries; the limit is {settings.max_items:,}"
            )


def _select(inputs: dict[str, Any], settings: Settings) -> SelectionAnswer:
    scale = inputs["currency_decimals"]
    population = tuple(
        (item["id"], to_units(item["amount"], f"population[{index}].amount", scale))
        for index, item in enumerate(inputs["population"])
    )
    seed = inputs.get("seed")
    chosen = select_units(
        population,
        inputs["sample_size"],
        seed,
        inputs["method"],
        scale=scale,
        max_items=settings.max_items,
    )
    return SelectionAnswer(chosen, seed_generated=seed is None)


def _select_from_file(inputs: dict[str, Any], settings: Settings) -> SelectionAnswer:
    seed = inputs.get("seed")
    with open_population(uploaded(inputs), inputs["population"], read_limits(settings)) as table:
        chosen = select_units_from_file(
            table,
            inputs["sample_size"],
            seed,
            inputs["method"],
            scale=inputs["currency_decimals"],
            max_items=settings.max_items,
        )
    return SelectionAnswer(chosen.selection, seed_generated=seed is None, file=chosen)


def _evaluate(inputs: dict[str, Any], settings: Settings) -> Any:
    scale = inputs["currency_decimals"]
    found = [
        Misstatement(
            id=item["id"],
            book_amount=to_units(item["book_amount"], f"misstatements[{i}].book_amount", scale),
            audited_amount=to_units(
                item["audited_amount"], f"misstatements[{i}].audited_amount", scale
            ),
            hits=item["hits"],
            individually_significant=item["individually_significant"],
        )
        for i, item in enumerate(inputs["misstatements"])
    ]
    interval = _units(inputs.get("sampling_interval"), "sampling_interval", scale)
    return evaluate_monetary_sample(
        to_units(inputs["book_value"], "book_value", scale),
        found,
        sample_size=inputs.get("sample_size"),
        sampling_interval=None if interval is None else Fraction(interval),
        selection_method=inputs["selection_method"],
        confidence=inputs["confidence"],
        tolerable_misstatement=_units(
            inputs.get("tolerable_misstatement"), "tolerable_misstatement", scale
        ),
        scale=scale,
        max_sample_size=settings.max_items,
    )


def _evaluate_sheet(inputs: dict[str, Any], settings: Settings) -> MonetarySheetEvaluation:
    upload = inputs["upload"]
    if upload is None:  # the JSON form is its own operation; kept for a direct call
        raise InvalidInput("file", "send the completed test sheet as the file part")
    sheet = read_monetary_test_sheet(upload)
    scale = sheet.recorded.scale
    return evaluate_monetary_test_sheet(
        sheet,
        inputs["confidence"],
        _units(inputs.get("tolerable_misstatement"), "tolerable_misstatement", scale),
        inputs.get("not_tested"),
    )


SVG = "image/svg+xml"


def render_margin(document: dict[str, Any], result: Any) -> str:
    """The evaluation's overstatement limits against the tolerable misstatement, as SVG."""
    bars = [
        MarginBar(
            row["method"],
            Decimal(row["projected_misstatement"]),
            None
            if row["upper_misstatement_limit"] is None
            else Decimal(row["upper_misstatement_limit"]),
        )
        for row in document["limits"]
        if row["direction"] == "overstatement"
    ]
    tolerable = document["tolerable_misstatement"]
    recommended = document["overstatement"]["recommended"]
    return render_margin_svg(
        bars,
        book_value=Decimal(document["book_value"]),
        tolerable_misstatement=None if tolerable is None else Decimal(tolerable),
        caption=f"{document['sample_size']:,} sampling units, confidence "
        f"{document['confidence']:g}; recommended: {recommended}. {CAUTION}",
    )


def render_selection_csv(document: dict[str, Any], result: Any) -> str:
    """The selection as a test sheet in CSV (RFC 4180, UTF-8 with a byte order mark, CRLF).

    Columns: ``selection`` (``sampled`` or ``individually significant``), ``item``,
    ``book_amount``, ``hits``, ``units`` (space-separated, 1-based); for a file population,
    ``where in the file`` and the record's own columns (a column named like one of these
    shown as ``file: <name>``); then an empty ``audited_amount`` for the auditor to fill in.
    Texts that a spreadsheet would read as a formula are guarded as in the selection
    endpoint's CSV.
    """
    out = io.StringIO()
    out.write("\ufeff")
    writer = csv.writer(out, lineterminator="\r\n")
    names = document.get("columns") or []
    own = ["where in the file", *names] if names else []
    heading = ("selection", "item", "book_amount", "hits", "units", "audited_amount")
    shown = [f"file: {c}" if c in (*heading, *RESERVED) else c for c in names]
    writer.writerow([*heading[:5], *([own[0], *shown] if names else []), heading[5]])

    def record(item: dict[str, Any]) -> list[int | str]:
        if not names:
            return []
        values = item.get("record") or {}
        return [csv_cell(item.get("where", "")), *(csv_cell(values.get(c, "")) for c in names)]

    for item in document["individually_significant"]:
        writer.writerow(
            ["individually significant", csv_cell(item["id"]), item["amount"], "", "",
             *record(item), ""]
        )
    for item in document["items"]:
        units = " ".join(str(unit) for unit in item["units"])
        writer.writerow(
            ["sampled", csv_cell(item["id"]), item["amount"], item["hits"], units,
             *record(item), ""]
        )
    return out.getvalue()


_SIZING = {
    "poisson": "Poisson limits, gammaincinv(k + 1, confidence) (AICPA Audit Guide Audit "
    "Sampling, monetary-unit sampling)",
    "binomial": "binomial (Clopper-Pearson) limits over the sampling units",
    "hypergeometric": "hypergeometric tail over the monetary units of the book value",
    "expansion_factor": "conventional formula with expansion factors (common practice)",
}


def _sizing_method(document: Mapping[str, Any]) -> str:
    return f"{document['method']}: {_SIZING.get(document['method'], '')}"


def _selection_method(document: Mapping[str, Any]) -> str:
    return (
        f"{document['method']} selection of currency units; random stream from HMAC-SHA256 "
        f"(RFC 2104, FIPS 180-4), algorithm {document['algorithm']}"
    )


def _evaluation_method(document: Mapping[str, Any]) -> str:
    return (
        "Stringer bound (Stringer 1963) with Poisson and binomial factors; cell evaluation "
        "(Leslie, Teitlebaum & Anderson 1979); betting bound for bounded means "
        "(Waudby-Smith & Ramdas 2024, JRSS-B 86(1)); recommended: "
        f"{document['overstatement']['recommended']} for overstatements"
    )


_SHEET_TEXT = (
    "With Accept: application/vnd.openxmlformats-officedocument.spreadsheetml.sheet it is a "
    "test sheet (XLSX): the items to test with their book amount, hits and units, an "
    "audited amount column restricted to decimal numbers and a notes column, a sheet of the "
    "inputs, seed, fingerprints, algorithm and caution, and the selection recorded for the "
    "service to read back; completed, it is sent to /v1/monetary/evaluation. Every text is "
    "a string cell, never a formula."
)

_EVALUATION_ANSWER = (
    "overstatement",
    "understatement",
    "net_most_likely_misstatement",
    "conclusion",
    "limits",
)
"""What a ticket shows of a monetary-unit evaluation, of a list or of a test sheet."""

_SELECTION_TICKET = TicketLayout(
    answer=(
        "sample_size",
        "units_drawn",
        "sampling_interval",
        "items",
        "individually_significant",
        "excluded_count",
        "excluded_total",
        "seed",
        "population_fingerprint",
        "selection_fingerprint",
    ),
    method=_selection_method,
)

OPERATIONS = [
    Operation(
        name="monetary-sample-size",
        repeatable=True,
        path="/v1/monetary/sample-size",
        summary="Sample size for monetary-unit sampling",
        description=(
            "With t = tolerable_misstatement / book_value and e = expected_misstatement / "
            "book_value, the smallest n whose upper limit of the misstatement rate, if the "
            "expected taint total e x n occurs, is at most t (Poisson: gammaincinv(e n + 1, "
            "confidence) <= n t; binomial and hypergeometric likewise), or the conventional "
            "expansion-factor formula. Amounts are decimals (numbers or strings), answered "
            "as exact decimal strings."
        ),
        request=MonetarySampleSizeRequest,
        response=MonetaryPlanSchema,
        run=_size,
        tag="monetary-unit sampling",
        ticket=TicketLayout(
            answer=(
                "sample_size",
                "sampling_interval",
                "individually_significant_threshold",
                "basic_precision",
                "expected_upper_misstatement_limit",
                "risk_of_incorrect_acceptance",
                "achieved_risk_of_incorrect_acceptance",
            ),
            method=_sizing_method,
        ),
    ),
    Operation(
        name="monetary-selection",
        path="/v1/monetary/selection",
        takes_item_lists=True,
        precheck=_check_lists,
        summary="Select currency units reproducibly (monetary-unit sampling)",
        description=(
            "Selects sample_size currency units from a list of {id, amount} items by "
            "fixed_interval, cell or random_units selection. Items at or above the sampling "
            "interval are taken in full and listed apart, the interval being recomputed on "
            "the rest until no item reaches it; zero and negative amounts are excluded and "
            "reported. The units depend only on the items, sample size, seed, method and "
            "algorithm version, all reported with the fingerprints, so anyone can re-perform "
            "the selection. With Accept: text/csv the answer is a test sheet with an empty "
            "audited_amount column. " + _SHEET_TEXT
        ),
        request=MonetarySelectionRequest,
        response=MonetarySelectionSchema,
        run=_select,
        tag="monetary-unit sampling",
        renderers={CSV: render_selection_csv, XLSX: render_monetary_test_sheet},
        ticket=_SELECTION_TICKET,
        file_form=Operation(
            name="monetary-selection-from-file",
            path="/v1/monetary/selection",
            accepts_file=True,
            summary="Select currency units from a population file",
            description=(
                "A multipart/form-data body with the population file (CSV, XLSX or Parquet) "
                "as the file part and MonetaryFileSelectionRequest as the request part, the "
                "file described as population.file with id_column and amount_column. Each "
                "record kept by the filters and exclusions is the item {id, amount}, its "
                "amount read exactly in the declared style and with at most "
                "currency_decimals places, so the selection and both fingerprints are those "
                "of the same items sent as a JSON list, whatever the file's format or row "
                "order. Each selected or individually significant item adds where its "
                "record is in the file and the record with all its columns; records with a "
                "zero or negative amount are listed apart. CSV and XLSX answers as for the "
                "JSON form, with the records' columns."
            ),
            request=MonetaryFileSelectionRequest,
            response=MonetarySelectionSchema,
            run=_select_from_file,
            tag="monetary-unit sampling",
            renderers={CSV: render_selection_csv, XLSX: render_monetary_test_sheet},
            ticket=_SELECTION_TICKET,
        ),
    ),
    Operation(
        name="monetary-evaluation",
        repeatable=True,
        path="/v1/monetary/evaluation",
        takes_item_lists=True,
        precheck=_check_lists,
        summary="Evaluate the misstatements found in a monetary-unit sample",
        description=(
            "Taint = (book - audited) / book. Over- and understatements are evaluated "
            "separately: projected misstatement, basic precision, incremental allowance and "
            "upper misstatement limit by the Stringer bound (Poisson and binomial factors), "
            "cell evaluation and the betting bound, side by side; recommended is the tightest "
            "limit among the methods whose guarantee holds for the selection method. "
            "Individually significant items' misstatements count in full. With "
            "Accept: image/svg+xml the answer is a chart of each method's overstatement "
            "limit and projected misstatement against the tolerable misstatement."
        ),
        request=MonetaryEvaluationRequest,
        response=MonetaryEvaluationSchema,
        run=_evaluate,
        tag="monetary-unit sampling",
        renderers={SVG: render_margin},
        file_form=Operation(
            name="monetary-evaluation-of-test-sheet",
            path="/v1/monetary/evaluation",
            accepts_file=True,
            summary="Evaluate a completed monetary-unit test sheet",
            description=(
                "A multipart/form-data body with the completed monetary-unit test sheet "
                "(XLSX, from /v1/monetary/selection) as the file part and "
                "MonetarySheetEvaluationRequest as the request part. The sheet's rows must be "
                "exactly the selection's recorded items (a missing, added or changed row is "
                "refused with 422, listing them). Each item's audited amount is read as a "
                "decimal of at most the currency's places; a blank one means not tested and "
                "is refused unless not_tested says how to treat it. The items whose audited "
                "amount differs from the book amount are evaluated exactly as the JSON form "
                "evaluates the same misstatements, over the value sampled by units, the units "
                "drawn and the recorded selection method. With Accept: application/vnd."
                "openxmlformats-officedocument.spreadsheetml.sheet, the same workbook comes "
                "back with an Evaluation sheet added."
            ),
            request=MonetarySheetEvaluationRequest,
            response=MonetarySheetEvaluationSchema,
            run=_evaluate_sheet,
            tag="monetary-unit sampling",
            renderers={XLSX: render_evaluated_monetary_sheet, SVG: render_margin},
            ticket=TicketLayout(
                answer=(
                    "selection_fingerprint",
                    "items_tested",
                    "items_not_tested",
                    *_EVALUATION_ANSWER,
                ),
                method=_evaluation_method,
            ),
        ),
        ticket=TicketLayout(
            answer=("sample_size", "sampling_interval", *_EVALUATION_ANSWER),
            method=_evaluation_method,
        ),
    ),
]

bp = blueprint("monetary", OPERATIONS)
