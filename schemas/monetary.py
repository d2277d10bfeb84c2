"""Contract of the monetary-unit sampling endpoints: sample size, selection, evaluation.

Amounts are read with :class:`~schemas.fields.Amount` (a JSON number of at most 15
significant digits or a decimal string, kept exact) and answered as decimal strings at the
currency's scale, so that no total or interval passes through binary floating point. The
exact sampling interval is also given as a reduced fraction (``"125000/3"``).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from decimal import Decimal
from typing import Any

from marshmallow import Schema, ValidationError, fields, missing, pre_dump, validate

from schemas.common import ResultSchema, StrictSchema
from schemas.fields import (
    PLAIN_DECIMAL,
    Amount,
    Rate,
    StrictInteger,
    StrictString,
    choice_field,
    confidence_field,
    count_field,
    json_kind,
    seed_field,
)
from schemas.populations import FilePopulationSchema
from service.sampling.monetary.amounts import DEFAULT_SCALE, MAX_SCALE, fraction_text
from service.sampling.monetary.evaluation import (
    DIRECTIONS,
    DirectionResult,
    MonetaryEvaluation,
)
from service.sampling.monetary.evaluation import METHODS as EVALUATION_METHODS
from service.sampling.monetary.files import MonetaryFileSelection
from service.sampling.monetary.selection import METHODS as SELECTION_METHODS
from service.sampling.monetary.selection import MonetarySelection
from service.sampling.monetary.sizing import METHODS as SIZING_METHODS
from service.sampling.monetary.sizing import MonetaryPlan
from service.sampling.monetary.wording import (
    evaluation_summary,
    money,
    plan_summary,
    selection_summary,
)


def _amount(description: str, example: str, **kwargs: Any) -> Amount:
    return Amount(
        metadata={"type": ["number", "string"], "description": description, "example": example},
        **kwargs,
    )


def _decimals() -> StrictInteger:
    return StrictInteger(
        load_default=DEFAULT_SCALE,
        validate=validate.Range(min=0, max=MAX_SCALE, error="must be from {min} to {max}"),
        metadata={
            "description": "Decimal places of the smallest currency unit (2 for cents). "
            "Amounts with more decimals are refused.",
            "example": 2,
        },
    )


def _confidence() -> Rate:
    return confidence_field(
        "Confidence, one minus the risk of incorrect acceptance.", bounds=None
    )


def _choice(names: tuple[str, ...], default: str, description: str) -> StrictString:
    return choice_field(names, f"{description} Default: {default}.", default=default)


def _money(description: str = "", **kwargs: Any) -> fields.String:
    text = "Decimal string, exact to the currency unit."
    return fields.String(
        required=True,
        metadata={"description": f"{description} {text}".strip(), "example": "41666.67"},
        **kwargs,
    )


def money_text(units: Any, scale: int) -> str | None:
    """Units as a decimal string without separators (``"41666.67"``), None kept."""
    if units is None:
        return None
    return money(units, scale).replace(",", "")


SHOWN = 5
"""How many bad entries of a list are named, each by its index, before the rest are counted."""


class RecordList(fields.List):  # type: ignore[type-arg]
    """A JSON array of flat objects read field by field, without a schema load per entry.

    A population may list a million items; loading a nested schema for each costs tens of
    microseconds, so each entry's fields are read directly with the entry schema's own
    fields (the same rules and messages). The first :data:`SHOWN` bad entries are named by
    index (``population[12].amount``) and the rest counted.
    """

    default_error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        "invalid": "must be an array, not {kind}",
    }

    def __init__(
        self,
        schema: type[Schema],
        fast: Callable[[Any], dict[str, Any] | None] | None = None,
        **kwargs: Any,
    ) -> None:
        super().__init__(fields.Nested(schema), **kwargs)
        # Reads the common well-formed entry directly; None sends it through the fields.
        self.fast = fast
        self.entry_fields = [
            (field.data_key or name, name, field) for name, field in schema().fields.items()
        ]
        self.known = {key for key, _, _ in self.entry_fields}

    def _entry(self, entry: Any) -> tuple[dict[str, Any] | None, dict[str, list[str]]]:
        if not isinstance(entry, dict):
            return None, {"_schema": [f"must be a JSON object, not {json_kind(entry)}"]}
        errors: dict[str, list[str]] = {
            key: ["is not a field of this request"] for key in entry if key not in self.known
        }
        record: dict[str, Any] = {}
        for key, name, field in self.entry_fields:
            try:
                value = field.deserialize(entry.get(key, missing))
            except ValidationError as exc:
                messages = exc.messages
                errors[key] = messages if isinstance(messages, list) else [str(messages)]
                continue
            if value is not missing:
                record[name] = value
        return (None, errors) if errors else (record, errors)

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> list[Any]:
        if not isinstance(value, list):
            raise self.make_error("invalid", kind=json_kind(value))
        records: list[Any] = []
        problems: dict[Any, Any] = {}
        bad = 0
        fast = self.fast
        for index, entry in enumerate(value):
            quick = fast(entry) if fast is not None else None
            if quick is not None:
                records.append(quick)
                continue
            record, errors = self._entry(entry)
            if errors:
                bad += 1
                if len(problems) < SHOWN:
                    problems[index] = errors
            else:
                records.append(record)
        if bad:
            if bad > len(problems):
                problems["_schema"] = [
                    f"{bad:,} entries are invalid; the first {len(problems)} are named by index"
                ]
            raise ValidationError(problems)
        for validator in self.validators:
            validator(records)
        return records


# --------------------------------------------------------------------------- sample size


class MonetarySampleSizeRequest(StrictSchema):
    """Monetary-unit sample size for a test of details."""

    book_value = _amount(
        "Total recorded amount of the population, above 0.", "2500000.00", required=True
    )
    tolerable_misstatement = _amount(
        "Tolerable misstatement, above 0 and below book_value.", "125000.00", required=True
    )
    expected_misstatement = _amount(
        "Expected misstatement, at least 0 and below tolerable_misstatement. Default 0.",
        "0",
    )
    confidence = _confidence()
    method = _choice(
        SIZING_METHODS,
        "poisson",
        "poisson, binomial or hypergeometric (exact definitions), or expansion_factor "
        "(the conventional formula of audit practice).",
    )
    currency_decimals = _decimals()


class MonetaryPlanSchema(ResultSchema):
    """A monetary-unit sample size."""

    book_value = _money()
    tolerable_misstatement = _money()
    expected_misstatement = _money()
    confidence = fields.Float(required=True)
    method = fields.String(required=True)
    sample_size = fields.Integer(required=True, metadata={"description": "Sampling units."})
    sampling_interval = _money("book_value / sample_size, rounded half-even.")
    sampling_interval_exact = fields.String(
        required=True,
        metadata={"description": "book_value / sample_size exactly, as a reduced fraction."},
    )
    individually_significant_threshold = _money(
        "Items at or above this amount are certain to be selected and are tested in full."
    )
    basic_precision = _money("RF(0) x sampling_interval: the limit when no misstatement is found.")
    expected_upper_misstatement_limit = _money(
        "The Poisson upper limit if the expected misstatement occurs."
    )
    risk_of_incorrect_acceptance = fields.Float(required=True)
    achieved_risk_of_incorrect_acceptance = fields.Float(
        required=True,
        metadata={
            "description": "Poisson probability of the expected misstatement or less when "
            "the misstatement equals the tolerable misstatement."
        },
    )
    currency_decimals = fields.Integer(required=True)
    summary = fields.String(required=True)
    warnings = fields.List(fields.String(), required=True)

    @pre_dump
    def _view(self, plan: MonetaryPlan, **kwargs: Any) -> dict[str, Any]:
        s = plan.scale
        return {
            "book_value": money_text(plan.book_value, s),
            "tolerable_misstatement": money_text(plan.tolerable_misstatement, s),
            "expected_misstatement": money_text(plan.expected_misstatement, s),
            "confidence": plan.confidence,
            "method": plan.method,
            "sample_size": plan.sample_size,
            "sampling_interval": money_text(plan.sampling_interval, s),
            "sampling_interval_exact": fraction_text(plan.sampling_interval, s),
            "individually_significant_threshold": money_text(plan.sampling_interval, s),
            "basic_precision": money_text(plan.basic_precision, s),
            "expected_upper_misstatement_limit": money_text(plan.expected_upper_limit, s),
            "risk_of_incorrect_acceptance": plan.risk_of_incorrect_acceptance,
            "achieved_risk_of_incorrect_acceptance": plan.achieved_risk_of_incorrect_acceptance,
            "currency_decimals": s,
            "summary": plan_summary(plan),
            "warnings": list(plan.warnings),
        }


# --------------------------------------------------------------------------- selection


class MonetaryItemSchema(StrictSchema):
    """One item of the population: its identifier and recorded amount."""

    id = StrictString(
        required=True,
        validate=validate.Length(min=1, error="must not be empty"),
        metadata={"description": "Item identifier.", "example": "INV-10442"},
    )
    amount = _amount(
        "Recorded amount; zero and negative amounts are excluded and reported.",
        "1250.00",
        required=True,
    )


def _plain_item(entry: Any) -> dict[str, Any] | None:
    """An ``{"id": "...", "amount": "123.45" or 123}`` entry read at once; else None.

    Exactly the values :class:`MonetaryItemSchema` accepts with the same result; anything
    else (floats, errors) goes through the schema's fields.
    """
    if type(entry) is not dict or len(entry) != 2:
        return None
    identifier, amount = entry.get("id"), entry.get("amount")
    if type(identifier) is not str or not identifier:
        return None
    if type(amount) is int or (type(amount) is str and PLAIN_DECIMAL.fullmatch(amount)):
        return {"id": identifier, "amount": Decimal(amount)}
    return None


def _sample_size() -> StrictInteger:
    return count_field(
        "Sampling units, individually significant items included.",
        minimum=1,
        example=60,
        required=True,
    )


def _seed() -> StrictString:
    return seed_field(
        "Seed of the random stream; generated when absent.", example="kestrel-2026-ar"
    )


def _selection_method() -> StrictString:
    return _choice(
        SELECTION_METHODS,
        "fixed_interval",
        "fixed_interval (random start, then every interval-th unit), cell (one random unit in "
        "each interval) or random_units (independent units, with replacement).",
    )


class MonetarySelectionRequest(StrictSchema):
    """Selection of currency units, re-performable from the seed."""

    population = RecordList(
        MonetaryItemSchema,
        fast=_plain_item,
        required=True,
        validate=validate.Length(min=1, error="must list at least one item"),
        metadata={"description": 'The items, each {"id", "amount"}, in any order.'},
    )
    sample_size = _sample_size()
    seed = _seed()
    method = _selection_method()
    currency_decimals = _decimals()


class MonetaryFileSelectionRequest(StrictSchema):
    """Selection of currency units from a population file, re-performable from the seed."""

    population = fields.Nested(
        FilePopulationSchema,
        required=True,
        metadata={
            "description": "The population file sent as the file part of the "
            "multipart/form-data request, described as population.file: id_column and "
            "amount_column are required. Each record kept gives the item {id, amount}, so "
            "the file selects exactly as the same items sent as a JSON list, whatever its "
            "format or row order.",
        },
    )
    sample_size = _sample_size()
    seed = _seed()
    method = _selection_method()
    currency_decimals = _decimals()


_RECORD = {
    "type": "object",
    "additionalProperties": {"type": "string"},
    "description": "File populations only: the item's record, every column's text as "
    'written in the file (blank cells as "").',
}
_WHERE = {"description": 'File populations only: where the record is in the file ("line 12").'}


class SelectedItemSchema(Schema):
    """An item hit by the selection."""

    id = fields.String(required=True)
    amount = _money()
    where = fields.String(metadata=_WHERE)
    record = fields.Dict(keys=fields.String(), values=fields.String(), metadata=_RECORD)
    hits = fields.Integer(required=True)
    units = fields.List(
        fields.Integer(),
        required=True,
        metadata={
            "description": "Currency units that hit the item, 1-based over the items "
            "sampled by units in canonical order."
        },
    )


class SignificantItemSchema(Schema):
    """An item at or above the sampling interval, tested in full."""

    id = fields.String(required=True)
    amount = _money()
    where = fields.String(metadata=_WHERE)
    record = fields.Dict(keys=fields.String(), values=fields.String(), metadata=_RECORD)


class ExcludedRecordSchema(Schema):
    """A record with a zero or negative amount, not sampled by amount."""

    id = fields.String(required=True)
    amount = _money()
    where = fields.String(required=True, metadata=_WHERE)
    record = fields.Dict(keys=fields.String(), values=fields.String(), metadata=_RECORD)


class MonetarySelectionSchema(ResultSchema):
    """A monetary-unit selection and what re-performs it."""

    absent_when_none = ("columns", "excluded_records")

    items = fields.List(fields.Nested(SelectedItemSchema), required=True)
    individually_significant = fields.List(fields.Nested(SignificantItemSchema), required=True)
    sample_size = fields.Integer(required=True)
    units_drawn = fields.Integer(
        required=True,
        metadata={
            "description": "Units drawn after the individually significant items were set apart."
        },
    )
    population_items = fields.Integer(required=True)
    book_value = _money("Total of the items with an amount above 0.")
    sampled_value = _money("Total of the items sampled by units.")
    sampling_interval = _money("sampled_value / units_drawn, rounded half-even.")
    sampling_interval_exact = fields.String(required=True)
    excluded_count = fields.Integer(required=True)
    excluded_total = _money("Total of the items with a zero or negative amount.")
    seed = fields.String(required=True)
    seed_generated = fields.Boolean(required=True)
    method = fields.String(required=True)
    algorithm = fields.String(required=True)
    population_fingerprint = fields.String(required=True)
    selection_fingerprint = fields.String(required=True)
    currency_decimals = fields.Integer(required=True)
    columns = fields.List(
        fields.String(),
        metadata={"description": "File populations only: the file's column names, in its order."},
    )
    excluded_records = fields.List(
        fields.Nested(ExcludedRecordSchema),
        metadata={
            "description": "File populations only: the records with a zero or negative "
            "amount (the first 20 in identifier order; excluded_count counts them all), "
            "which need a procedure of their own."
        },
    )
    summary = fields.String(required=True)
    warnings = fields.List(fields.String(), required=True)

    @pre_dump
    def _view(self, result: SelectionAnswer, **kwargs: Any) -> dict[str, Any]:
        chosen = result.selection
        s = chosen.scale
        file = result.file

        def located(identifier: str) -> dict[str, Any]:
            if file is None:
                return {}
            found = file.records[identifier]
            return {"where": found.where, "record": found.values}

        return {
            "items": [
                {
                    "id": item.id,
                    "amount": money_text(item.amount, s),
                    "hits": item.hits,
                    "units": list(item.units),
                    **located(item.id),
                }
                for item in chosen.items
            ],
            "individually_significant": [
                {"id": identifier, "amount": money_text(amount, s), **located(identifier)}
                for identifier, amount in chosen.individually_significant
            ],
            "columns": None if file is None else list(file.columns),
            "excluded_records": None
            if file is None
            else [
                {
                    "id": found.id,
                    "amount": money_text(amount, s),
                    "where": found.where,
                    "record": found.values,
                }
                for found, amount in file.excluded
            ],
            "sample_size": chosen.sample_size,
            "units_drawn": chosen.units_drawn,
            "population_items": chosen.population_items,
            "book_value": money_text(chosen.book_value, s),
            "sampled_value": money_text(chosen.sampled_value, s),
            "sampling_interval": money_text(chosen.sampling_interval, s),
            "sampling_interval_exact": fraction_text(chosen.sampling_interval, s),
            "excluded_count": chosen.excluded_count,
            "excluded_total": money_text(chosen.excluded_total, s),
            "seed": chosen.seed,
            "seed_generated": result.seed_generated,
            "method": chosen.method,
            "algorithm": chosen.algorithm,
            "population_fingerprint": chosen.population_fingerprint,
            "selection_fingerprint": chosen.selection_fingerprint,
            "currency_decimals": s,
            "summary": selection_summary(chosen),
            "warnings": list(chosen.warnings),
        }


@dataclass(frozen=True)
class SelectionAnswer:
    """A selection and whether its seed was generated by the service."""

    selection: MonetarySelection
    seed_generated: bool
    file: MonetaryFileSelection | None = None


# --------------------------------------------------------------------------- evaluation


class MisstatementSchema(StrictSchema):
    """A misstatement found in the sample."""

    id = StrictString(required=True, validate=validate.Length(min=1, error="must not be empty"))
    book_amount = _amount("Recorded amount of the item, above 0.", "4000.00", required=True)
    audited_amount = _amount("Amount found by the auditor.", "2000.00", required=True)
    hits = count_field("Sampling units that hit the item. Default 1.", minimum=1, load_default=1)
    individually_significant = fields.Boolean(
        load_default=False,
        metadata={
            "description": "An item tested in full: its misstatement counts as it is, "
            "with no sampling risk."
        },
    )


class MonetaryEvaluationRequest(StrictSchema):
    """Evaluation of the misstatements found in a monetary-unit sample."""

    book_value = _amount(
        "Book value of the population sampled by units (individually significant items "
        "apart), above 0.",
        "2500000.00",
        required=True,
    )
    sample_size = count_field(
        "Sampling units drawn (give this or sampling_interval).", minimum=1, example=60
    )
    sampling_interval = _amount(
        "Sampling interval (give this or sample_size); with both, it must equal "
        "book_value / sample_size to the currency unit.",
        "41666.67",
    )
    selection_method = _choice(SELECTION_METHODS, "fixed_interval", "How the units were selected.")
    confidence = _confidence()
    tolerable_misstatement = _amount("Tolerable misstatement; gives the conclusion.", "125000.00")
    misstatements = RecordList(
        MisstatementSchema,
        load_default=list,
        metadata={
            "description": 'Each misstated item: {"id", "book_amount", '
            '"audited_amount"}, optional hits and individually_significant.'
        },
    )
    currency_decimals = _decimals()


class MethodLimitSchema(Schema):
    """One method's limit for one direction."""

    direction = fields.String(required=True, metadata={"enum": list(DIRECTIONS)})
    method = fields.String(required=True, metadata={"enum": list(EVALUATION_METHODS)})
    projected_misstatement = _money()
    basic_precision = _money(allow_none=True)
    incremental_allowance = _money(allow_none=True)
    upper_misstatement_limit = _money(
        "Null when the method does not apply to the taints found.", allow_none=True
    )
    guarantee_holds = fields.Boolean(
        required=True,
        metadata={
            "description": "Whether the method's guarantee holds for the selection "
            "method and the taints found."
        },
    )
    guarantee = fields.String(required=True)
    conclusion = fields.String(required=True, allow_none=True)


class DirectionSchema(Schema):
    """Over- or understatements: projection and the recommended limit."""

    misstatements = fields.Integer(required=True)
    known_misstatement = _money("Misstatement of individually significant items, in full.")
    projected_misstatement = _money()
    recommended = fields.String(required=True)
    upper_misstatement_limit = _money("The recommended method's limit.")


class MonetaryEvaluationSchema(ResultSchema):
    """The evaluation: each method's limit for over- and understatements, side by side."""

    book_value = _money()
    sample_size = fields.Integer(required=True)
    sampling_interval = _money()
    selection_method = fields.String(required=True)
    confidence = fields.Float(required=True)
    tolerable_misstatement = _money(allow_none=True)
    overstatement = fields.Nested(DirectionSchema, required=True)
    understatement = fields.Nested(DirectionSchema, required=True)
    net_most_likely_misstatement = _money("Projected overstatement less projected understatement.")
    limits = fields.List(
        fields.Nested(MethodLimitSchema),
        required=True,
        metadata={"description": "Every method's limit, overstatements first."},
    )
    conclusion = fields.String(required=True, allow_none=True)
    currency_decimals = fields.Integer(required=True)
    summary = fields.String(required=True)
    warnings = fields.List(fields.String(), required=True)

    @pre_dump
    def _view(self, result: MonetaryEvaluation, **kwargs: Any) -> dict[str, Any]:
        s = result.scale

        def direction(side: DirectionResult) -> dict[str, Any]:
            return {
                "misstatements": side.misstatements,
                "known_misstatement": money_text(side.known_misstatement, s),
                "projected_misstatement": money_text(side.projected_misstatement, s),
                "recommended": side.recommended,
                "upper_misstatement_limit": money_text(side.recommended_limit, s),
            }

        limits = [
            {
                "direction": side.direction,
                "method": limit.method,
                "projected_misstatement": money_text(limit.projected_misstatement, s),
                "basic_precision": money_text(limit.basic_precision, s),
                "incremental_allowance": money_text(limit.incremental_allowance, s),
                "upper_misstatement_limit": money_text(limit.upper_misstatement_limit, s),
                "guarantee_holds": limit.guarantee_holds,
                "guarantee": limit.guarantee,
                "conclusion": limit.conclusion,
            }
            for side in (result.overstatement, result.understatement)
            for limit in side.methods
        ]
        return {
            "book_value": money_text(result.book_value, s),
            "sample_size": result.sample_size,
            "sampling_interval": money_text(result.sampling_interval, s),
            "selection_method": result.selection_method,
            "confidence": result.confidence,
            "tolerable_misstatement": money_text(result.tolerable_misstatement, s),
            "overstatement": direction(result.overstatement),
            "understatement": direction(result.understatement),
            "net_most_likely_misstatement": money_text(result.net_most_likely_misstatement, s),
            "limits": limits,
            "conclusion": result.conclusion,
            "currency_decimals": s,
            "summary": evaluation_summary(result),
            "warnings": list(result.warnings),
        }
