"""Contract of the evaluation of a completed monetary-unit test sheet.

``POST /v1/monetary/evaluation`` with a multipart body: the sheet is the file part and
:class:`MonetarySheetEvaluationRequest` the request part. The sheet carries the selection,
the book amounts and the audited amounts; the request says how to evaluate them.
"""

from __future__ import annotations

from fractions import Fraction
from typing import Any

from marshmallow import fields, pre_dump, validate

from schemas.common import StrictSchema
from schemas.fields import Amount, Rate, StrictString
from schemas.monetary import MonetaryEvaluationSchema, money_text
from service.sampling.test_sheets.monetary_results import (
    NOT_TESTED_TREATMENTS,
    MonetarySheetEvaluation,
)


class MonetarySheetEvaluationRequest(StrictSchema):
    """How to evaluate a completed monetary-unit test sheet."""

    confidence = Rate(
        load_default=0.95,
        metadata={
            "description": "Confidence, one minus the risk of incorrect acceptance.",
            "example": 0.95,
        },
    )
    tolerable_misstatement = Amount(
        metadata={
            "type": ["number", "string"],
            "description": "Tolerable misstatement, below the value sampled by units; gives "
            "the conclusion.",
            "example": "30000.00",
        }
    )
    not_tested = StrictString(
        validate=validate.OneOf(NOT_TESTED_TREATMENTS, error="must be one of {choices}"),
        metadata={
            "description": "How items with a blank audited amount (not tested) are treated; "
            "required when there are any. count_as_misstated (common practice): each is "
            "taken as audited at 0, a 100% misstatement of its book amount.",
        },
    )


class SheetMisstatementSchema(StrictSchema):
    """A misstatement recorded in the sheet."""

    line = fields.Integer(required=True)
    item = fields.String(required=True)
    selection = fields.String(
        required=True, metadata={"enum": ["individually significant", "sampled"]}
    )
    book_amount = fields.String(required=True)
    audited_amount = fields.String(required=True)
    hits = fields.Integer(required=True)
    taint = fields.String(
        required=True,
        metadata={"description": "(book - audited) / book, exactly, as a reduced fraction."},
    )
    tested = fields.Boolean(
        required=True,
        metadata={"description": "False for an item not tested, counted as misstated."},
    )


class MonetarySheetEvaluationSchema(MonetaryEvaluationSchema):
    """The evaluation of a completed monetary-unit test sheet: the JSON evaluation of its
    misstatements, with the selection it checked."""

    absent_when_none = ("not_tested",)

    selection_fingerprint = fields.String(required=True)
    population_fingerprint = fields.String(required=True)
    seed = fields.String(required=True)
    algorithm = fields.String(required=True)
    items_tested = fields.Integer(required=True)
    items_not_tested = fields.Integer(required=True)
    not_tested = fields.String(
        metadata={"description": "How items not tested were treated, when given."}
    )
    misstatements = fields.List(
        fields.Nested(SheetMisstatementSchema),
        required=True,
        metadata={"description": "The items whose audited amount differs from the book."},
    )

    @pre_dump
    def _view(self, result: Any, **kwargs: Any) -> dict[str, Any]:
        if not isinstance(result, MonetarySheetEvaluation):
            plain: dict[str, Any] = super()._view(result)
            return plain
        recorded = result.recorded
        s = recorded.scale
        document: dict[str, Any] = super()._view(result.evaluation)
        document["warnings"] = [*result.warnings, *document["warnings"]]
        return {
            **document,
            "selection_fingerprint": recorded.selection_fingerprint,
            "population_fingerprint": recorded.population_fingerprint,
            "seed": recorded.seed,
            "algorithm": recorded.algorithm,
            "items_tested": sum(i.tested for i in result.items),
            "items_not_tested": sum(not i.tested for i in result.items),
            "not_tested": result.not_tested,
            "misstatements": [
                {
                    "line": i.line,
                    "item": i.id,
                    "selection": i.kind,
                    "book_amount": money_text(i.book_amount, s),
                    "audited_amount": money_text(i.audited_amount, s),
                    "hits": i.hits,
                    "taint": str(Fraction(i.book_amount - i.audited_amount, i.book_amount)),
                    "tested": i.tested,
                }
                for i in result.misstatements
            ],
        }
