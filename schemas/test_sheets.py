"""Contract of the evaluation of a completed test sheet (``POST /v1/evaluation`` with a file).

The request part of the multipart body says how to evaluate; the sheet itself carries the
selection, the population size and the results.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from marshmallow import ValidationError, fields, validate

from schemas.attributes import METHOD_NAMES, EvaluationSchema
from schemas.common import PopulationSchema, ResultSchema, StrictSchema
from schemas.fields import Rate, StrictString, confidence_field
from service.sampling.attributes import (
    MIN_TOLERABLE_RATE,
    Evaluation,
)
from service.sampling.test_sheets.layout import MAX_ATTRIBUTE_LENGTH, MAX_ATTRIBUTES
from service.sampling.test_sheets.reading import CompletedSheet
from service.sampling.test_sheets.results import NOT_TESTED_TREATMENTS, SheetTally
from service.sampling.wording import CAUTION, percent


class _Rates(fields.Dict):
    """Attribute name → tolerable deviation rate."""

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> Any:
        if not isinstance(value, dict):
            raise ValidationError("must be an object mapping each attribute to its rate")
        if len(value) > MAX_ATTRIBUTES:
            raise ValidationError(f"must name at most {MAX_ATTRIBUTES} attributes")
        parent: Any = super()
        return parent._deserialize(value, attr, data, **kwargs)


class TestSheetEvaluationRequest(StrictSchema):
    """How to evaluate a completed test sheet."""

    __test__ = False  # not a pytest test class

    confidence = confidence_field()
    tolerable_rates = _Rates(
        keys=StrictString(validate=validate.Length(min=1, max=MAX_ATTRIBUTE_LENGTH)),
        values=Rate(metadata={"minimum": MIN_TOLERABLE_RATE}),
        metadata={
            "description": "Tolerable deviation rate of each attribute, by its name in the "
            "sheet; an attribute without one is evaluated without a conclusion.",
            "example": {"approved before release": 0.05, "three-way match": 0.05},
        },
    )
    not_tested = StrictString(
        validate=validate.OneOf(NOT_TESTED_TREATMENTS, error="must be one of {choices}"),
        metadata={
            "description": "How items marked 'not tested' are treated; required when there "
            "are any. count_as_deviation (common practice): each is a deviation. drop: the "
            "items tested are evaluated as a smaller sample, with a warning.",
        },
    )
    method = StrictString(
        validate=validate.OneOf(METHOD_NAMES, error="must be one of {choices}"),
        metadata={
            "description": "Distribution used; default hypergeometric over the population "
            "size recorded in the sheet."
        },
    )
    population = fields.Nested(
        PopulationSchema,
        metadata={
            "description": "Optional: the population's size, which must be the one recorded "
            "in the sheet, and a label repeated in the summaries."
        },
    )


@dataclass(frozen=True)
class TestSheetEvaluation:
    """A checked test sheet with one evaluation per attribute."""

    __test__ = False

    tally: SheetTally
    evaluations: tuple[Evaluation, ...]
    confidence: float
    sheet: CompletedSheet


_COUNTS: dict[str, Any] = {
    "type": "object",
    "required": ["attribute", "passed", "deviations_found", "not_tested"],
    "properties": {
        "attribute": {"type": "string", "description": "The attribute, as named in the sheet."},
        "passed": {"type": "integer", "description": "Items marked passed."},
        "deviations_found": {"type": "integer", "description": "Items marked deviation."},
        "not_tested": {"type": "integer", "description": "Items marked not tested."},
    },
}


def _summary(result: TestSheetEvaluation) -> str:
    recorded = result.tally.recorded
    parts = []
    for tally, evaluation in zip(result.tally.attributes, result.evaluations, strict=True):
        text = (
            f"{tally.attribute}: {tally.deviations:,} deviation"
            f"{'' if tally.deviations == 1 else 's'} in {tally.sample_size:,} items, upper "
            f"deviation limit {percent(evaluation.upper_deviation_limit)}"
        )
        if evaluation.supports_reliance is not None:
            text += (
                f" against a tolerable rate of {percent(evaluation.tolerable_rate or 0)}: "
                + ("supports reliance" if evaluation.supports_reliance else
                   "does not support reliance")
            )
        parts.append(text)
    return (
        f"Test sheet of selection {recorded.selection_fingerprint}: {recorded.sample_size:,} "
        f"items from a population of {recorded.population_size:,}, every row matching the "
        f"selection; at {percent(result.confidence)} confidence, "
        + "; ".join(parts)
        + f". {CAUTION}"
    )


def _warnings(result: TestSheetEvaluation) -> list[str]:
    warnings = list(result.tally.warnings)
    for tally, evaluation in zip(result.tally.attributes, result.evaluations, strict=True):
        warnings += [f"{tally.attribute}: {w}" for w in evaluation.warnings]
    return warnings


def _evaluations(result: TestSheetEvaluation) -> list[dict[str, Any]]:
    schema = EvaluationSchema()
    documents: list[dict[str, Any]] = []
    for tally, evaluation in zip(result.tally.attributes, result.evaluations, strict=True):
        counts = {
            "attribute": tally.attribute,
            "passed": tally.passed,
            "deviations_found": tally.deviations_found,
            "not_tested": tally.not_tested,
        }
        documents.append({**counts, **schema.dump(evaluation)})
    return documents


class TestSheetEvaluationSchema(ResultSchema):
    """The evaluation of a completed test sheet: one evaluation per attribute."""

    __test__ = False
    absent_when_none = ("not_tested",)

    selection_fingerprint = fields.String(
        required=True, attribute="tally.recorded.selection_fingerprint"
    )
    population_fingerprint = fields.String(
        required=True, attribute="tally.recorded.population_fingerprint"
    )
    population_size = fields.Integer(required=True, attribute="tally.recorded.population_size")
    sample_size = fields.Integer(
        required=True,
        attribute="tally.recorded.sample_size",
        metadata={"description": "Items selected (rows of the sheet)."},
    )
    seed = fields.String(required=True, attribute="tally.recorded.seed")
    algorithm = fields.String(required=True, attribute="tally.recorded.algorithm")
    confidence = fields.Float(required=True)
    method = fields.Function(
        lambda result: result.evaluations[0].method,
        required=True,
        metadata={"type": "string", "description": "Distribution used for every attribute."},
    )
    not_tested = fields.String(
        attribute="tally.not_tested",
        metadata={"description": "How items marked not tested were treated, when given."},
    )
    evaluations = fields.Function(
        _evaluations,
        required=True,
        metadata={
            "type": "array",
            "items": {"allOf": [{"$ref": "#/components/schemas/Evaluation"}, _COUNTS]},
            "description": "One evaluation per attribute, in the sheet's order: the "
            "attribute's counts, then its evaluation as the JSON form gives it for "
            "sample_size (the items evaluated) and deviations.",
        },
    )
    summary = fields.Function(
        _summary, required=True, metadata={"type": "string", "description": "Plain English."}
    )
    warnings = fields.Function(
        _warnings, required=True, metadata={"type": "array", "items": {"type": "string"}}
    )
