"""Contract of the plans for how tests really go: several attributes, both risks, priors.

The request pieces here are optional fields of the sample size and evaluation requests
(:mod:`schemas.attributes`); the response schemas describe the answers those requests
give when the pieces are present.
"""

from __future__ import annotations

from typing import Any

from marshmallow import ValidationError, fields, post_load, validate, validates_schema

from schemas.common import (
    ResultSchema,
    StrictSchema,
    conclusion_field,
    rates_in_order,
    summary_field,
)
from schemas.fields import (
    StrictFloat,
    StrictInteger,
    choice_field,
    count_field,
    expected_rate_field,
    label_field,
    tolerable_rate_field,
)
from service.sampling.errors import InvalidInput
from service.sampling.plans.bayesian import PRIOR_TYPES, BetaPrior, beta_prior
from service.sampling.plans.multiple import AttributeFindings, AttributeRates
from service.sampling.plans.wording import several_evaluation_summary, several_plan_summary
from service.sampling.wording import NEXT_STEPS


class AttributeRatesSchema(StrictSchema):
    """One attribute tested on the shared sample, with its own rates."""

    name = label_field("The attribute, in plain words.", example="approval", required=True)
    tolerable_rate = tolerable_rate_field("Tolerable deviation rate.", required=True)
    expected_rate = expected_rate_field(
        "Expected population deviation rate, below tolerable_rate.", example=0.0
    )

    @validates_schema
    def _expected_below_tolerable(self, data: dict[str, Any], **kwargs: Any) -> None:
        rates_in_order(data)

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> AttributeRates:
        return AttributeRates(**data)


class AttributeFindingsSchema(StrictSchema):
    """One attribute of a finished test: the deviations found for it."""

    name = label_field("The attribute, in plain words.", example="approval", required=True)
    deviations = count_field("Deviations found for this attribute.", example=0, required=True)
    tolerable_rate = tolerable_rate_field("Tolerable deviation rate.", required=True)

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> AttributeFindings:
        return AttributeFindings(**data)


class PriorSchema(StrictSchema):
    """Prior evidence on the deviation rate, as a beta prior."""

    type = choice_field(
        PRIOR_TYPES,
        "uniform: Beta(1, 1). expected_rate: the uniform prior plus strength items seen at "
        "expected_rate, Beta(1 + e·s, 1 + (1 − e)·s). previous_sample: an earlier sample of "
        "sample_size items with deviations, discounted by weight, Beta(1 + w·d, 1 + w·(n − d)).",
        required=True,
        metadata={"example": "previous_sample"},
    )
    expected_rate = expected_rate_field(
        "expected_rate prior: the rate the evidence points to.", example=None, default=False
    )
    strength = StrictFloat(
        metadata={
            "description": "expected_rate prior: its weight, in equivalent items tested.",
            "exclusiveMinimum": 0,
            "example": 50,
        },
    )
    sample_size = StrictInteger(
        metadata={"description": "previous_sample prior: items tested then.", "minimum": 1},
    )
    deviations = StrictInteger(
        metadata={"description": "previous_sample prior: deviations found then.", "minimum": 0},
    )
    weight = StrictFloat(
        metadata={
            "description": "previous_sample prior: how much of it counts now, from 0 (none) "
            "to 1 (all of it).",
            "minimum": 0,
            "maximum": 1,
            "example": 0.5,
        },
    )

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> BetaPrior:
        try:
            return beta_prior(**data)
        except InvalidInput as exc:
            raise ValidationError(exc.message, exc.field.removeprefix("prior.")) from None


class PriorResultSchema(ResultSchema):
    """The prior used, as the beta distribution it became."""

    absent_when_none = ("expected_rate", "strength", "sample_size", "deviations", "weight")

    type = fields.String(required=True)
    alpha = fields.Float(required=True)
    beta = fields.Float(required=True)
    expected_rate = fields.Float()
    strength = fields.Float()
    sample_size = fields.Integer()
    deviations = fields.Integer()
    weight = fields.Float()


def prior_answer_fields() -> dict[str, fields.Field[Any]]:
    """The answer fields a prior adds to a plan or an evaluation (absent without one)."""
    return {
        "prior": fields.Nested(
            PriorResultSchema,
            metadata={"description": "The prior, when the request gave one."},
        ),
        "posterior_probability": fields.Float(
            metadata={
                "description": "With a prior: the posterior probability that the deviation "
                "rate is at most tolerable_rate (for a plan, if allowed_deviations are found)."
            }
        ),
        "posterior_upper_limit": fields.Float(
            metadata={
                "description": "With a prior: the confidence quantile of the posterior "
                "deviation rate."
            }
        ),
    }


def unique_names(items: list[Any] | None, errors: dict[str, list[str]]) -> None:
    """Record an error under ``attributes`` for an empty list or a repeated name."""
    if items is None:
        return
    if not items:
        errors["attributes"] = ["must list at least one attribute"]
        return
    seen: set[str] = set()
    for index, item in enumerate(items):
        if item.name in seen:
            errors[f"attributes[{index}].name"] = [
                f"the name {item.name!r} is given to two attributes"
            ]
        seen.add(item.name)


#: Most attributes one request may list.
MAX_ATTRIBUTES = 100


def count_attributes(payload: Any, settings: Any = None) -> None:
    """Refuse an over-long attributes list before its elements are validated one by one."""
    if isinstance(payload, dict):
        items = payload.get("attributes")
        if isinstance(items, list) and len(items) > MAX_ATTRIBUTES:
            raise InvalidInput(
                "attributes",
                f"attributes lists {len(items):,} entries; at most {MAX_ATTRIBUTES} are taken",
            )


def attributes_field(schema: type[StrictSchema], description: str) -> fields.List[Any]:
    return fields.List(
        fields.Nested(schema),
        validate=validate.Length(max=MAX_ATTRIBUTES, error="must list at most {max} attributes"),
        metadata={"description": description},
    )


class AttributePlanSchema(ResultSchema):
    """One attribute at the common sample size."""

    absent_when_none = ("tolerable_deviant_items",)

    name = fields.String(required=True)
    tolerable_rate = fields.Float(required=True)
    expected_rate = fields.Float(required=True)
    own_sample_size = fields.Integer(
        required=True,
        metadata={"description": "The sample this attribute alone would need."},
    )
    allowed_deviations = fields.Integer(
        required=True,
        metadata={
            "description": "ceil(expected_rate × sample_size): the most deviations of "
            "this attribute the common sample may show and still support reliance."
        },
    )
    achieved_confidence = fields.Float(required=True)
    risk_of_overreliance = fields.Float(required=True)
    risk_of_underreliance = fields.Float(required=True)
    tolerable_deviant_items = fields.Integer()


class SeveralAttributesPlanSchema(ResultSchema):
    """One sample for several attributes: the largest size any attribute needs, and each
    attribute's plan at that size."""

    absent_when_none = ("population_label",)

    sample_size = fields.Integer(
        required=True,
        metadata={
            "description": "Items to test, for every attribute: the smallest size at "
            "least the largest single-attribute size at which every attribute reaches "
            "the confidence."
        },
    )
    governing_attribute = fields.String(
        required=True,
        metadata={"description": "The attribute that needs the largest sample alone."},
    )
    method = fields.String(required=True)
    confidence = fields.Float(required=True)
    population_size = fields.Integer(required=True, allow_none=True)
    population_label = fields.String()
    whole_population = fields.Boolean(required=True)
    attributes = fields.List(fields.Nested(AttributePlanSchema), required=True)
    summary = summary_field(several_plan_summary)
    warnings = fields.List(fields.String(), required=True)


class AttributeEvaluationSchema(ResultSchema):
    """One attribute's evaluation."""

    absent_when_none = ("upper_deviation_count",)

    name = fields.String(required=True)
    deviations = fields.Integer(required=True, attribute="evaluation.deviations")
    tolerable_rate = fields.Float(required=True, attribute="evaluation.tolerable_rate")
    sample_deviation_rate = fields.Float(
        required=True, attribute="evaluation.sample_deviation_rate"
    )
    upper_deviation_limit = fields.Float(
        required=True, attribute="evaluation.upper_deviation_limit"
    )
    upper_deviation_count = fields.Integer(attribute="evaluation.upper_deviation_count")
    allowance_for_sampling_risk = fields.Float(
        required=True, attribute="evaluation.allowance_for_sampling_risk"
    )
    risk_at_tolerable_rate = fields.Float(
        required=True, attribute="evaluation.risk_at_tolerable_rate"
    )
    conclusion = conclusion_field(
        lambda item: item.evaluation.supports_reliance, description=None, required=True
    )


class SeveralAttributesEvaluationSchema(ResultSchema):
    """The evaluation of one sample tested for several attributes, each on its own."""

    absent_when_none = ("population_label",)

    method = fields.String(required=True)
    sample_size = fields.Integer(required=True)
    confidence = fields.Float(required=True)
    population_size = fields.Integer(required=True, allow_none=True)
    population_label = fields.String()
    attributes = fields.List(fields.Nested(AttributeEvaluationSchema), required=True)
    conclusion = conclusion_field(
        description="supports_reliance when every attribute's result does.", required=True
    )
    attributes_not_supporting = fields.List(
        fields.String(),
        required=True,
        metadata={"description": "The attributes whose result does not support reliance."},
    )
    next_steps = fields.Function(
        lambda result: list(NEXT_STEPS) if not result.supports_reliance else [],
        required=True,
        metadata={
            "type": "array",
            "items": {"type": "string"},
            "description": "When an attribute's result does not support reliance: what the "
            "standards expect next (ISA 530 ¶12-13, AU-C 530), in plain words; empty "
            "otherwise.",
        },
    )
    summary = summary_field(several_evaluation_summary)
    warnings = fields.List(fields.String(), required=True)


__all__ = [
    "AttributeEvaluationSchema",
    "AttributeFindingsSchema",
    "AttributePlanSchema",
    "AttributeRatesSchema",
    "SeveralAttributesEvaluationSchema",
    "SeveralAttributesPlanSchema",
    "StrictFloat",
    "attributes_field",
    "unique_names",
]
