"""Contract of the test-of-controls endpoints: sample size and evaluation."""

from __future__ import annotations

from typing import Any

from marshmallow import (
    ValidationError,
    fields,
    post_load,
    validates_schema,
)

from schemas.common import (
    IntervalSchema,
    PopulationSchema,
    ResultSchema,
    StrictSchema,
    check_rates_in_order,
    conclusion_field,
    curve_link_field,
    flatten_population,
    summary_field,
)
from schemas.curves import CURVE_PATH
from schemas.fields import (
    Rate,
    choice_field,
    confidence_field,
    count_field,
    expected_rate_field,
    tolerable_rate_field,
)
from schemas.plans import (
    AttributeFindingsSchema,
    AttributeRatesSchema,
    PriorSchema,
    attributes_field,
    prior_answer_fields,
    unique_names,
)
from schemas.strata import check_strata, strata_field
from service.sampling.distributions import MODELS
from service.sampling.plans.wording import any_evaluation_summary, any_plan_summary
from service.sampling.wording import (
    NEXT_STEPS,
    comparison_with_plan,
)

METHOD_NAMES = sorted(MODELS)
_MISSING_UNLESS_ATTRIBUTES = "Missing data for required field (unless attributes is given)."
_MISSING_UNLESS_STRATA = "Missing data for required field (unless strata is given)."
_MISSING_UNLESS_EITHER = (
    "Missing data for required field (unless attributes or strata is given)."
)
# The fields of a single population's evaluation, which strata replace.
_SINGLE_POPULATION_FIELDS = (
    "population", "sample_size", "deviations", "method", "attributes", "prior",
)

METHOD_DESCRIPTION = (
    "Distribution used: hypergeometric (finite population, without replacement), binomial, "
    "or poisson. Default: hypergeometric when population.size is given, else binomial."
)


class SampleSizeRequest(StrictSchema):
    """Sample size for a test of controls."""

    population = fields.Nested(
        PopulationSchema,
        metadata={"description": "Absent for a population large enough to ignore its size."},
    )
    tolerable_rate = tolerable_rate_field(
        "Tolerable deviation rate, as a fraction. Required unless attributes is given.",
        metadata={"required_unless": "attributes"},
    )
    expected_rate = expected_rate_field(
        "Expected population deviation rate, as a fraction, below tolerable_rate."
    )
    confidence = confidence_field()
    method = choice_field(METHOD_NAMES, METHOD_DESCRIPTION)
    attributes = attributes_field(
        AttributeRatesSchema,
        "Several attributes tested on one sample, each with its own rates (instead of "
        "tolerable_rate and expected_rate): the answer is one sample size, the largest any "
        "attribute needs, with each attribute's allowed deviations and risks at that size.",
    )
    underreliance_risk = Rate(
        metadata={
            "description": "Largest acceptable risk of underreliance at expected_rate "
            "(optional): the plan is then the smallest sample and allowed deviations meeting "
            "both this limit and the confidence.",
            "example": 0.10,
        },
    )
    prior = fields.Nested(
        PriorSchema,
        metadata={
            "description": "Prior evidence (optional): sample_size is then the Bayesian plan, "
            "the smallest n whose expected result gives a posterior probability of at least "
            "confidence that the rate is at most tolerable_rate; classical_sample_size is "
            "the plan without it."
        },
    )

    @validates_schema(pass_original=True)
    def _consistent(
        self, data: dict[str, Any], original: Any, **kwargs: Any
    ) -> None:
        errors: dict[str, list[str]] = {}
        several = data.get("attributes")
        if several is not None:
            for name in ("tolerable_rate", "expected_rate", "underreliance_risk"):
                if name in original:
                    errors[name] = [
                        "attributes carry their own rates; leave this field out when "
                        "attributes is given"
                    ]
            unique_names(several, errors)
        elif data.get("tolerable_rate") is None:
            errors["tolerable_rate"] = [_MISSING_UNLESS_ATTRIBUTES]
        if "prior" in data and (several is not None or "underreliance_risk" in data):
            errors["prior"] = [
                "a prior applies to a single attribute without underreliance_risk"
            ]
        check_rates_in_order(data, errors)
        if errors:
            raise ValidationError(errors)

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        return flatten_population(data)


class SampleSizePlanSchema(ResultSchema):
    """A sample size plan.

    ``curve_request`` is the body to POST, as it is, to ``links.curve``
    (``/v1/plans/curve``) for the operating characteristic of this plan: it names the
    sample size, the allowed deviations, the method and the population of the plan and the
    two rates it was sized for, so the curve's risk of overreliance and risk of
    underreliance are this plan's. Send it with ``Accept: image/svg+xml`` for the chart.
    """

    absent_when_none = (
        "population_label",
        "tolerable_deviant_items",
        "underreliance_risk",
        "classical_sample_size",
        "classical_allowed_deviations",
        "prior",
        "posterior_probability",
        "posterior_upper_limit",
        "items_saved",
    )

    sample_size = fields.Integer(required=True, metadata={"description": "Items to test."})
    allowed_deviations = fields.Integer(
        required=True,
        metadata={"description": "Most deviations the sample may show and still support reliance."},
    )
    method = fields.String(required=True)
    tolerable_rate = fields.Float(required=True)
    expected_rate = fields.Float(required=True)
    confidence = fields.Float(required=True)
    achieved_confidence = fields.Float(
        required=True,
        metadata={"description": "Exact confidence of the plan at the tolerable rate."},
    )
    risk_of_overreliance = fields.Float(
        required=True,
        metadata={
            "description": "Probability of allowed_deviations or fewer when the true rate is "
            "the tolerable rate (1 − achieved_confidence)."
        },
    )
    risk_of_underreliance = fields.Float(
        required=True,
        metadata={
            "description": "Probability of more than allowed_deviations when the true rate is "
            "the expected rate."
        },
    )
    population_size = fields.Integer(required=True, allow_none=True)
    population_label = fields.String()
    whole_population = fields.Boolean(
        required=True,
        metadata={
            "description": "True when the plan tests every item of the population: the "
            "result will carry no sampling risk."
        },
    )
    tolerable_deviant_items = fields.Integer(
        metadata={
            "description": "ceil(tolerable_rate × population.size): the deviant items the "
            "population holds at the tolerable rate. Present when population.size is given."
        }
    )
    underreliance_risk = fields.Float(
        metadata={
            "description": "The limit on the risk of underreliance the plan was sized for, "
            "when the request gave one."
        }
    )
    classical_sample_size = fields.Integer(
        metadata={
            "description": "The plan allowing ceil(expected_rate × n) deviations, beside a "
            "plan sized for both risks or with a prior."
        }
    )
    classical_allowed_deviations = fields.Integer(
        metadata={"description": "The deviations the classical plan allows."}
    )
    prior = prior_answer_fields()["prior"]
    posterior_probability = prior_answer_fields()["posterior_probability"]
    posterior_upper_limit = prior_answer_fields()["posterior_upper_limit"]
    items_saved = fields.Integer(
        metadata={
            "description": "With a prior: classical_sample_size − sample_size (negative when "
            "the prior asks for more items)."
        }
    )
    summary = summary_field(any_plan_summary)
    warnings = fields.List(fields.String(), required=True)
    curve_request = fields.Method(
        "_curve_request",
        required=True,
        metadata={
            "allOf": [{"$ref": "#/components/schemas/CurveRequest"}],
            "description": "Body to POST, unchanged, to links.curve for the operating "
            "characteristic of this plan.",
        },
    )
    links = curve_link_field(CURVE_PATH, "Path of the operating characteristic endpoint.")

    def _curve_request(self, plan: Any) -> dict[str, Any]:
        from schemas.curves import curve_request_body

        return curve_request_body(plan)


class EvaluationRequest(StrictSchema):
    """Evaluation of a finished test of controls."""

    population = fields.Nested(PopulationSchema)
    sample_size = count_field(
        "Items tested. Required unless strata is given.",
        minimum=1,
        example=60,
        metadata={"required_unless": ("strata",)},
    )
    deviations = count_field(
        "Deviations found. Required unless attributes or strata is given.",
        example=1,
        metadata={"required_unless": ("attributes", "strata")},
    )
    confidence = confidence_field()
    tolerable_rate = tolerable_rate_field(
        "When given, the response says whether the sample supports reliance."
    )
    expected_rate = expected_rate_field(
        "The plan's expected population deviation rate, as a fraction (optional): the answer "
        "then compares the deviations found with the ceil(expected_rate × sample_size) the "
        "plan allowed. The same body can so be sent to /v1/sample-size and, with sample_size "
        "and deviations added, here.",
        default=False,
    )
    method = choice_field(METHOD_NAMES, METHOD_DESCRIPTION)
    attributes = attributes_field(
        AttributeFindingsSchema,
        "Several attributes tested on the same sample_size items, each with the deviations "
        "found for it and its tolerable rate (instead of deviations and tolerable_rate): "
        "each is evaluated on its own.",
    )
    prior = fields.Nested(
        PriorSchema,
        metadata={
            "description": "Prior evidence (optional): the answer adds the posterior "
            "probability that the rate is at most tolerable_rate and the posterior upper "
            "limit, beside the classical evaluation."
        },
    )
    strata = strata_field(
        "A population sampled in strata (instead of population, sample_size, deviations, "
        "method, attributes and prior): each stratum's population, sample and deviations. "
        "The answer is then a StrataEvaluation, as POST /v1/evaluation/strata gives it."
    )

    @validates_schema
    def _consistent(self, data: dict[str, Any], **kwargs: Any) -> None:
        n, d = data.get("sample_size"), data.get("deviations")
        errors: dict[str, list[str]] = {}
        several = data.get("attributes")
        if "strata" in data:
            for name in _SINGLE_POPULATION_FIELDS:
                if name in data:
                    errors[name] = [
                        "strata carry their own populations, samples and findings; leave "
                        "this field out when strata is given"
                    ]
            check_strata(data["strata"], errors)
            n = d = None
        elif n is None:
            errors["sample_size"] = [_MISSING_UNLESS_STRATA]
        if several is not None and "strata" not in data:
            for name in ("deviations", "tolerable_rate", "expected_rate"):
                if name in data:
                    errors[name] = [
                        "attributes carry their own findings and rates; leave this field out "
                        "when attributes is given"
                    ]
            unique_names(several, errors)
            if "prior" in data:
                errors["prior"] = ["a prior applies to a single attribute"]
            for index, item in enumerate(several):
                if n is not None and item.deviations > n:
                    errors[f"attributes[{index}].deviations"] = [
                        f"deviations {item.deviations} must not exceed sample_size {n}"
                    ]
        elif d is None and "strata" not in data:
            errors["deviations"] = [_MISSING_UNLESS_EITHER]
        check_rates_in_order(data, errors)
        if n is not None and d is not None and d > n:
            errors["deviations"] = [f"deviations {d} must not exceed sample_size {n}"]
        size = (data.get("population") or {}).get("size")
        if n is not None and size is not None and n > size:
            errors["sample_size"] = [f"sample_size {n} must not exceed population.size {size}"]
        if errors:
            raise ValidationError(errors)

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        return flatten_population(data)


class EvaluationSchema(ResultSchema):
    """The evaluation of a test of controls."""

    absent_when_none = (
        "tolerable_rate",
        "population_label",
        "upper_deviation_count",
        "risk_at_tolerable_rate",
        "conclusion",
        "expected_rate",
        "planned_allowed_deviations",
        "comparison_with_plan",
        "tolerable_deviant_items",
        "prior",
        "posterior_probability",
        "posterior_upper_limit",
    )

    method = fields.String(required=True)
    sample_size = fields.Integer(required=True)
    deviations = fields.Integer(required=True)
    confidence = fields.Float(required=True)
    tolerable_rate = fields.Float()
    population_size = fields.Integer(required=True, allow_none=True)
    population_label = fields.String()
    sample_deviation_rate = fields.Float(required=True)
    upper_deviation_limit = fields.Float(
        required=True,
        metadata={"description": "Exact one-sided upper confidence bound for the deviation rate."},
    )
    upper_deviation_count = fields.Integer(
        metadata={"description": "Hypergeometric method: the upper bound on deviant items."}
    )
    allowance_for_sampling_risk = fields.Float(
        required=True, metadata={"description": "upper_deviation_limit − sample_deviation_rate."}
    )
    confidence_interval = fields.Nested(
        IntervalSchema,
        required=True,
        attribute="interval",
        metadata={"description": "Two-sided exact confidence interval at the same confidence."},
    )
    risk_at_tolerable_rate = fields.Float(
        metadata={
            "description": "Probability of this many deviations or fewer if the true rate were "
            "the tolerable rate; reliance is supported when it is at most 1 − confidence."
        }
    )
    expected_rate = fields.Float(
        metadata={"description": "The plan's expected rate, when the request gave it."}
    )
    planned_allowed_deviations = fields.Integer(
        metadata={
            "description": "ceil(expected_rate × sample_size): the deviations the plan allowed "
            "for this sample size. Present when expected_rate is given."
        }
    )
    comparison_with_plan = fields.Function(
        comparison_with_plan,
        metadata={
            "type": "string",
            "description": "The deviations found against those the plan allowed, in words.",
            "example": "Planned to allow 1 deviation; found 2.",
        },
    )
    whole_population = fields.Boolean(
        required=True,
        metadata={
            "description": "True when every item of the population was tested (sample_size "
            "equals population.size): there is no sampling risk, and the limits and interval "
            "are the population's exact deviation rate."
        },
    )
    tolerable_deviant_items = fields.Integer(
        metadata={
            "description": "ceil(tolerable_rate × population.size): the deviant items the "
            "population holds at the tolerable rate. Present when both are given."
        }
    )
    next_steps = fields.Function(
        lambda result: list(NEXT_STEPS) if result.supports_reliance is False else [],
        required=True,
        metadata={
            "type": "array",
            "items": {"type": "string"},
            "description": "When the sample does not support reliance: what the standards "
            "expect next (ISA 530 ¶12-13, AU-C 530), in plain words; empty otherwise.",
        },
    )
    conclusion = conclusion_field()
    prior = prior_answer_fields()["prior"]
    posterior_probability = prior_answer_fields()["posterior_probability"]
    posterior_upper_limit = prior_answer_fields()["posterior_upper_limit"]
    summary = summary_field(any_evaluation_summary)
    warnings = fields.List(fields.String(), required=True)
