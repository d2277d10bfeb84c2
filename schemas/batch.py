"""Contract of ``POST /v1/batch``: several single requests answered in one call.

The envelope is checked as a whole (a JSON object whose ``operations`` is a list of
objects, each with a unique string ``id``); each item's ``operation`` and ``request`` are
checked on their own when the item is answered, so that one bad item fails only itself.
"""

from __future__ import annotations

from typing import Any

from marshmallow import Schema, ValidationError, fields, validate, validates_schema

from schemas.common import ProblemSchema, StrictSchema
from schemas.fields import StrictString

MAX_ID_LENGTH = 200
_REQUIRED: dict[str, Any] = {"required": "is required", "null": "must not be null"}


class BatchItemRequest(StrictSchema):
    """One single request inside a batch."""

    error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        "unknown": "is not a field of a batch operation",
        "type": "each operation must be a JSON object with id, operation and request",
    }

    id = StrictString(
        required=True,
        validate=validate.Length(
            min=1, max=MAX_ID_LENGTH, error="must be from {min} to {max} characters"
        ),
        error_messages=_REQUIRED,
        metadata={"description": "The caller's name for this item, echoed in its answer.",
                  "example": "po-q3-size"},
    )
    operation = fields.Raw(
        required=True,
        allow_none=True,
        error_messages=_REQUIRED,
        # Left untyped in the contract: any JSON value is accepted here and a wrong one is
        # answered as this item's own 422, so one bad item never fails the batch.
        metadata={"description": "The operationId of a single endpoint, such as sample-size; "
                  "anything else is answered as this item's 422.",
                  "example": "sample-size"},
    )
    request = fields.Raw(
        required=True,
        allow_none=True,
        error_messages=_REQUIRED,
        metadata={"description": "The body that endpoint takes; a body it refuses is "
                  "answered as this item's problem.",
                  "example": {"tolerable_rate": 0.05}},
    )


class BatchRequest(StrictSchema):
    """Several single requests; each is validated and answered on its own, in order."""

    operations = fields.List(
        fields.Nested(BatchItemRequest),
        required=True,
        error_messages={**_REQUIRED, "invalid": "must be a list of operations"},
        metadata={"description": "The requests, answered in this order."},
    )

    @validates_schema
    def _unique_ids(self, data: dict[str, Any], **kwargs: Any) -> None:
        seen: dict[str, int] = {}
        for index, item in enumerate(data.get("operations") or []):
            item_id = item.get("id")
            if item_id in seen:
                raise ValidationError(
                    f"{item_id[:80]!r} is already the id of operations[{seen[item_id]}]; "
                    "ids must be unique",
                    f"operations[{index}].id",
                )
            seen[item_id] = index


class BatchResultSchema(Schema):
    """The answer to one item: its result, or its problem details."""

    id = fields.String(required=True)
    status = fields.Integer(
        required=True,
        metadata={"description": "The status the single endpoint would have answered."},
    )
    result = fields.Dict(
        metadata={"description": "On success: the single endpoint's JSON response."}
    )
    problem = fields.Nested(
        ProblemSchema,
        metadata={"description": "On failure: the problem details the single endpoint "
                  "would have answered, field paths prefixed with operations[i]."},
    )


class BatchSchema(Schema):
    """The answers, one per item, in the order of the request."""

    results = fields.List(fields.Nested(BatchResultSchema), required=True)
