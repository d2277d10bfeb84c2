"""Contract of population files: how to read one, and what its profile says.

A population file travels as the ``file`` part of a ``multipart/form-data`` request; the
``request`` part describes it under ``population.file``. Amounts in the request (control
total, thresholds, filter values on the amount column) are exact decimals: a JSON string
in plain notation (``"1234.56"``) or a JSON number, which is read as the decimal it is
written as (give more than 15 significant digits as a string). Amounts in answers are
strings in plain notation, exact.
"""

from __future__ import annotations

import json
import math
import re
from dataclasses import dataclass
from decimal import Decimal
from typing import Any, ClassVar

from marshmallow import ValidationError, fields, post_load, validate, validates_schema

from schemas.common import (
    ResultSchema,
    StrictSchema,
    summary_field,
)
from schemas.fields import (
    StrictInteger,
    StrictString,
    choice_field,
    count_field,
    json_kind,
    seed_field,
)
from service.sampling.populations.amounts import MAX_PLACES, STYLES
from service.sampling.populations.filters import COMPARISONS, MAX_IN_VALUES, Filter
from service.sampling.populations.profile import PopulationProfile
from service.sampling.populations.reading import DELIMITERS, FORMATS, PopulationFile
from service.sampling.selection import MAX_IDENTIFIER_LENGTH
from service.sampling.selection import METHODS as SELECTION_METHODS
from service.sampling.wording import CAUTION

_PLAIN = re.compile(rf"-?\d{{1,28}}(\.\d{{1,{MAX_PLACES}}})?")
MAX_EXCLUDED = 100_000
MAX_FILTERS = 50


class _BoundedList(fields.List[Any]):
    """A JSON array refused at once when longer than ``longest``, before any entry is read;
    an array of strings is checked as a whole (one pass), as identifier lists are."""

    def __init__(self, inner: fields.Field[Any], *, longest: int, noun: str, **kwargs: Any) -> None:
        self.longest, self.noun = longest, noun
        super().__init__(inner, **kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> Any:
        if isinstance(value, list) and len(value) > self.longest:
            raise ValidationError(
                f"at most {self.longest:,} {self.noun}; got {len(value):,}"
            )
        if isinstance(self.inner, StrictString) and isinstance(value, list):
            entries = value
            try:
                "".join(entries)  # one pass in C that fails on the first non-string
            except TypeError:
                first = next(i for i, e in enumerate(entries) if not isinstance(e, str))
                raise ValidationError(
                    {first: [f"must be a string, not {json_kind(entries[first])}"]}
                ) from None
            bad = next(
                (i for i, e in enumerate(entries) if not 0 < len(e) <= MAX_IDENTIFIER_LENGTH),
                None,
            )
            if bad is not None:
                raise ValidationError(
                    {bad: [f"must be 1 to {MAX_IDENTIFIER_LENGTH:,} characters long"]}
                )
            return entries
        return super()._deserialize(value, attr, data, **kwargs)
MAX_NAME = 1_000  # characters of a column or sheet name, or of a filter's text value
_NAME = validate.Length(min=1, max=MAX_NAME, error="must have between {min} and {max} characters")


class Amount(fields.Field[Decimal]):
    """An exact amount: a string in plain decimal notation, or a JSON number."""

    accepts_text = True  # the command line sends table cells for this field as they are

    default_error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        "invalid": "must be an amount (a number, or a string such as \"1234.56\"), not {kind}",
        "format": "must be written as digits with an optional '.' and at most "
        f"{MAX_PLACES} decimal places, such as \"-1234.56\"; got {{value!r}}",
    }

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> Decimal:
        if isinstance(value, bool) or not isinstance(value, str | int | float):
            raise self.make_error("invalid", kind=json_kind(value))
        if isinstance(value, float):
            if not math.isfinite(value):
                raise self.make_error("invalid", kind="a non-finite number")
            value = repr(value)
        text = str(value)
        if not _PLAIN.fullmatch(text):
            raise self.make_error("format", value=text[:40])
        return Decimal(text)

    def _serialize(self, value: Decimal | None, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        return None if value is None else str(value)


class StrictBoolean(fields.Boolean):
    """A JSON true or false; no strings or numbers."""

    default_error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        "invalid": "must be true or false, not {kind}",
    }

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> bool:
        if not isinstance(value, bool):
            raise self.make_error("invalid", kind=json_kind(value))
        return value


def _filter_value(value: Any) -> None:
    entries = value if isinstance(value, list) else [value]
    if isinstance(value, list) and len(value) > MAX_IN_VALUES:
        raise ValidationError(f"must hold at most {MAX_IN_VALUES:,} values")
    for entry in entries:
        if isinstance(entry, bool) or not isinstance(entry, str | int | float):
            raise ValidationError(f"values must be strings or numbers, not {json_kind(entry)}")
        if isinstance(entry, float) and not math.isfinite(entry):
            raise ValidationError("values must be finite numbers")
        if isinstance(entry, str) and len(entry) > MAX_NAME:
            raise ValidationError(f"text values must have at most {MAX_NAME:,} characters")


class FilterSchema(StrictSchema):
    """Keep the records whose column compares to the value."""

    column = StrictString(required=True, validate=_NAME, metadata={"example": "posted"})
    comparison = StrictString(
        required=True,
        validate=validate.OneOf(COMPARISONS, error="must be one of {choices}"),
        metadata={"example": "between"},
    )
    value = fields.Raw(
        required=True,
        validate=_filter_value,
        metadata={
            "description": "One value; a list for in; [low, high] (inclusive) for between. "
            "On the amount column, amounts (numbers, or text in the declared style) "
            "compared exactly; on any other column, strings compared as text (dates "
            "compare correctly written YYYY-MM-DD). A blank cell meets no filter.",
            "example": ["2026-07-01", "2026-09-30"],
        },
    )

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> Filter:
        value = data["value"]
        if isinstance(value, float):
            value = Decimal(repr(value))
        elif isinstance(value, list):
            value = [Decimal(repr(v)) if isinstance(v, float) else v for v in value]
        return Filter(data["column"], data["comparison"], value)


class PopulationFileSchema(StrictSchema):
    """How to read the uploaded population file."""

    id_column = StrictString(
        validate=_NAME,
        metadata={
            "description": "The column that identifies each record (a document number). "
            "Identifiers are used exactly as written; they must be distinct and not blank.",
            "example": "doc_no",
        },
    )
    row_numbers = StrictBoolean(
        metadata={
            "description": "Instead of id_column: identify records by their number in the "
            "file (1 for the first record after the header). Such a population depends on "
            "the file's row order.",
        },
    )
    amount_column = StrictString(
        validate=_NAME,
        metadata={"description": "The column that holds each record's amount.",
                  "example": "amount"},
    )
    amount_style = StrictString(
        load_default=STYLES[0],
        validate=validate.OneOf(STYLES, error="must be one of {choices}"),
        metadata={
            "description": "How the file writes amounts: 1,234.56 (the default; a leading "
            "minus for negatives), 1.234,56, or (1,234.56) (parentheses for negatives). "
            f"At most {MAX_PLACES} decimal places.",
        },
    )
    filters = _BoundedList(
        fields.Nested(FilterSchema),
        longest=MAX_FILTERS,
        noun="filters",
        validate=validate.Length(max=MAX_FILTERS, error="at most {max} filters"),
        metadata={"description": "Records are kept when they meet every filter."},
    )
    excluded = _BoundedList(
        StrictString(validate=validate.Length(min=1, max=MAX_IDENTIFIER_LENGTH)),
        longest=MAX_EXCLUDED,
        noun="identifiers",
        data_key="exclude",  # not `exclude`: a Schema has an attribute of that name
        validate=validate.Length(max=MAX_EXCLUDED, error="at most {max} identifiers"),
        metadata={
            "description": "Identifiers of records left out of the population (each must be "
            "in the file); with row_numbers, record numbers written as text.",
            "example": ["HLP-PO-10233"],
        },
    )
    sheet = StrictString(
        validate=_NAME,
        metadata={"description": "XLSX only: the sheet to read (default: the first)."}
    )
    format = StrictString(
        validate=validate.OneOf(FORMATS, error="must be one of {choices}"),
        metadata={"description": "Default: XLSX and Parquet are recognised by their first "
                  "bytes, anything else is read as CSV."},
    )
    delimiter = StrictString(
        validate=validate.OneOf(DELIMITERS, error="must be one of , ; | or a tab"),
        metadata={"description": "CSV only. Default: whichever of , ; tab | the header "
                  "line holds most (a comma when none)."},
    )

    @validates_schema
    def _one_identifier(self, data: dict[str, Any], **kwargs: Any) -> None:
        by_number = data.get("row_numbers", False)
        if ("id_column" in data) == by_number:
            raise ValidationError(
                "give either id_column or row_numbers: true, not both or neither"
            )

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> PopulationFile:
        return PopulationFile(
            id_column=data.get("id_column"),
            amount_column=data.get("amount_column"),
            amount_style=data["amount_style"],
            filters=tuple(data.get("filters", ())),
            exclude=tuple(data.get("excluded", ())),
            sheet=data.get("sheet"),
            format=data.get("format"),
            delimiter=data.get("delimiter"),
        )


class FilePopulationSchema(StrictSchema):
    """The population: a file, sent as the file part of the upload."""

    error_messages: ClassVar[dict[str, str]] = {  # type: ignore[misc]  # as in StrictSchema
        "unknown": "is not a field of this request",
        "type": "must be a JSON object",
    }

    file = fields.Nested(PopulationFileSchema, required=True)

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> PopulationFile:
        description: PopulationFile = data["file"]
        return description


class ProfileRequest(StrictSchema):
    """Describe and reconcile a population file."""

    population = fields.Nested(FilePopulationSchema, required=True)
    control_total = Amount(
        metadata={"description": "The ledger's total of the population, to reconcile with "
                  "(needs amount_column).", "example": "1284411.37"},
    )
    control_count = count_field(
        "The ledger's count of records in the population.", example=4200
    )
    strata = StrictInteger(
        validate=validate.Range(min=1, max=20, error="must be from {min} to {max}"),
        metadata={"description": "Number of amount strata to suggest (needs amount_column).",
                  "example": 3},
    )
    top_threshold = Amount(
        metadata={"description": "Amounts at or above this form the top stratum, taken in "
                  "full and kept out of the suggested strata.", "example": "25000"},
    )

    @validates_schema
    def _threshold(self, data: dict[str, Any], **kwargs: Any) -> None:
        threshold = data.get("top_threshold")
        if threshold is not None and threshold <= 0:
            raise ValidationError("must be above zero", "top_threshold")


# --------------------------------------------------------------------------- response


@dataclass(frozen=True)
class ProfileResult:
    """A profile with the file's name as uploaded."""

    profile: PopulationProfile
    filename: str


def _n(number: int, noun: str, plural: str | None = None) -> str:
    return f"{number:,} {noun if number == 1 else plural or noun + 's'}"


def profile_summary(result: ProfileResult) -> str:
    """The profile in one paragraph, ending with the caution."""
    p = result.profile
    text = (
        f"Read {_n(p.rows_read, 'record')} from the {p.format.upper()} file"
        f"{' ' + repr(result.filename) if result.filename else ''}; "
        f"{_n(p.rows_kept, 'record')} {'is' if p.rows_kept == 1 else 'are'} in the population"
    )
    if p.rows_meeting_filters != p.rows_read or p.rows_excluded:
        text += (
            f" ({_n(p.rows_read - p.rows_meeting_filters, 'record')} left out by the filters, "
            f"{_n(p.rows_excluded, 'record')} excluded by identifier)"
        )
    text += "."
    if p.id_column is not None:
        text += f" Column {p.id_column!r} holds {_n(p.distinct_ids, 'distinct identifier')}."
    if p.amounts is not None:
        a = p.amounts
        text += (
            f" Amounts in {a.column!r} total {a.total:,} over {_n(a.count, 'record')}, from "
            f"{a.minimum:,} to {a.maximum:,}."
            if a.count
            else f" Column {a.column!r} holds no amount."
        )
    r = p.reconciliation
    if r is not None:
        if r.reconciles:
            text += " The file reconciles with the control figures given."
        else:
            parts = []
            if r.total_difference:
                parts.append(f"its total differs from the control total by {r.total_difference:,}")
            if r.count_difference:
                parts.append(
                    f"its count differs from the control count by {r.count_difference:+,}"
                )
            text += " The file does not reconcile: " + " and ".join(parts) + " (file − control)."
    s = p.strata
    if s is not None:
        text += (
            f" Suggested {_n(len(s.strata), 'amount stratum', 'amount strata')} by the "
            "cumulative square root of frequency rule (Dalenius and Hodges 1959)"
        )
        if s.top_threshold is not None:
            text += (
                f", beside a top stratum of {_n(s.top_items, 'item')} at or above "
                f"{s.top_threshold:,} totalling {s.top_total:,}"
            )
        text += "."
    return f"{text} {CAUTION}"


def profile_warnings(result: ProfileResult) -> list[str]:
    """What the auditor should look into before selecting."""
    p = result.profile
    warnings = []
    if p.repeated_ids:
        first = p.repeated[0]
        warnings.append(
            f"{_n(p.repeated_ids, 'identifier')} appear on more than one record "
            f"({_n(p.repeated_rows, 'record')} in all), first {first.identifier!r} at "
            f"{', '.join(first.where)}: a selection from this file is refused until each "
            "identifier is on one record."
        )
    if p.blank_ids:
        warnings.append(
            f"{_n(p.blank_ids, 'record')} {'has' if p.blank_ids == 1 else 'have'} a blank "
            "identifier: a selection from this file is refused until every record has one."
        )
    if p.amounts is not None:
        a = p.amounts
        if a.blank:
            warnings.append(f"{_n(a.blank, 'record')} of the population have no amount.")
        if a.negative_count:
            warnings.append(
                f"{_n(a.negative_count, 'amount')} {'is' if a.negative_count == 1 else 'are'} "
                f"negative, totalling {a.negative_total:,}: credit notes or reversals may "
                "need testing of their own."
            )
        if a.zero_count:
            warnings.append(f"{_n(a.zero_count, 'amount')} {'is' if a.zero_count == 1 else 'are'}"
                            " zero.")
    s = p.strata
    if s is not None and s.asked >= 2 and len(s.strata) < s.asked:
        warnings.append(
            f"{s.asked} strata were asked for; the amounts support only {len(s.strata)} "
            "without an empty stratum."
        )
    if p.rows_kept == 0:
        warnings.append("No record is left in the population.")
    return warnings


class RepeatedSchema(ResultSchema):
    identifier = fields.String(required=True)
    where = fields.List(fields.String(), required=True,
                        metadata={"description": "Where each record is: 'line 12'."})


class AmountSummarySchema(ResultSchema):
    absent_when_none = ("minimum", "maximum")

    column = fields.String(required=True)
    count = fields.Integer(required=True, metadata={"description": "Records with an amount."})
    blank = fields.Integer(required=True, metadata={"description": "Records without one."})
    total = Amount(required=True)
    minimum = Amount()
    maximum = Amount()
    negative_count = fields.Integer(required=True)
    negative_total = Amount(required=True)
    zero_count = fields.Integer(required=True)


class ReconciliationSchema(ResultSchema):
    absent_when_none = ("control_total", "control_count", "total_difference",
                        "count_difference")

    control_total = Amount()
    control_count = fields.Integer()
    total_difference = Amount(metadata={"description": "File total − control total."})
    count_difference = fields.Integer(metadata={"description": "File count − control count."})
    reconciles = fields.Boolean(required=True)


class SelectedStratumSchema(ResultSchema):
    number = fields.Integer(required=True)
    low = Amount(metadata={"description": "Lowest amount (inclusive); null: no bound."})
    high = Amount(metadata={"description": "Amounts below this (exclusive); null: no bound."})
    items = fields.Integer(required=True)
    total = Amount(required=True)


class StrataSuggestionSchema(ResultSchema):
    absent_when_none = ("top_threshold",)

    asked = fields.Integer(required=True)
    classes = fields.Integer(
        required=True, metadata={"description": "Equal-width classes the rule counted in."}
    )
    strata = fields.List(fields.Nested(SelectedStratumSchema), required=True)
    top_threshold = Amount()
    top_items = fields.Integer(required=True)
    top_total = Amount(required=True)
    left_out_items = fields.Integer(
        required=True, metadata={"description": "Zero and negative amounts, in no stratum."}
    )


class ProfileSchema(ResultSchema):
    """What the population file holds."""

    absent_when_none = ("id_column", "amounts", "reconciliation", "strata")

    filename = fields.String(required=True)
    format = fields.String(required=True, attribute="profile.format")
    columns = fields.List(fields.String(), required=True, attribute="profile.columns")
    id_column = fields.String(attribute="profile.id_column")
    rows_read = fields.Integer(required=True, attribute="profile.rows_read")
    rows_meeting_filters = fields.Integer(required=True, attribute="profile.rows_meeting_filters")
    rows_excluded = fields.Integer(required=True, attribute="profile.rows_excluded")
    rows_kept = fields.Integer(
        required=True,
        attribute="profile.rows_kept",
        metadata={"description": "Records in the population: meeting the filters, not excluded."},
    )
    distinct_ids = fields.Integer(required=True, attribute="profile.distinct_ids")
    blank_ids = fields.Integer(required=True, attribute="profile.blank_ids")
    repeated_ids = fields.Integer(
        required=True,
        attribute="profile.repeated_ids",
        metadata={"description": "Identifiers found on more than one record."},
    )
    repeated_rows = fields.Integer(required=True, attribute="profile.repeated_rows")
    repeated = fields.List(
        fields.Nested(RepeatedSchema),
        required=True,
        attribute="profile.repeated",
        metadata={"description": "The first five repeated identifiers and where they are."},
    )
    amounts = fields.Nested(AmountSummarySchema, attribute="profile.amounts")
    reconciliation = fields.Nested(ReconciliationSchema, attribute="profile.reconciliation")
    strata = fields.Nested(StrataSuggestionSchema, attribute="profile.strata")
    summary = summary_field(profile_summary)
    warnings = fields.Function(
        profile_warnings,
        required=True,
        metadata={"type": "array", "items": {"type": "string"}},
    )


# --------------------------------------------------------------------------- stratified


class StrataSchema(StrictSchema):
    """How to cut the file's population into strata, and how many to take from each."""

    column = StrictString(
        validate=_NAME,
        metadata={"description": "One stratum per distinct value of this column (blank "
                  "cells form a stratum labelled \"\").", "example": "vendor"},
    )
    bands = fields.List(
        Amount(),
        validate=validate.Length(min=1, max=19, error="must list from {min} to {max} bounds"),
        metadata={"description": "Ascending amount bounds: stratum h holds the amounts from "
                  "bound h − 1 (inclusive) to bound h (exclusive), labelled \"[low, high)\" "
                  "with -inf and inf for open ends.", "example": ["1000", "10000"]},
    )
    top_threshold = Amount(
        metadata={"description": "Amounts at or above this form the stratum \"top\", taken "
                  "in full beside the sample_size.", "example": "50000"},
    )
    sizes = fields.Dict(
        keys=fields.String(),
        values=StrictInteger(validate=validate.Range(min=0, error="must be at least {min}")),
        metadata={"description": "The sample size of each stratum by label (strata not "
                  "named get 0); their sum must equal sample_size.",
                  "example": {"Quay Foods": 10, "Tide & Co": 5}},
    )
    allocation = StrictString(
        load_default="proportional",
        validate=validate.OneOf(("proportional", "neyman"), error="must be one of {choices}"),
        metadata={"description": "Without sizes: sample_size shared in proportion to the "
                  "strata's sizes, or to N_h × S_h (Neyman; S_h the standard deviation of the "
                  "stratum's amounts), by largest remainders."},
    )

    @validates_schema
    def _one_way(self, data: dict[str, Any], **kwargs: Any) -> None:
        if ("column" in data) == ("bands" in data):
            raise ValidationError("give either column or bands, not both or neither")


class StratifiedRequest(StrictSchema):
    """Select stratum by stratum from a population file."""

    population = fields.Nested(FilePopulationSchema, required=True)
    strata = fields.Nested(StrataSchema, required=True)
    sample_size = count_field(
        "Records to select from the strata below the top stratum.",
        minimum=1,
        example=40,
        required=True,
    )
    seed = seed_field(
        "Any text; each stratum's seed is derived from it. Absent: the service generates one "
        "and returns it.",
        example="harbour-lane-2026-q3",
    )
    method = choice_field(
        SELECTION_METHODS,
        "Within each stratum, random: simple random sampling without replacement; "
        "systematic: one record per interval of stratum size / stratum sample size from a "
        "random start. Default: random.",
        default="random",
    )

    @validates_schema
    def _sizes_add_up(self, data: dict[str, Any], **kwargs: Any) -> None:
        sizes = (data.get("strata") or {}).get("sizes")
        if sizes is not None and sum(sizes.values()) != data.get("sample_size"):
            raise ValidationError(
                f"the strata sizes add up to {sum(sizes.values()):,}, not sample_size",
                "sample_size",
            )


@dataclass(frozen=True)
class StratifiedResult:
    """A stratified selection with the facts of the request the response repeats."""

    selection: Any  # StratifiedSelection
    columns: tuple[str, ...]
    seed_generated: bool
    filename: str


def _stratum(stratum: Any) -> dict[str, Any]:
    chosen = stratum.selection
    return {
        "label": stratum.label,
        "population_size": stratum.population_size,
        "total": None if stratum.total is None else str(stratum.total),
        "standard_deviation": stratum.standard_deviation,
        "sample_size": stratum.sample_size,
        "taken_in_full": stratum.taken_in_full,
        "seed": stratum.seed,
        "population_fingerprint": None if chosen is None else chosen.population_fingerprint,
        "selection_fingerprint": None if chosen is None else chosen.selection_fingerprint,
        "items": [] if chosen is None else list(chosen.items),
        "where": [] if chosen is None else list(chosen.where),
        "records": [] if chosen is None else list(chosen.records),
    }


def stratified_summary(result: StratifiedResult) -> str:
    chosen = result.selection
    top = [s for s in chosen.strata if s.label == "top"]
    how = "simple random sampling" if chosen.method == "random" else "systematic selection"
    strata = _n(len(chosen.strata), "stratum", "strata")
    text = f"Selected {chosen.sample_size:,} records from {strata} of the file by {how} within"
    text += " each stratum"
    if chosen.allocation == "neyman":
        text += ", sizes allocated by Neyman allocation"
    elif chosen.allocation:
        text += ", sizes allocated in proportion to the strata sizes"
    text += "."
    if top:
        text += f" The top stratum ({_n(top[0].population_size, 'record')}) is taken in full."
    text += (
        f" Each stratum's seed is derived from the seed {json.dumps(chosen.seed)} and the "
        "stratum's label (SHA-256), so each stratum can be re-performed alone as a list of "
        "its identifiers with its own seed."
    )
    return f"{text} {CAUTION}"


def stratified_warnings(result: StratifiedResult) -> list[str]:
    warnings = []
    if result.seed_generated:
        warnings.append(
            "The seed was generated by the service: record it with the selection, because "
            "without it the selection cannot be re-performed."
        )
    empty = [s.label for s in result.selection.strata if s.sample_size == 0]
    if empty:
        warnings.append(
            f"No record is selected from {_n(len(empty), 'stratum', 'strata')}: "
            f"{', '.join(map(repr, empty[:5]))}."
        )
    return warnings


class StratifiedSchema(ResultSchema):
    """A stratified selection from a population file."""

    filename = fields.String(required=True)
    columns = fields.List(fields.String(), required=True)
    sample_size = fields.Integer(required=True, attribute="selection.sample_size")
    seed = fields.String(required=True, attribute="selection.seed")
    seed_generated = fields.Boolean(required=True)
    method = fields.String(required=True, attribute="selection.method")
    allocation = fields.String(attribute="selection.allocation", allow_none=True)
    strata = fields.Function(
        lambda result: [_stratum(s) for s in result.selection.strata],
        required=True,
        metadata={"type": "array", "items": {"type": "object"},
                  "description": "Each stratum: label, population_size, total, "
                  "standard_deviation, sample_size, taken_in_full, its derived seed, its "
                  "population and selection fingerprints, and the selected items, where "
                  "each is in the file, and the records, in draw order."},
    )
    summary = summary_field(stratified_summary)
    warnings = fields.Function(
        stratified_warnings, required=True,
        metadata={"type": "array", "items": {"type": "string"}},
    )
