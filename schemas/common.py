"""Shared pieces of the contract: the strict base schema, the population, problem details."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, ClassVar

from marshmallow import RAISE, Schema, ValidationError, fields, post_dump, validate

from schemas.fields import StrictString, count_field


class StrictSchema(Schema):
    """Base of every request schema: unknown fields are refused, not ignored."""

    class Meta:
        unknown = RAISE

    error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        "unknown": "is not a field of this request",
        "type": "the body must be a JSON object",
    }


class PopulationSchema(StrictSchema):
    """The population the sample is drawn from."""

    size = count_field(
        "Number of items in the population.", minimum=1, example=4200, required=True
    )
    label = StrictString(
        validate=validate.Length(max=200, error="must be at most {max} characters"),
        metadata={
            "description": "Free text naming the population, repeated in the summary.",
            "example": "Purchase orders over 10,000, Northwind Trading, Q3 2026",
        },
    )


class IntervalSchema(Schema):
    """A closed interval of deviation rates."""

    low = fields.Float(required=True)
    high = fields.Float(required=True)


class ProblemSchema(Schema):
    """Problem details for HTTP APIs (RFC 9457), as every error of this service is reported."""

    type = fields.String(
        required=True, metadata={"description": "URI reference naming the problem type."}
    )
    title = fields.String(required=True)
    status = fields.Integer(required=True)
    detail = fields.String(required=True)
    instance = fields.String(metadata={"description": "The request path."})
    request_id = fields.String(
        metadata={
            "description": "The request id, as in the X-Request-ID response header.",
            "example": "3f2b9c0d4e5f46a7b8c9d0e1f2a3b4c5",
        }
    )
    errors = fields.Dict(
        keys=fields.String(),
        values=fields.List(fields.String()),
        metadata={
            "description": "For invalid input: each offending field (dotted path) "
            "with what is wrong with it."
        },
    )


class HealthSchema(Schema):
    """Liveness and version."""

    status = fields.String(required=True, metadata={"example": "ok"})
    version = fields.String(required=True, metadata={"example": "0.1.0"})


class ReadySchema(Schema):
    """Readiness."""

    status = fields.String(
        required=True, metadata={"enum": ["ready", "starting"], "example": "ready"}
    )


class ResultSchema(Schema):
    """Base of response schemas: the fields named in ``absent_when_none`` are left out,
    rather than written as null, when the result has no value for them."""

    absent_when_none: ClassVar[tuple[str, ...]] = ()

    @post_dump
    def _drop_absent(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        keys = self.absent_when_none
        return {k: v for k, v in data.items() if not (k in keys and v is None)}


def curve_link_field(path: str, description: str) -> fields.Function:
    """``links``: an object whose one member ``curve`` is ``path``, the endpoint that draws
    the curve of the plan answered."""
    return fields.Function(
        lambda plan: {"curve": path},
        required=True,
        metadata={
            "type": "object",
            "properties": {
                "curve": {"type": "string", "description": description, "example": path}
            },
            "required": ["curve"],
            "additionalProperties": False,
        },
    )


def check_rates_in_order(data: dict[str, Any], errors: dict[str, list[str]]) -> None:
    """Add an error under ``expected_rate`` when it is not below ``tolerable_rate``."""
    tolerable, expected = data.get("tolerable_rate"), data.get("expected_rate")
    if tolerable is not None and expected is not None and expected >= tolerable:
        errors["expected_rate"] = [
            f"expected_rate {expected!r} must be below tolerable_rate {tolerable!r}"
        ]


def rates_in_order(data: dict[str, Any]) -> None:
    """Refuse an ``expected_rate`` that is not below ``tolerable_rate`` (a schema rule)."""
    errors: dict[str, list[str]] = {}
    check_rates_in_order(data, errors)
    if errors:
        raise ValidationError(errors)


# --------------------------------------------------------------------------- answers

CONCLUSIONS = ["supports_reliance", "does_not_support_reliance"]


def conclusion_text(supports: bool | None) -> str | None:
    """``supports_reliance``, ``does_not_support_reliance``, or None without a judgement."""
    if supports is None:
        return None
    return CONCLUSIONS[0] if supports else CONCLUSIONS[1]


def conclusion_field(
    supports: Callable[[Any], bool | None] = lambda result: result.supports_reliance,
    *,
    description: str | None = "Present only when tolerable_rate is given.",
    required: bool = False,
) -> fields.Function:
    """The answer's ``conclusion``, read from the result by ``supports``."""
    metadata: dict[str, Any] = {"type": "string", "enum": list(CONCLUSIONS)}
    if description is not None:
        metadata["description"] = description
    return fields.Function(
        lambda result: conclusion_text(supports(result)), required=required, metadata=metadata
    )


def summary_field(summary: Callable[[Any], str]) -> fields.Function:
    """The answer's ``summary``: one plain-English paragraph, ending with the caution."""
    return fields.Function(
        summary,
        required=True,
        metadata={"type": "string", "description": "Plain-English paragraph."},
    )


def flatten_population(data: dict[str, Any]) -> dict[str, Any]:
    """A loaded request's ``population`` object as the core's ``population_size`` and
    ``population_label`` arguments."""
    population = data.pop("population", None) or {}
    data["population_size"] = population.get("size")
    data["population_label"] = population.get("label")
    return data
