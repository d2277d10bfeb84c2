"""Contract of the selection endpoint: which items to test, reproducibly.

The population comes in one of three forms -- a count of numbered items, document-number
ranges less excluded numbers, or a list of identifiers. A list may hold a million entries,
so the list fields below check the whole list in one pass instead of running a field per
entry (which costs microseconds each, seconds per million), and name the first few bad
entries by index, as ``population.items[12]``.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, ClassVar

from marshmallow import (
    ValidationError,
    fields,
    post_load,
    validate,
    validates_schema,
)

from schemas.common import (
    ResultSchema,
    StrictSchema,
    summary_field,
)
from schemas.fields import MAX_EXACT_INTEGER, StrictInteger, StrictString, json_kind
from schemas.populations import PopulationFileSchema
from schemas.test_sheet_fields import AttributeNames
from service.sampling.populations.reading import PopulationFile
from service.sampling.selection import (
    ALGORITHM_ID,
    MAX_IDENTIFIER_LENGTH,
    MAX_SEED_LENGTH,
    METHODS,
    ItemPopulation,
    NumberedPopulation,
    Population,
    RangePopulation,
    Selection,
)
from service.sampling.wording import CAUTION

SHOWN = 5
"""How many bad entries of a list are named, each by its index, before the rest are counted."""

FORMS = ("size", "ranges", "items", "file")


# --------------------------------------------------------------------------- list fields


def _whole_number(value: Any) -> int | str:
    """``value`` as an int, or what is wrong with it (the rules of :class:`StrictInteger`)."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        return f"must be a whole number, not {json_kind(value)}"
    if isinstance(value, float):
        if not math.isfinite(value):
            return "must be a whole number, not a non-finite number"
        if not value.is_integer():
            return f"must be a whole number; got {value!r}"
    if abs(value) > MAX_EXACT_INTEGER:
        return f"must be at most {MAX_EXACT_INTEGER:,}"
    return int(value)


def _entry_errors(problems: list[tuple[int, Any]], total_bad: int, noun: str) -> dict[Any, Any]:
    """marshmallow's per-index error layout for the first bad entries, and a count of the rest."""
    errors: dict[Any, Any] = dict(problems)
    if total_bad > len(problems):
        errors["_schema"] = [
            f"{total_bad:,} {noun} are invalid; the first {len(problems)} are named by index"
        ]
    return errors


def _first_bad(
    value: list[Any], check: Callable[[Any], Any | None]
) -> tuple[list[tuple[int, Any]], int]:
    """The first :data:`SHOWN` (index, message) pairs where ``check`` objects, and how many."""
    shown: list[tuple[int, Any]] = []
    bad = 0
    for index, entry in enumerate(value):
        message = check(entry)
        if message is not None:
            bad += 1
            if len(shown) < SHOWN:
                shown.append((index, message if isinstance(message, dict) else [message]))
    return shown, bad


class _ListField(fields.List[Any]):
    """A JSON array checked as a whole; the inner field only describes entries in the spec."""

    default_error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        "invalid": "must be an array, not {kind}",
    }
    noun = "entries"

    def _check_list(self, value: Any) -> list[Any]:
        if not isinstance(value, list):
            raise self.make_error("invalid", kind=json_kind(value))
        return value

    def _fail(self, shown: list[tuple[int, Any]], bad: int) -> ValidationError:
        return ValidationError(_entry_errors(shown, bad, self.noun))


class IdentifierList(_ListField):
    """A JSON array of strings: one pass in C checks every entry's type."""

    noun = "identifiers"

    def __init__(self, **kwargs: Any) -> None:
        entry = StrictString(metadata={"minLength": 1, "maxLength": MAX_IDENTIFIER_LENGTH})
        super().__init__(entry, **kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> list[Any]:
        entries = self._check_list(value)
        try:
            "".join(entries)  # a single pass in C that fails on the first non-string
        except TypeError:
            pass
        else:
            return entries
        shown, bad = _first_bad(
            entries,
            lambda x: None if isinstance(x, str) else f"must be a string, not {json_kind(x)}",
        )
        raise self._fail(shown, bad)


class NumberList(_ListField):
    """A JSON array of whole numbers; ``10007.0`` is read as 10007, as by StrictInteger."""

    noun = "numbers"

    def __init__(self, **kwargs: Any) -> None:
        super().__init__(StrictInteger(), **kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> list[Any]:
        entries = self._check_list(value)
        # Exact type, so that a boolean is not taken for a number.
        if set(map(type, entries)) <= {int} and max(map(abs, entries), default=0) <= (
            MAX_EXACT_INTEGER
        ):
            return entries
        numbers = [_whole_number(x) for x in entries]
        shown, bad = _first_bad(numbers, lambda x: x if isinstance(x, str) else None)
        if bad:
            raise self._fail(shown, bad)
        return numbers  # every entry is an int by now


class RangeSchema(StrictSchema):
    """An inclusive range of document numbers."""

    first = StrictInteger(
        required=True,
        metadata={"description": "First number of the range.", "minimum": 0, "example": 10001},
    )
    last = StrictInteger(
        required=True,
        metadata={
            "description": "Last number of the range, not below first.",
            "minimum": 0,
            "example": 14200,
        },
    )


def _range_entry(entry: Any) -> tuple[int, int] | dict[str, list[str]]:
    """A range as ``(first, last)``, or its errors by key."""
    if not isinstance(entry, dict):
        return {"_schema": [f"must be an object with first and last, not {json_kind(entry)}"]}
    errors: dict[str, list[str]] = {
        key: ["is not a field of this request"] for key in entry if key not in ("first", "last")
    }
    bounds: list[int] = []
    for key in ("first", "last"):
        if key not in entry:
            errors[key] = ["is required"]
            continue
        number = _whole_number(entry[key])
        if isinstance(number, str):
            errors[key] = [number]
        else:
            bounds.append(number)
    return errors if errors else (bounds[0], bounds[1])


class RangeList(_ListField):
    """A JSON array of ``{"first": …, "last": …}`` objects, checked in one pass."""

    noun = "ranges"

    def __init__(self, **kwargs: Any) -> None:
        super().__init__(fields.Nested(RangeSchema), **kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> list[Any]:
        entries = [_range_entry(entry) for entry in self._check_list(value)]
        shown, bad = _first_bad(entries, lambda x: x if isinstance(x, dict) else None)
        if bad:
            raise self._fail(shown, bad)
        return entries  # every entry is a pair by now


# --------------------------------------------------------------------------- request


class SelectionPopulationSchema(StrictSchema):
    """The population: exactly one of size, ranges (with exclude) or items."""

    error_messages: ClassVar[dict[str, str]] = {  # type: ignore[misc]  # as in StrictSchema
        "unknown": "is not a field of this request",
        "type": "must be a JSON object",
    }

    size = StrictInteger(
        validate=validate.Range(min=1, error="must be at least {min}"),
        metadata={
            "description": "Numbered items 1 to size; item p is at position p.",
            "example": 4200,
        },
    )
    ranges = RangeList(
        metadata={
            "description": "Inclusive ranges of document numbers (0 to 2^53 − 1), in any "
            "order, not overlapping. The population is every number in a range and not in "
            "exclude, in ascending order.",
        },
    )
    excluded = NumberList(
        data_key="exclude",  # not `exclude`: a Schema has an attribute of that name
        metadata={
            "description": "With ranges only: numbers inside the ranges that are not part of "
            "the population (voided documents, for example), each once.",
            "example": [10007, 10233],
        },
    )
    items = IdentifierList(
        metadata={
            "description": "Distinct, non-empty identifiers of at most 1,000 characters "
            "without the character U+0000, at most the service's item limit (1,000,000 by "
            "default). Used exactly as given (no "
            "trimming, case folding or Unicode normalisation); their order does not matter. "
            "The population is the list in ascending Unicode code point order.",
            "example": ["PO-10001", "PO-10002", "PO-10003"],
        },
    )
    file = fields.Nested(
        PopulationFileSchema,
        metadata={
            "description": "The population file sent as the file part of a "
            "multipart/form-data request (this JSON being its request part): how to read "
            "it and which records belong to the population. With id_column, the population "
            "is the identifiers of the records kept, in the canonical form of items (so the "
            "same identifiers as items, or the file in another row order or format, give "
            "the same selection and fingerprints); with row_numbers, the record numbers "
            "kept, as ranges. The answer adds the selected records with all their columns.",
        },
    )

    @validates_schema
    def _one_form(self, data: dict[str, Any], **kwargs: Any) -> None:
        given = [form for form in FORMS if form in data]
        if len(given) != 1:
            got = "none of them" if not given else " and ".join(given)
            raise ValidationError(f"give exactly one of size, ranges, items or file; got {got}")
        if "excluded" in data and given != ["ranges"]:
            raise ValidationError(
                f"exclude lists numbers left out of ranges; it cannot be used with {given[0]}",
                "exclude",
            )

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> Population | PopulationFile:
        if "file" in data:
            file: PopulationFile = data["file"]
            return file
        if "size" in data:
            return NumberedPopulation(data["size"])
        if "ranges" in data:
            return RangePopulation(tuple(data["ranges"]), tuple(data.get("excluded", ())))
        return ItemPopulation(tuple(data["items"]))


def _seed_length(seed: str) -> None:
    if not seed:
        raise ValidationError("must not be empty")
    if len(seed) > MAX_SEED_LENGTH:
        raise ValidationError(
            f"has {len(seed):,} characters; the limit is {MAX_SEED_LENGTH} characters"
        )


class SelectionRequest(StrictSchema):
    """Select sample items reproducibly."""

    population = fields.Nested(
        SelectionPopulationSchema,
        required=True,
        metadata={
            "description": "Exactly one of size (numbered items), ranges (document numbers, "
            "with exclude for numbers left out) or items (a list of identifiers)."
        },
    )
    sample_size = StrictInteger(
        required=True,
        validate=validate.Range(min=1, error="must be at least {min}"),
        metadata={
            "description": "Number of items to select, at most the population size.",
            "example": 60,
        },
    )
    seed = StrictString(
        validate=_seed_length,
        metadata={
            "minLength": 1,
            "maxLength": MAX_SEED_LENGTH,
            "description": "Any text, used exactly as given (no trimming). Absent: the "
            "service generates one from a cryptographic source and returns it. The same "
            "population, sample size, seed and method always give the same items.",
            "example": "fictional-co-2026-q3",
        },
    )
    method = StrictString(
        load_default="random",
        validate=validate.OneOf(METHODS, error="must be one of {choices}"),
        metadata={
            "description": "random: simple random sampling without replacement. systematic: "
            "one item per interval of population size / sample size from a random start.",
        },
    )
    attributes = AttributeNames(
        metadata={
            "description": "The attributes (control conditions) each selected item is tested "
            "for. With Accept: application/vnd.openxmlformats-officedocument.spreadsheetml"
            ".sheet, the answer is then a test sheet with a result and a notes column per "
            "attribute; POST the completed sheet to /v1/evaluation.",
            "example": ["approved before release", "three-way match"],
        },
    )


# --------------------------------------------------------------------------- response


@dataclass(frozen=True)
class SelectionResult:
    """A selection with the facts of the request the response repeats."""

    selection: Selection
    population: Population | PopulationFile
    seed_generated: bool
    attributes: tuple[str, ...] | None = None


def _count(number: int, noun: str, plural: str | None = None) -> str:
    return f"{number:,} {noun if number == 1 else plural or noun + 's'}"


def population_phrase(population: Population | PopulationFile, size: int) -> str:
    """The population in words: "4,197 document numbers (1 range less 3 excluded numbers)"."""
    if isinstance(population, PopulationFile):
        if population.id_column is None:
            return f"{_count(size, 'record')} of the file (identified by record number)"
        return (
            f"{_count(size, 'record')} of the file (identified by column "
            f"{population.id_column!r}, in Unicode code point order)"
        )
    if isinstance(population, NumberedPopulation):
        return f"{_count(size, 'numbered item')} (1 to {size:,})"
    if isinstance(population, RangePopulation):
        ranges = _count(len(population.ranges), "range")
        excluded = len(population.exclude)
        if excluded:
            ranges += f" less {_count(excluded, 'excluded number')}"
        return f"{_count(size, 'document number')} ({ranges})"
    return f"{_count(size, 'listed identifier')} (in Unicode code point order)"


def _fraction(exact: str | None, approximate: float | None) -> str:
    return f"{exact} (about {approximate:,.2f})"


def selection_summary(result: SelectionResult) -> str:
    """One paragraph describing the selection and how to re-perform it."""
    chosen = result.selection
    n, size = chosen.sample_size, chosen.population_size
    origin = "generated by the service" if result.seed_generated else "supplied with the request"
    text = f"Selected {n:,} of {population_phrase(result.population, size)}"
    if chosen.method == "systematic":
        text += (
            f" systematically: one item in every interval of "
            f"{_fraction(chosen.interval_exact, chosen.interval)} positions from a random start "
            f"of {_fraction(chosen.start_exact, chosen.start)}; selection k (k = 0 to "
            f"{n - 1:,}) is position floor(start + k × interval) + 1."
        )
    else:
        text += (
            " by simple random sampling without replacement (partial Fisher–Yates shuffle). "
            "Items are listed in the order drawn; "
            + ("the first item" if n == 1 else f"the first {n:,} items")
            + " of a larger selection with the same population and seed "
            + ("is this same item" if n == 1 else "are these same items")
            + ", so the sample can be extended, or unusable items replaced, in draw order."
        )
    text += (
        f" Seed {json.dumps(chosen.seed, ensure_ascii=False)} ({origin}), algorithm "
        f"{chosen.algorithm}. The same population, "
        "sample size, seed and method give the same items to anyone who re-performs the "
        f"selection; its selection fingerprint is {chosen.selection_fingerprint}."
    )
    return f"{text} {CAUTION}"


def selection_warnings(result: SelectionResult) -> list[str]:
    """Facts the auditor should act on: an unrecorded seed, the limits of systematic order."""
    chosen = result.selection
    warnings = []
    if result.seed_generated:
        warnings.append(
            "The seed was generated by the service: record it with the selection, because "
            "without it the selection cannot be re-performed."
        )
    if chosen.method == "systematic":
        warnings.append(
            "A systematic selection assumes the population order has no pattern that repeats "
            "at about the interval; if it may, use the random method. A systematic sample "
            "cannot be extended with the same seed: another sample size changes the interval "
            "and every selection."
        )
        if isinstance(result.population, ItemPopulation) or (
            isinstance(result.population, PopulationFile) and result.population.id_column
        ):
            warnings.append(
                "The interval runs over the identifiers in Unicode code point order, not in "
                "the order in which they were listed."
            )
    if chosen.sample_size == chosen.population_size:
        warnings.append("The sample is the whole population.")
    return warnings


_ITEM = {"oneOf": [{"type": "integer"}, {"type": "string"}]}


def _file_part(result: SelectionResult, name: str) -> Any:
    value = getattr(result.selection, name, None)
    if value is None or not isinstance(result.population, PopulationFile):
        return None
    return list(value)


def _pull_list(result: SelectionResult) -> list[dict[str, Any]] | None:
    """The selected items sorted by canonical position, with draw number and location."""
    where = getattr(result.selection, "where", None)
    if where is None or not isinstance(result.population, PopulationFile):
        return None
    chosen = result.selection
    drawn = sorted(
        zip(chosen.positions, chosen.items, where, range(1, len(where) + 1), strict=True)
    )
    return [
        {"item": item, "draw": draw, "position": position, "where": at}
        for position, item, at, draw in drawn
    ]


class SelectionSchema(ResultSchema):
    """A reproducible selection of sample items."""

    absent_when_none = (
        "sampling_interval",
        "sampling_interval_exact",
        "start",
        "start_exact",
        "attributes",
        "columns",
        "records",
        "pull_list",
    )

    items = fields.Function(
        lambda result: list(result.selection.items),
        required=True,
        metadata={
            "type": "array",
            "items": _ITEM,
            "description": "The selected items in draw order: numbers for size and ranges, "
            "identifiers for items.",
        },
    )
    positions = fields.Function(
        lambda result: list(result.selection.positions),
        required=True,
        metadata={
            "type": "array",
            "items": {"type": "integer"},
            "description": "positions[k] is the 1-based position of items[k] in the "
            "population's canonical order (ascending numbers; identifiers in Unicode code "
            "point order).",
        },
    )
    sample_size = fields.Integer(required=True, attribute="selection.sample_size")
    population_size = fields.Integer(
        required=True,
        attribute="selection.population_size",
        metadata={"description": "Items in the population, after exclusions."},
    )
    seed = fields.String(required=True, attribute="selection.seed")
    seed_generated = fields.Boolean(
        required=True,
        metadata={"description": "True when the request gave no seed and the service made one."},
    )
    method = fields.String(required=True, attribute="selection.method")
    algorithm = fields.String(
        required=True,
        attribute="selection.algorithm",
        metadata={
            "description": "Selection algorithm and version, one per method "
            "(sha256-counter-fisher-yates/v1 for random, hmac-sha256-systematic/v1 for "
            "systematic); fixed for each version.",
            "example": ALGORITHM_ID,
        },
    )
    population_fingerprint = fields.String(
        required=True,
        attribute="selection.population_fingerprint",
        metadata={"description": "SHA-256 (hex) of the population in canonical form."},
    )
    selection_fingerprint = fields.String(
        required=True,
        attribute="selection.selection_fingerprint",
        metadata={
            "description": "SHA-256 (hex) binding the population fingerprint, seed, method, "
            "sample size and algorithm version."
        },
    )
    sampling_interval = fields.Float(
        attribute="selection.interval",
        metadata={"description": "Systematic only: population size / sample size."},
    )
    sampling_interval_exact = fields.String(
        attribute="selection.interval_exact",
        metadata={
            "description": "Systematic only: the sampling interval exactly, as N/n.",
            "example": "4201/60",
        },
    )
    start = fields.Float(
        attribute="selection.start",
        metadata={
            "description": "Systematic only: the random start, 0 ≤ start < sampling_interval."
        },
    )
    start_exact = fields.String(
        attribute="selection.start_exact",
        metadata={
            "description": "Systematic only: the start exactly, as r/n.",
            "example": "976/60",
        },
    )
    attributes = fields.List(
        fields.String(),
        metadata={"description": "The attributes to be tested, as the request named them."},
    )
    columns = fields.Function(
        lambda result: _file_part(result, "columns"),
        metadata={
            "type": "array",
            "items": {"type": "string"},
            "description": "File populations only: the file's column names, in its order.",
        },
    )
    records = fields.Function(
        lambda result: _file_part(result, "records"),
        metadata={
            "type": "array",
            "items": {"type": "object", "additionalProperties": {"type": "string"}},
            "description": "File populations only: the selected records in draw order, each "
            "with every column's text as written in the file (blank cells as \"\").",
        },
    )
    pull_list = fields.Function(
        _pull_list,
        metadata={
            "type": "array",
            "items": {"type": "object"},
            "description": "File populations only: the selected records sorted by "
            "identifier (canonical position), each with its draw number and where it is in "
            "the file, to pull the documents in file order.",
        },
    )
    summary = summary_field(selection_summary)
    warnings = fields.Function(
        selection_warnings,
        required=True,
        metadata={"type": "array", "items": {"type": "string"}},
    )
