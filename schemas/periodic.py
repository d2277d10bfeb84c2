"""Contract of ``POST /v1/plans/periodic``: periodic controls and what their sizes prove."""

from __future__ import annotations

from typing import Any

from marshmallow import ValidationError, fields, post_load, validate, validates_schema

from schemas.attributes import SampleSizePlanSchema
from schemas.common import (
    ResultSchema,
    StrictSchema,
    rates_in_order,
    summary_field,
)
from schemas.fields import (
    StrictInteger,
    choice_field,
    confidence_field,
    count_field,
    expected_rate_field,
    tolerable_rate_field,
)
from service.sampling.plans.periodic import DEFAULT_CONVENTIONS, FREQUENCIES, MAX_OCCURRENCES
from service.sampling.plans.wording import periodic_summary

PERIODIC_PATH = "/v1/plans/periodic"

_TABLE = "; ".join(
    f"{name}: {c.occurrences:,} a year, " + (f"{c.low}" if c.low == c.high else f"{c.low}–{c.high}")
    for name, c in DEFAULT_CONVENTIONS.items()
)


class CommonPracticeSchema(StrictSchema):
    """The engagement's own range of sample sizes for this frequency."""

    low = count_field("Smallest size used.", minimum=1, example=2, required=True)
    high = count_field("Largest size used.", minimum=1, example=5, required=True)

    @validates_schema
    def _ordered(self, data: dict[str, Any], **kwargs: Any) -> None:
        low, high = data.get("low"), data.get("high")
        if low is not None and high is not None and high < low:
            raise ValidationError(f"high {high} must not be below low {low}", "high")


class PeriodicRequest(StrictSchema):
    """A periodic control: its frequency and the rates to judge it by."""

    frequency = choice_field(
        FREQUENCIES,
        "How often the control runs.",
        required=True,
        metadata={"example": "monthly"},
    )
    occurrences = StrictInteger(
        validate=validate.Range(min=1, max=MAX_OCCURRENCES, error="must be from {min} to {max}"),
        metadata={
            "description": "Times the control ran in the period; by default the convention "
            f"for the frequency (common practice, no published source: {_TABLE}).",
            "example": 12,
        },
    )
    tolerable_rate = tolerable_rate_field(
        "Tolerable deviation rate.", example=0.10, required=True
    )
    expected_rate = expected_rate_field(
        "Expected deviation rate of the statistical plan.", example=0.0
    )
    confidence = confidence_field()
    common_practice = fields.Nested(
        CommonPracticeSchema,
        metadata={
            "description": "The engagement's own range of sizes for this frequency, "
            "instead of the convention in the table."
        },
    )

    @validates_schema
    def _expected_below_tolerable(self, data: dict[str, Any], **kwargs: Any) -> None:
        rates_in_order(data)

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        practice = data.pop("common_practice", None) or {}
        data["common_practice_low"] = practice.get("low")
        data["common_practice_high"] = practice.get("high")
        return data


class SizeMeaningSchema(ResultSchema):
    """What testing sample_size occurrences and finding no deviation proves."""

    absent_when_none = (
        "confidence_against_1_deviant",
        "confidence_against_2_deviant",
        "confidence_against_3_deviant",
    )

    sample_size = fields.Integer(required=True)
    basis = fields.String(
        required=True,
        metadata={
            "description": "Where the size comes from: the common-practice range "
            "(low or high end) or the statistical plan."
        },
    )
    confidence_against_1_deviant = fields.Float(
        metadata={
            "description": "Probability that the sample finds at least one deviation "
            "if exactly one occurrence is deviant (hypergeometric, exact)."
        },
    )
    confidence_against_2_deviant = fields.Float(
        metadata={"description": "The same if two occurrences are deviant."},
    )
    confidence_against_3_deviant = fields.Float(
        metadata={"description": "The same if three occurrences are deviant."},
    )
    upper_deviation_count_if_none_found = fields.Integer(
        required=True,
        metadata={
            "description": "Upper bound on the deviant occurrences at the confidence "
            "when the sample shows none."
        },
    )
    upper_deviation_limit_if_none_found = fields.Float(
        required=True,
        metadata={"description": "The same bound as a rate of the occurrences."},
    )
    achieved_confidence_at_tolerable = fields.Float(
        required=True,
        metadata={
            "description": "1 − P(no deviation found) when the occurrences hold "
            "tolerable_deviant_items deviant ones."
        },
    )
    supports_reliance_if_none_found = fields.Boolean(required=True)


class PeriodicPlanSchema(ResultSchema):
    """Common-practice sizes beside the exact plan, and what each proves."""

    frequency = fields.String(required=True)
    occurrences = fields.Integer(required=True)
    occurrences_basis = fields.String(
        required=True,
        metadata={
            "enum": ["given", "convention"],
            "description": "given, or the convention for the frequency.",
        },
    )
    tolerable_rate = fields.Float(required=True)
    expected_rate = fields.Float(required=True)
    confidence = fields.Float(required=True)
    tolerable_deviant_items = fields.Integer(
        required=True,
        metadata={
            "description": "ceil(tolerable_rate × occurrences): the tolerable rate as a "
            "count of deviant occurrences."
        },
    )
    common_practice_low = fields.Integer(required=True)
    common_practice_high = fields.Integer(required=True)
    common_practice_basis = fields.String(required=True)
    statistical_plan = fields.Nested(
        SampleSizePlanSchema,
        required=True,
        metadata={
            "description": "The exact plan for the same occurrences "
            "(hypergeometric, population.size = occurrences)."
        },
    )
    sizes = fields.List(fields.Nested(SizeMeaningSchema), required=True)
    summary = summary_field(periodic_summary)
    warnings = fields.List(fields.String(), required=True)
