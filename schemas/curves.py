"""Contract of the operating characteristic endpoint, ``POST /v1/plans/curve``."""

from __future__ import annotations

from typing import Any

from marshmallow import (
    Schema,
    ValidationError,
    fields,
    post_load,
    validate,
    validates_schema,
)

from schemas.common import (
    PopulationSchema,
    ResultSchema,
    StrictSchema,
    check_rates_in_order,
    flatten_population,
    summary_field,
)
from schemas.fields import Rate, StrictInteger, StrictString
from service.sampling.attributes import SampleSizePlan
from service.sampling.curves import (
    DEFAULT_POINTS,
    MAX_POINTS,
    MIN_POINTS,
    curve_summary,
)
from service.sampling.distributions import MODELS

#: Where the curve of a plan is asked for; a sample size plan links to it.
CURVE_PATH = "/v1/plans/curve"

_METHOD_NAMES = sorted(MODELS)


class CurveRequest(StrictSchema):
    """The plan whose operating characteristic is asked for.

    A sample size plan carries this body, ready to send, as its ``curve_request``.
    """

    sample_size = StrictInteger(
        required=True,
        validate=validate.Range(min=1, error="must be at least {min}"),
        metadata={"description": "Items tested.", "example": 93},
    )
    allowed_deviations = StrictInteger(
        required=True,
        validate=validate.Range(min=0, error="must be at least {min}"),
        metadata={
            "description": "Most deviations the sample may show and still support reliance; "
            "at most sample_size.",
            "example": 1,
        },
    )
    population = fields.Nested(
        PopulationSchema,
        metadata={"description": "Absent for a population large enough to ignore its size."},
    )
    method = StrictString(
        validate=validate.OneOf(_METHOD_NAMES, error="must be one of {choices}"),
        metadata={
            "description": "Distribution used: hypergeometric (finite population, without "
            "replacement), binomial, or poisson. Default: hypergeometric when "
            "population.size is given, else binomial, as for the sample size."
        },
    )
    tolerable_rate = Rate(
        metadata={
            "description": "Tolerable deviation rate, as a fraction; when given, the "
            "response carries the risk of overreliance and the chart marks the rate.",
            "example": 0.05,
        },
    )
    expected_rate = Rate(
        allow_zero=True,
        metadata={
            "description": "Expected population deviation rate, as a fraction, below "
            "tolerable_rate when both are given; when given, the response carries the "
            "risk of underreliance and the chart marks the rate.",
            "example": 0.01,
        },
    )
    points = StrictInteger(
        load_default=DEFAULT_POINTS,
        validate=validate.Range(
            min=MIN_POINTS,
            max=MAX_POINTS,
            error="must be from {min} to {max} (a finer grid shows nothing more); got {input}",
        ),
        metadata={
            "description": "Number of evenly spaced rates the curve is computed at, "
            "from rate 0 up.",
            "example": DEFAULT_POINTS,
            "maximum": MAX_POINTS,
        },
    )

    @validates_schema(skip_on_field_errors=False)
    def _consistent(self, data: dict[str, Any], **kwargs: Any) -> None:
        errors: dict[str, list[str]] = {}
        n, k = data.get("sample_size"), data.get("allowed_deviations")
        if n is not None and k is not None and k > n:
            errors["allowed_deviations"] = [
                f"allowed_deviations {k} must not exceed sample_size {n}"
            ]
        check_rates_in_order(data, errors)
        if errors:
            raise ValidationError(errors)

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        return flatten_population(data)


class CurvePointSchema(Schema):
    """One point of the operating characteristic."""

    rate = fields.Float(required=True, metadata={"description": "True deviation rate p."})
    probability = fields.Float(
        required=True,
        metadata={
            "description": "Probability that the sample supports reliance at rate p: "
            "P(X ≤ allowed_deviations) under the plan's model."
        },
    )


class CurveSchema(ResultSchema):
    """The operating characteristic of a plan.

    ``points`` gives, for each true deviation rate p of an evenly spaced grid from 0, the
    probability that the sample shows at most ``allowed_deviations`` deviations, which is
    the probability that it supports reliance. The grid ends at a two-significant-figure
    rate where that probability is at most 0.001, and at least a quarter beyond the
    tolerable and expected rates given. Under the hypergeometric model the population at
    rate p holds ceil(p × N) deviant items, so the curve is a staircase.
    """

    absent_when_none = (
        "population_label",
        "tolerable_rate",
        "expected_rate",
        "risk_of_overreliance",
        "risk_of_underreliance",
    )

    method = fields.String(required=True)
    sample_size = fields.Integer(required=True)
    allowed_deviations = fields.Integer(required=True)
    population_size = fields.Integer(required=True, allow_none=True)
    population_label = fields.String()
    tolerable_rate = fields.Float()
    expected_rate = fields.Float()
    points = fields.List(fields.Nested(CurvePointSchema), required=True)
    risk_of_overreliance = fields.Float(
        metadata={
            "description": "Present when tolerable_rate is given: probability of "
            "allowed_deviations or fewer when the true rate is the tolerable rate."
        }
    )
    risk_of_underreliance = fields.Float(
        metadata={
            "description": "Present when expected_rate is given: probability of more than "
            "allowed_deviations when the true rate is the expected rate (1 − the curve "
            "there)."
        }
    )
    summary = summary_field(curve_summary)
    warnings = fields.List(fields.String(), required=True)


def curve_request_body(plan: SampleSizePlan) -> dict[str, Any]:
    """The body to POST to :data:`CURVE_PATH` for the operating characteristic of ``plan``.

    It names the plan exactly (sample size, allowed deviations, the model used, the
    population when given) and the two rates it was sized for, so that the curve's risks
    are the plan's.
    """
    body: dict[str, Any] = {
        "sample_size": plan.sample_size,
        "allowed_deviations": plan.allowed_deviations,
        "method": plan.method,
    }
    if plan.population_size is not None:
        population: dict[str, Any] = {"size": plan.population_size}
        if plan.population_label is not None:
            population["label"] = plan.population_label
        body["population"] = population
    body["tolerable_rate"] = plan.tolerable_rate
    body["expected_rate"] = plan.expected_rate
    return body
