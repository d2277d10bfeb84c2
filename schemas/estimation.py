"""Contract of the estimation endpoint, ``POST /v1/estimation/sample-size``."""

from __future__ import annotations

from typing import Any

from marshmallow import (
    Schema,
    ValidationError,
    fields,
    post_load,
    validate,
)

from schemas.common import (
    PopulationSchema,
    ResultSchema,
    StrictSchema,
    flatten_population,
    summary_field,
)
from schemas.fields import Rate, StrictFloat, StrictInteger, StrictString, confidence_field
from service.sampling.estimation import (
    MAX_CONFIDENCE,
    MAX_POPULATION_SIZE,
    METHODS,
    MIN_CONFIDENCE,
    MIN_MARGIN,
)
from service.sampling.wording import CAUTION, percent

GUARANTEES = ["exact", "approximate", "distribution_free_bound"]


class Margin(StrictFloat):
    """A margin on a rate: a fraction from MIN_MARGIN up to (not including) 0.5."""

    default_error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        **StrictFloat.default_error_messages,
        "out_of_range": "{message}",
    }

    def __init__(self, **kwargs: Any) -> None:
        metadata = {"minimum": MIN_MARGIN, "exclusiveMaximum": 0.5, **kwargs.pop("metadata", {})}
        super().__init__(metadata=metadata, **kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> float:
        result = super()._deserialize(value, attr, data, **kwargs)
        if MIN_MARGIN <= result < 0.5:
            return result
        message = f"must be a fraction at least {MIN_MARGIN:g} and less than 0.5; got {value!r}"
        if 1 <= result <= 100:
            message += (
                f", which looks like a percentage: margins are fractions, so {value!r}% "
                f"is {result / 100!r}"
            )
        raise self.make_error("out_of_range", message=message)


class _MethodList(fields.List[Any]):
    """A list of method names whose length is checked before its entries."""

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> Any:
        if isinstance(value, list):
            _few_enough(value)
        return super()._deserialize(value, attr, data, **kwargs)


def _few_enough(names: list[str]) -> None:
    """Between one method and each method once; checked before the entries are named."""
    if not names:
        raise ValidationError("must name at least one method")
    if len(names) > len(METHODS):
        raise ValidationError(
            f"names {len(names):,} methods; there are {len(METHODS)} and each may appear once"
        )


def _no_repeats(names: list[str]) -> None:
    """Refuse a method named twice, naming the repeat by its index."""
    seen: dict[str, int] = {}
    errors: dict[int, list[str]] = {}
    for index, name in enumerate(names):
        if name in seen:
            errors[index] = [f"repeats {name!r}, already given as methods[{seen[name]}]"]
        else:
            seen[name] = index
    if errors:
        raise ValidationError(errors)


class EstimationPopulationSchema(PopulationSchema):
    """The population, up to the largest size the exact computation supports."""

    size = StrictInteger(
        required=True,
        validate=validate.Range(
            min=1,
            max=MAX_POPULATION_SIZE,
            error="must be from {min} to {max} (the largest supported population)",
        ),
        metadata={"description": "Number of items in the population.", "example": 4200},
    )


class EstimationRequest(StrictSchema):
    """Sample sizes to estimate a deviation rate within a margin."""

    margin = Margin(
        required=True,
        metadata={
            "description": "Largest acceptable distance between the sample rate and the "
            "true rate, as a fraction (0.05 is 5 percentage points either way).",
            "example": 0.05,
        },
    )
    confidence = confidence_field(
        "Probability, as a fraction, that the sample rate lands within the margin of the "
        "true rate.",
        bounds=(MIN_CONFIDENCE, MAX_CONFIDENCE),
        validate=validate.Range(
            MIN_CONFIDENCE, MAX_CONFIDENCE, error="must be from {min} to {max}; got {input}"
        ),
    )
    anticipated_rate = Rate(
        metadata={
            "description": "Rate expected in the population, as a fraction strictly "
            "between 0 and 1. Absent: plan for the worst case over all rates.",
            "example": 0.1,
        },
    )
    population = fields.Nested(
        EstimationPopulationSchema,
        metadata={
            "description": "Absent for a population large enough to ignore its size; given, "
            "the sample is drawn without replacement and no size exceeds population.size."
        },
    )
    methods = _MethodList(
        StrictString(validate=validate.OneOf(METHODS, error="must be one of {choices}")),
        validate=[_few_enough, _no_repeats],
        error_messages={"invalid": "must be an array of method names"},
        metadata={
            "description": "Methods to compare, one row each in this order. "
            f"Default: all of {', '.join(METHODS)}.",
            "example": ["exact", "normal", "hoeffding"],
            "uniqueItems": True,
        },
    )

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        return flatten_population(data)


class EstimationRowSchema(Schema):
    """One method's sample size."""

    method = fields.String(required=True, metadata={"enum": list(METHODS)})
    sample_size = fields.Integer(
        required=True, metadata={"description": "Items the method asks for."}
    )
    guarantee = fields.String(
        required=True,
        metadata={
            "enum": GUARANTEES,
            "description": "exact: the miss probability at this size is computed exactly and "
            "is at most 1 − confidence. approximate: the size rests on the normal "
            "approximation, and the miss probability can exceed 1 − confidence. "
            "distribution_free_bound: an inequality that holds for every rate guarantees "
            "the miss probability, usually with a larger sample than needed.",
        },
    )
    miss_probability = fields.Float(
        required=True,
        allow_none=True,
        metadata={
            "description": "Exact probability that the sample rate lands more than the "
            "margin from the true rate, at this size (binomial, or hypergeometric with a "
            "population size); without anticipated_rate, its largest value over all rates. "
            "null when the computation is too large."
        },
    )
    ratio_to_exact = fields.Float(
        required=True,
        allow_none=True,
        metadata={
            "description": "sample_size divided by the exact method's size; null when the "
            "exact method was not asked for."
        },
    )
    finite_population_correction = fields.Boolean(
        required=True,
        metadata={"description": "Whether the method's finite-population form was used."},
    )


class EstimationSchema(ResultSchema):
    """Sample sizes from several methods for one estimation goal."""

    absent_when_none = ("population_label",)

    margin = fields.Float(required=True)
    confidence = fields.Float(required=True)
    anticipated_rate = fields.Float(
        required=True,
        allow_none=True,
        metadata={"description": "null when the plan is for the worst case over all rates."},
    )
    population_size = fields.Integer(required=True, allow_none=True)
    population_label = fields.String()
    rows = fields.List(fields.Nested(EstimationRowSchema), required=True)
    recommended = fields.String(
        required=True,
        metadata={
            "enum": list(METHODS),
            "description": "The method with the smallest size among the rows whose guarantee "
            "is exact or distribution_free_bound; when only approximate methods were asked "
            "for, the smallest of those.",
        },
    )
    summary = summary_field(lambda result: estimation_summary(result))


# --- summary ----------------------------------------------------------------


def _points(rate: float) -> str:
    """A margin in percentage points: 0.05 → '5 percentage points'."""
    return f"{percent(rate)[:-1]} percentage points"


def _and(items: list[str]) -> str:
    if len(items) <= 1:
        return "".join(items)
    return f"{', '.join(items[:-1])} and {items[-1]}"


def _row_text(row: dict[str, Any], alpha_text: str, alpha: float) -> str:
    text = f"{row['method']} {row['sample_size']:,} items"
    miss = row["miss_probability"]
    if miss is None:
        return f"{text} (miss probability not computed: too large a computation)"
    if row["guarantee"] == "approximate":
        side = "within" if miss <= alpha else "above"
        return f"{text} (miss probability {percent(miss)}, {side} the {alpha_text} allowed)"
    return f"{text} (miss probability {percent(miss)})"


def estimation_summary(result: dict[str, Any]) -> str:
    """One paragraph: the goal, each row by the kind of guarantee it gives, the choice."""
    alpha = 1.0 - result["confidence"]
    alpha_text = percent(alpha)
    if result["population_size"] is None:
        population = "a large population"
    else:
        population = f"a population of {result['population_size']:,} items"
        if result.get("population_label"):
            population += f" ({result['population_label']})"
    if result["anticipated_rate"] is None:
        rate = "planning for the worst case over all rates"
    else:
        rate = f"at an anticipated rate of {percent(result['anticipated_rate'])}"
    text = (
        f"To estimate the deviation rate of {population} within {_points(result['margin'])} "
        f"either way with {percent(result['confidence'])} confidence, {rate}: the miss "
        "probability is the chance that the sample rate lands farther than that from the "
        f"true rate, and may be at most {alpha_text}."
    )
    rows: list[dict[str, Any]] = result["rows"]
    groups = {
        "exact": (
            "Exact",
            "the smallest size from which every larger sample keeps the exact miss "
            "probability within the limit",
        ),
        "approximate": (
            "Approximate",
            "sizes from the normal approximation, not guaranteed",
        ),
        "distribution_free_bound": (
            "Distribution-free bounds",
            "guaranteed by an inequality that holds for every rate, at the cost of larger samples",
        ),
    }
    for guarantee, (title, meaning) in groups.items():
        members = [row for row in rows if row["guarantee"] == guarantee]
        if members:
            listed = _and([_row_text(row, alpha_text, alpha) for row in members])
            text += f" {title} ({meaning}): {listed}."
    if result["population_size"] is not None:
        corrected = [row["method"] for row in rows if row["finite_population_correction"]]
        if not corrected:
            text += " No row uses the population size; each sizes as for an unlimited population."
        elif len(corrected) == len(rows):
            text += " Every row uses the population size."
        else:
            verb = "uses" if len(corrected) == 1 else "use"
            text += (
                f" {_and(corrected).capitalize()} {verb} the population size; the other rows "
                "size as for an unlimited population."
            )
    chosen = next(row for row in rows if row["method"] == result["recommended"])
    if any(row["guarantee"] != "approximate" for row in rows):
        why = "the smallest size among the rows whose guarantee does not rest on an approximation"
    else:
        why = "the smallest of the approximate rows asked for; no guaranteed method was asked for"
    text += f" Recommended: {chosen['method']}, {chosen['sample_size']:,} items, {why}."
    return f"{text} {CAUTION}"
