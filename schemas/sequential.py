"""Contract of the staged, sequential and stratified endpoints."""

from __future__ import annotations

from typing import Any

from marshmallow import Schema, ValidationError, fields, post_load, validate, validates_schema

from schemas.attributes import METHOD_NAMES, EvaluationSchema
from schemas.common import (
    PopulationSchema,
    ResultSchema,
    StrictSchema,
    check_rates_in_order,
    conclusion_field,
    curve_link_field,
    flatten_population,
    rates_in_order,
    summary_field,
)
from schemas.fields import (
    StrictInteger,
    StrictString,
    choice_field,
    confidence_field,
    count_field,
    expected_rate_field,
    tolerable_rate_field,
)
from schemas.strata import check_strata, strata_field
from service.sampling.sequential.anytime import MAX_RESULTS
from service.sampling.sequential.curve import DEFAULT_POINTS as CURVE_DEFAULT_POINTS
from service.sampling.sequential.curve import MAX_POINTS as CURVE_MAX_POINTS
from service.sampling.sequential.curve import MIN_POINTS as CURVE_MIN_POINTS
from service.sampling.sequential.staged import MAX_STAGES, MIN_STAGES, Stage, StagedPlan
from service.sampling.sequential.wording import (
    SEQUENCE_GUARANTEE,
    STRATA_GUARANTEE,
    sequence_summary,
    staged_curve_summary,
    staged_evaluation_summary,
    staged_plan_summary,
    strata_summary,
)


def _method() -> StrictString:
    return choice_field(
        METHOD_NAMES,
        "Distribution used: hypergeometric (finite population, without replacement across "
        "stages), binomial, or poisson. Default: hypergeometric when population.size is "
        "given, else binomial.",
    )


class StagedPlanRequest(StrictSchema):
    """A staged (stop-or-go) plan for a test of controls."""

    population = fields.Nested(
        PopulationSchema,
        metadata={"description": "Absent for a population large enough to ignore its size."},
    )
    tolerable_rate = tolerable_rate_field(
        "Tolerable deviation rate, as a fraction.", required=True
    )
    expected_rate = expected_rate_field(
        "Expected population deviation rate, as a fraction, below tolerable_rate: the "
        "expected sample size is minimised at this rate."
    )
    confidence = confidence_field()
    method = _method()
    max_stages = StrictInteger(
        load_default=2,
        validate=validate.Range(
            min=MIN_STAGES, max=MAX_STAGES, error="must be from {min} to {max}"
        ),
        metadata={"description": "Most stages the plan may have: 2 or 3.", "example": 2},
    )

    @validates_schema
    def _expected_below_tolerable(self, data: dict[str, Any], **kwargs: Any) -> None:
        rates_in_order(data)

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        return flatten_population(data)


class StageSchema(StrictSchema):
    """One stage of a staged plan; counts are cumulative over the stages."""

    cumulative_sample_size = count_field(
        "Items tested by the end of this stage, in all.", minimum=1, example=66, required=True
    )
    accept_if_at_most = count_field(
        "Accept when the deviations found so far are at most this (-1: never accept at this "
        "stage).",
        minimum=-1,
        example=0,
        required=True,
    )
    fail_if_at_least = count_field(
        "Fail when the deviations found so far are at least this; in between, extend to the "
        "next stage. At the last stage, accept_if_at_most + 1.",
        example=2,
        required=True,
    )

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> Stage:
        return Stage(**data)


def _stages(description: str) -> fields.List[Any]:
    """The stages of a staged plan sent back to the service (evaluation, curve)."""
    return fields.List(
        fields.Nested(StageSchema),
        required=True,
        validate=validate.Length(
            min=1, max=MAX_STAGES, error="must hold from {min} to {max} stages"
        ),
        metadata={"description": description},
    )


class StageOut(Schema):
    cumulative_sample_size = fields.Integer(required=True)
    accept_if_at_most = fields.Integer(required=True)
    fail_if_at_least = fields.Integer(required=True)


#: Where the curve of a staged plan is asked for; a staged plan links to it.
STAGED_CURVE_PATH = "/v1/plans/staged/curve"


def staged_curve_request_body(plan: StagedPlan) -> dict[str, Any]:
    """The body to POST to :data:`STAGED_CURVE_PATH` for the curve of ``plan``: its stages,
    model and population size, and the two rates it was planned for, so that the curve's
    risks are the plan's."""
    body: dict[str, Any] = {
        "stages": [
            {
                "cumulative_sample_size": stage.cumulative_sample_size,
                "accept_if_at_most": stage.accept_if_at_most,
                "fail_if_at_least": stage.fail_if_at_least,
            }
            for stage in plan.stages
        ],
        "method": plan.method,
    }
    if plan.population_size is not None:
        body["population"] = {"size": plan.population_size}
    body["tolerable_rate"] = plan.tolerable_rate
    body["expected_rate"] = plan.expected_rate
    return body


class StagedPlanSchema(ResultSchema):
    """A staged plan with its exact risks, beside the fixed-size plan for the same inputs."""

    absent_when_none = ("population_label",)

    stages = fields.List(fields.Nested(StageOut), required=True)
    method = fields.String(required=True)
    tolerable_rate = fields.Float(required=True)
    expected_rate = fields.Float(required=True)
    confidence = fields.Float(required=True)
    max_stages = fields.Integer(required=True)
    population_size = fields.Integer(required=True, allow_none=True)
    population_label = fields.String()
    risk_of_overreliance = fields.Float(
        required=True,
        metadata={
            "description": "Exact probability that the plan accepts when the true rate is the "
            "tolerable rate, over every stage."
        },
    )
    achieved_confidence = fields.Float(required=True)
    risk_of_underreliance = fields.Float(
        required=True,
        metadata={"description": "Exact probability that the plan fails at the expected rate."},
    )
    expected_sample_size_at_expected_rate = fields.Float(required=True)
    expected_sample_size_at_tolerable_rate = fields.Float(required=True)
    largest_sample_size = fields.Integer(required=True)
    fixed_sample_size = fields.Integer(
        required=True, metadata={"description": "Size of the fixed-size plan (/v1/sample-size)."}
    )
    fixed_allowed_deviations = fields.Integer(required=True)
    fixed_risk_of_underreliance = fields.Float(required=True)
    plans_examined = fields.Integer(
        required=True, metadata={"description": "Candidate plans the bounded search examined."}
    )
    summary = summary_field(staged_plan_summary)
    warnings = fields.List(fields.String(), required=True)
    curve_request = fields.Function(
        staged_curve_request_body,
        required=True,
        metadata={
            "allOf": [{"$ref": "#/components/schemas/StagedCurveRequest"}],
            "description": "Body to POST, unchanged, to links.curve for the acceptance "
            "probability and expected sample size of this plan against the rate (with "
            "Accept: image/svg+xml, as a chart).",
        },
    )
    links = curve_link_field(STAGED_CURVE_PATH, "Path of the staged plan's curve endpoint.")


class StagedEvaluationRequest(StrictSchema):
    """A finished staged test: the plan as run, where it stopped and what it found."""

    population = fields.Nested(PopulationSchema)
    stages = _stages("The plan as run (the stages of /v1/plans/staged).")
    stage_reached = count_field(
        "Stage (from 1) at which the test stopped.", minimum=1, example=2, required=True
    )
    deviations = count_field(
        "Deviations found up to that stage, in all.", example=2, required=True
    )
    tolerable_rate = tolerable_rate_field(
        "Tolerable deviation rate, as a fraction.", required=True
    )
    confidence = confidence_field()
    method = _method()

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        return flatten_population(data)


class StagedEvaluationSchema(ResultSchema):
    """A finished staged test, evaluated with the plan's own exact probabilities."""

    absent_when_none = ("population_label",)

    method = fields.String(required=True)
    stages = fields.List(fields.Nested(StageOut), required=True)
    stage_reached = fields.Integer(required=True)
    sample_size = fields.Integer(
        required=True, metadata={"description": "Items tested by the stage reached."}
    )
    deviations = fields.Integer(required=True)
    confidence = fields.Float(required=True)
    tolerable_rate = fields.Float(required=True)
    population_size = fields.Integer(required=True, allow_none=True)
    population_label = fields.String()
    decision = fields.String(required=True, metadata={"enum": ["accept", "fail"]})
    conclusion = conclusion_field(description=None, required=True)
    plan_risk_of_overreliance = fields.Float(
        required=True,
        metadata={"description": "Exact probability that the plan accepts at the tolerable rate."},
    )
    risk_at_tolerable_rate = fields.Float(
        required=True,
        metadata={
            "description": "Probability, at the tolerable rate, of an outcome at most as "
            "unfavourable as the one observed (stage-wise ordering)."
        },
    )
    sample_deviation_rate = fields.Float(required=True)
    upper_deviation_limit = fields.Float(
        required=True,
        metadata={
            "description": "Exact one-sided upper confidence bound from the staged test's own "
            "probabilities (stage-wise ordering)."
        },
    )
    fixed_size_formula = fields.Function(
        lambda r: {
            "upper_deviation_limit": r.fixed_size_upper_deviation_limit,
            "risk_at_tolerable_rate": r.fixed_size_risk_at_tolerable_rate,
            "supports_reliance": r.fixed_size_supports_reliance,
        },
        required=True,
        metadata={
            "type": "object",
            "description": "For comparison only: the fixed-size formula applied to the items "
            "tested, as if the sample size had been fixed in advance. Not valid for a staged "
            "test.",
            "properties": {
                "upper_deviation_limit": {"type": "number"},
                "risk_at_tolerable_rate": {"type": "number"},
                "supports_reliance": {"type": "boolean"},
            },
            "required": ["upper_deviation_limit", "risk_at_tolerable_rate", "supports_reliance"],
            "additionalProperties": False,
        },
    )
    summary = summary_field(staged_evaluation_summary)
    warnings = fields.List(fields.String(), required=True)


class StagedCurveRequest(StrictSchema):
    """A staged plan whose curve is asked for (the stages of /v1/plans/staged)."""

    population = fields.Nested(PopulationSchema)
    stages = _stages("The plan's stages, as /v1/plans/staged returns them.")
    method = _method()
    tolerable_rate = tolerable_rate_field(
        "When given, the risk of overreliance at this rate is reported."
    )
    expected_rate = expected_rate_field(
        "When given, the risk of underreliance at this rate is reported.", default=False
    )
    points = StrictInteger(
        load_default=CURVE_DEFAULT_POINTS,
        validate=validate.Range(
            min=CURVE_MIN_POINTS, max=CURVE_MAX_POINTS, error="must be from {min} to {max}"
        ),
        metadata={"description": "Evenly spaced rates on the curve, from 0."},
    )

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        data = flatten_population(data)
        data.pop("population_label", None)
        return data


class StagedCurvePointSchema(Schema):
    rate = fields.Float(required=True)
    acceptance_probability = fields.Float(
        required=True, metadata={"description": "Probability that the plan accepts."}
    )
    expected_sample_size = fields.Float(
        required=True, metadata={"description": "Expected number of items tested."}
    )


class StagedCurveSchema(ResultSchema):
    """Acceptance probability and expected sample size of a staged plan against the rate."""

    absent_when_none = (
        "tolerable_rate",
        "expected_rate",
        "risk_of_overreliance",
        "risk_of_underreliance",
        "expected_sample_size_at_tolerable_rate",
        "expected_sample_size_at_expected_rate",
    )

    method = fields.String(required=True)
    stages = fields.List(fields.Nested(StageOut), required=True)
    population_size = fields.Integer(required=True, allow_none=True)
    tolerable_rate = fields.Float()
    expected_rate = fields.Float()
    risk_of_overreliance = fields.Float()
    risk_of_underreliance = fields.Float()
    expected_sample_size_at_tolerable_rate = fields.Float()
    expected_sample_size_at_expected_rate = fields.Float()
    points = fields.List(fields.Nested(StagedCurvePointSchema), required=True)
    summary = summary_field(staged_curve_summary)


class StrataEvaluationRequest(StrictSchema):
    """A population sampled in strata."""

    strata = strata_field(required=True)
    confidence = confidence_field()
    tolerable_rate = tolerable_rate_field(
        "When given, each stratum and the whole population are judged."
    )
    expected_rate = expected_rate_field(
        "The planned expected deviation rate: used only to split the risk among the strata, "
        "as it was known before the results.",
        example=0.0,
    )

    @validates_schema
    def _consistent(self, data: dict[str, Any], **kwargs: Any) -> None:
        errors: dict[str, list[str]] = {}
        check_strata(data.get("strata") or [], errors)
        check_rates_in_order(data, errors)
        if errors:
            raise ValidationError(errors)


class StratumResultSchema(Schema):
    label = fields.String(required=True)
    population_size = fields.Integer(required=True)
    sample_size = fields.Integer(required=True)
    deviations = fields.Integer(required=True)
    risk_share = fields.Float(
        required=True,
        metadata={"description": "The part of 1 − confidence given to this stratum."},
    )
    upper_deviation_count = fields.Integer(
        required=True,
        metadata={"description": "This stratum's exact upper bound on deviant items at "
                  "confidence 1 − risk_share: its part of the combined limit."},
    )
    evaluation = fields.Nested(
        EvaluationSchema,
        required=True,
        metadata={"description": "The stratum's own evaluation at the full confidence."},
    )


class StrataEvaluationSchema(ResultSchema):
    """Each stratum's evaluation and one upper deviation limit for the whole population."""

    absent_when_none = ("tolerable_rate", "tolerable_deviant_items", "conclusion")

    confidence = fields.Float(required=True)
    tolerable_rate = fields.Float()
    expected_rate = fields.Float(required=True)
    population_size = fields.Integer(required=True)
    sample_size = fields.Integer(required=True)
    deviations = fields.Integer(required=True)
    strata = fields.List(fields.Nested(StratumResultSchema), required=True)
    estimated_deviation_rate = fields.Float(
        required=True, metadata={"description": "Σ N_h d_h / n_h, divided by Σ N_h."}
    )
    upper_deviation_count = fields.Integer(required=True)
    upper_deviation_limit = fields.Float(
        required=True,
        metadata={"description": "upper_deviation_count / population_size, with guaranteed "
                  "coverage (see guarantee)."},
    )
    tolerable_deviant_items = fields.Integer()
    conclusion = conclusion_field()
    guarantee = fields.Function(
        lambda r: STRATA_GUARANTEE,
        required=True,
        metadata={"type": "string", "description": "What the combined limit guarantees."},
    )
    summary = summary_field(strata_summary)
    warnings = fields.List(fields.String(), required=True)


class DeviationFlag(fields.Field):  # type: ignore[type-arg]
    """true/false or 1/0: whether a tested item was a deviation. Nothing else is read as one."""

    default_error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        "invalid": "must be true, false, 1 or 0",
    }

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> bool:
        if isinstance(value, bool):
            return value
        if type(value) is int and value in (0, 1):
            return bool(value)
        raise self.make_error("invalid")


class SequenceRequest(StrictSchema):
    """The results of an open-ended test, in the order the items were tested."""

    results = fields.List(
        DeviationFlag(metadata={"oneOf": [{"type": "boolean"},
                                          {"type": "integer", "enum": [0, 1]}]}),
        required=True,
        validate=validate.Length(
            min=1, max=MAX_RESULTS, error="must hold from {min} to {max} results"
        ),
        metadata={
            "description": "One entry per tested item, in testing order: true (or 1) for a "
            "deviation, false (or 0) otherwise.",
            "example": [False, False, True, False],
        },
    )
    confidence = confidence_field()
    population = fields.Nested(
        PopulationSchema,
        metadata={"description": "When given, the without-replacement form is used."},
    )
    tolerable_rate = tolerable_rate_field(
        "When given: whether, and from which item on, the limit is below it."
    )

    @validates_schema
    def _fits_population(self, data: dict[str, Any], **kwargs: Any) -> None:
        size = (data.get("population") or {}).get("size")
        results = data.get("results")
        if size is not None and results is not None and len(results) > size:
            raise ValidationError(
                f"population.size {size} is below the {len(results)} items tested",
                "population.size",
            )

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        data = flatten_population(data)
        data.pop("population_label", None)
        return data


class SequencePointSchema(Schema):
    sample_size = fields.Integer(required=True)
    deviations = fields.Integer(required=True)
    upper_deviation_limit = fields.Float(
        required=True, metadata={"description": "Valid at any stopping time."}
    )
    fixed_size_upper_deviation_limit = fields.Float(
        required=True,
        metadata={"description": "Clopper–Pearson, for comparison only: valid only for a "
                  "sample size fixed in advance."},
    )


class SequenceSchema(ResultSchema):
    """Upper deviation limits after each tested item, valid at any stopping time."""

    absent_when_none = ("tolerable_rate", "conclusion", "first_supporting_sample_size")

    method = fields.String(
        required=True, metadata={"enum": ["with_replacement", "without_replacement"]}
    )
    confidence = fields.Float(required=True)
    population_size = fields.Integer(required=True, allow_none=True)
    tolerable_rate = fields.Float()
    sample_size = fields.Integer(required=True)
    deviations = fields.Integer(required=True)
    upper_deviation_limit = fields.Float(
        required=True, metadata={"description": "After the last item; valid at any stopping time."}
    )
    first_supporting_sample_size = fields.Integer(
        metadata={"description": "First item after which the limit was below tolerable_rate."}
    )
    conclusion = conclusion_field()
    points = fields.List(fields.Nested(SequencePointSchema), required=True)
    guarantee = fields.Function(
        lambda r: SEQUENCE_GUARANTEE,
        required=True,
        metadata={"type": "string", "description": "What the limits guarantee."},
    )
    summary = summary_field(sequence_summary)
