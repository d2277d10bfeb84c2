"""Strict fields: numbers that are numbers, rates that are fractions.

marshmallow's own ``Float`` accepts ``"0.05"`` and ``true`` and turns them into
numbers, and its ``Integer`` accepts ``true`` as 1. A service whose answers are
audit evidence must not guess, so these fields accept JSON numbers only and say
what was wrong otherwise.
"""

from __future__ import annotations

import json
import math
import re
from decimal import Decimal
from typing import Any

from marshmallow import fields, validate

from service.sampling.attributes import MAX_CONFIDENCE, MIN_CONFIDENCE, MIN_TOLERABLE_RATE
from service.sampling.rates import MAX_SIGNIFICANT_DIGITS, WrittenDecimal, significant_digits
from service.sampling.selection import MAX_SEED_LENGTH

# Largest integer a JSON number carries exactly in every mainstream client
# (IEEE double precision); larger counts are refused rather than rounded.
MAX_EXACT_INTEGER = 2**53 - 1


def _is_number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


class StrictFloat(fields.Float):
    """A JSON number (integer or decimal), finite; strings and booleans are refused.

    A number read from JSON keeps the decimal the caller wrote
    (:class:`~service.sampling.rates.WrittenDecimal`); it is passed on as it is.
    """

    default_error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        "invalid": "must be a number, not {kind}",
        "special": "must be a finite number; NaN and Infinity are not accepted",
        "too_large": "must be a number of ordinary size",
    }

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> float:
        if not _is_number(value):
            raise self.make_error("invalid", kind=json_kind(value))
        try:
            result = float(value)
        except OverflowError:
            raise self.make_error("too_large") from None
        if not math.isfinite(result):
            raise self.make_error("special")
        return value if isinstance(value, WrittenDecimal) else result


def _string_rate_message(value: str) -> str:
    """Why a string is refused as a rate, with the number to send when it reads as one.

    >>> print(_string_rate_message("5%").split("; ")[1])
    "5%" looks like a percentage: rates are fractions, so send 0.05
    """
    message = "must be a number, not a string"
    text = value.strip()
    number_text = text.removesuffix("%").strip()
    try:
        number = Decimal(number_text)
    except ArithmeticError:
        return message
    if not number.is_finite():
        return message
    shown = json.dumps(value[:40], ensure_ascii=False)
    if text.endswith("%") or 1 <= number <= 100:
        fraction = number / 100
        return (
            f"{message}; {shown} looks like a percentage: rates are fractions, so send "
            f"{fraction.normalize():f}"
        )
    return f"{message}; send {shown} as the JSON number {number.normalize():f}"


class Rate(StrictFloat):
    """A rate as a fraction strictly between 0 and 1, with a hint when it looks like a percentage.

    ``allow_zero`` admits 0 (an expected deviation rate of none).
    """

    def __init__(self, *, allow_zero: bool = False, **kwargs: Any) -> None:
        self.allow_zero = allow_zero
        metadata = kwargs.pop("metadata", {})
        if allow_zero:
            metadata = {"minimum": 0, "exclusiveMaximum": 1, **metadata}
        else:
            metadata = {"exclusiveMinimum": 0, "exclusiveMaximum": 1, **metadata}
        super().__init__(metadata=metadata, **kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> float:
        if isinstance(value, str):
            raise self.make_error("validator_failed", message=_string_rate_message(value))
        result = super()._deserialize(value, attr, data, **kwargs)
        if isinstance(result, WrittenDecimal):
            self._check_written(result)
        low_ok = result >= 0 if self.allow_zero else result > 0
        if low_ok and result < 1:
            return result
        bounds = "from 0 up to (not including) 1" if self.allow_zero else "strictly between 0 and 1"
        message = f"must be a fraction {bounds}; got {value!r}"
        if 1 <= result <= 100:
            message += (
                f", which looks like a percentage: rates are fractions, so {value!r}% "
                f"is {result / 100!r}"
            )
        raise self.make_error("validator_failed", message=message)

    def _check_written(self, result: WrittenDecimal) -> None:
        written = result.decimal
        digits = significant_digits(written)
        if digits > MAX_SIGNIFICANT_DIGITS:
            raise self.make_error(
                "validator_failed",
                message=f"has {digits} significant digits; rates may have at most "
                f"{MAX_SIGNIFICANT_DIGITS}",
            )
        if written != 0 and result == 0.0:
            raise self.make_error(
                "validator_failed",
                message=f"{written} is below the smallest positive number this service "
                "carries (about 4.9e-324); send 0 for none",
            )
        if 0 < written < 1 and not (0.0 < result < 1.0):
            raise self.make_error(
                "validator_failed",
                message=f"{written} is too close to 1 to be told apart from 1 in double "
                "precision; send at most 16 nines after the point",
            )

    default_error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        **StrictFloat.default_error_messages,
        "validator_failed": "{message}",
    }


class StrictInteger(fields.Integer):
    """A JSON whole number; ``60.0`` is accepted as 60, ``60.5``, strings and booleans are not."""

    default_error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        "invalid": "must be a whole number, not {kind}",
        "fraction": "must be a whole number; got {value!r}",
        "too_large": "must be at most {maximum:,}",
    }

    def __init__(self, **kwargs: Any) -> None:
        # The documented maximum is the field's own bound when it has one below 2**53 - 1.
        validators = kwargs.get("validate") or ()
        if callable(validators):
            validators = (validators,)
        bounds = [
            v.max for v in validators
            if isinstance(v, validate.Range) and isinstance(v.max, int) and v.max_inclusive
        ]
        maximum = min([MAX_EXACT_INTEGER, *bounds])
        metadata = {"maximum": maximum, **kwargs.pop("metadata", {})}
        super().__init__(strict=False, metadata=metadata, **kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> int:
        if not _is_number(value):
            raise self.make_error("invalid", kind=json_kind(value))
        if isinstance(value, float):
            if not math.isfinite(value):
                raise self.make_error("invalid", kind="a non-finite number")
            if not value.is_integer():
                raise self.make_error("fraction", value=value)
        if abs(value) > MAX_EXACT_INTEGER:
            raise self.make_error("too_large", maximum=MAX_EXACT_INTEGER)
        return int(value)


class StrictString(fields.String):
    """A JSON string; numbers are not turned into text."""

    default_error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        "invalid": "must be a string, not {kind}",
    }

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> str:
        if not isinstance(value, str):
            raise self.make_error("invalid", kind=json_kind(value))
        return value


def json_kind(value: Any) -> str:
    """Plain-words JSON type of ``value`` for error messages."""
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "a boolean"
    if isinstance(value, str):
        return "a string"
    if isinstance(value, dict):
        return "an object"
    if isinstance(value, list):
        return "an array"
    if isinstance(value, int | float):
        return "a number"
    return "an unsupported value"


# A decimal written out in plain notation: optional minus, digits, optional point and digits.
PLAIN_DECIMAL = re.compile(r"-?[0-9]+(\.[0-9]+)?")
# Significant digits a JSON number keeps through a binary double (IEEE 754: 15 always do).
EXACT_DIGITS = 15


class Amount(fields.Field):  # type: ignore[type-arg]
    """An amount of money, kept exact: a JSON number or a decimal string, read as a Decimal.

    The service's JSON reader turns decimal numbers into binary doubles; every decimal of at
    most 15 significant digits comes back exactly from the double's shortest representation
    (IEEE 754 double precision carries 15 decimal digits), so such a number is read as the
    decimal that was sent. A number with more significant digits may already have lost some
    of them, so it is refused with the advice to send it as a string. Strings are plain
    decimals (``"-1234.50"``): no exponent, no thousands separator, no spaces. Booleans,
    NaN and infinities are refused; nothing is rounded.
    """

    accepts_text = True  # the command line sends table cells for this field as they are

    default_error_messages = {  # noqa: RUF012 - marshmallow's documented extension point
        "invalid": "must be a decimal amount (a number or a string such as \"1234.50\"), "
        "not {kind}",
        "text": "must be a plain decimal such as \"1234.50\" (digits, an optional minus and "
        "point; no exponent, spaces or separators); got {value!r}",
        "digits": "has more than 15 significant digits, which a JSON number does not carry "
        "exactly; send it as a string, such as \"{value}\"",
    }

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> Decimal:
        if isinstance(value, str):
            if not PLAIN_DECIMAL.fullmatch(value):
                raise self.make_error("text", value=value[:80])
            return Decimal(value)
        if not _is_number(value):
            raise self.make_error("invalid", kind=json_kind(value))
        if isinstance(value, int):
            return Decimal(value)
        if not math.isfinite(value):
            raise self.make_error("invalid", kind="a non-finite number")
        exact = Decimal(repr(value))
        if len(exact.as_tuple().digits) > EXACT_DIGITS:
            raise self.make_error("digits", value=repr(value))
        return exact

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> str | None:
        return None if value is None else str(value)


# --------------------------------------------------------------------------- factories
# The fields many requests share, declared once: the same bounds, messages and
# descriptions wherever they appear, so the published contract reads the same everywhere.

CONFIDENCE_DESCRIPTION = "Confidence, one minus the risk of overreliance, as a fraction."
_AT_LEAST = "must be at least {min}"


def _metadata(description: str, example: Any, **bounds: Any) -> dict[str, Any]:
    """Bounds first, then the description and the example (when there is one)."""
    metadata = {name: value for name, value in bounds.items() if value is not None}
    metadata["description"] = description
    if example is not None:
        metadata["example"] = example
    return metadata


def confidence_field(
    description: str = CONFIDENCE_DESCRIPTION,
    *,
    bounds: tuple[float, float] | None = (MIN_CONFIDENCE, MAX_CONFIDENCE),
    **kwargs: Any,
) -> Rate:
    """``confidence``: a fraction, 0.95 by default; ``bounds`` publishes the range the core
    accepts (by default the attribute-sampling core's,
    :data:`~service.sampling.attributes.MIN_CONFIDENCE` to
    :data:`~service.sampling.attributes.MAX_CONFIDENCE`)."""
    low, high = bounds if bounds is not None else (None, None)
    return Rate(
        load_default=0.95,
        metadata=_metadata(description, 0.95, minimum=low, maximum=high),
        **kwargs,
    )


def tolerable_rate_field(
    description: str, *, example: float | None = 0.05, required: bool = False, **kwargs: Any
) -> Rate:
    """``tolerable_rate``: a fraction of at least
    :data:`~service.sampling.attributes.MIN_TOLERABLE_RATE`."""
    extra = kwargs.pop("metadata", {})
    metadata = {"minimum": MIN_TOLERABLE_RATE, **extra, **_metadata(description, example)}
    return Rate(required=required, metadata=metadata, **kwargs)


def expected_rate_field(
    description: str, *, example: float | None = 0.01, default: bool = True
) -> Rate:
    """``expected_rate``: a fraction from 0, 0 by default unless ``default`` is false."""
    if default:
        return Rate(allow_zero=True, load_default=0.0, metadata=_metadata(description, example))
    return Rate(allow_zero=True, metadata=_metadata(description, example))


def count_field(
    description: str, *, minimum: int = 0, example: int | None = None, **kwargs: Any
) -> StrictInteger:
    """A whole number of at least ``minimum`` (items, deviations, stages)."""
    extra = kwargs.pop("metadata", {})
    return StrictInteger(
        validate=validate.Range(min=minimum, error=_AT_LEAST),
        metadata={**_metadata(description, example), **extra},
        **kwargs,
    )


def label_field(
    description: str, *, example: str | None = None, longest: int = 200, **kwargs: Any
) -> StrictString:
    """A non-empty name of at most ``longest`` characters (a stratum, an attribute)."""
    return StrictString(
        validate=validate.Length(
            min=1, max=longest, error="must be from {min} to {max} characters"
        ),
        metadata=_metadata(description, example),
        **kwargs,
    )


def seed_field(description: str, *, example: str) -> StrictString:
    """``seed``: any text of 1 to :data:`~service.sampling.selection.MAX_SEED_LENGTH`
    characters, used as given."""
    return StrictString(
        validate=validate.Length(
            min=1, max=MAX_SEED_LENGTH, error="must have {min} to {max} characters"
        ),
        metadata=_metadata(description, example),
    )


def choice_field(
    names: Any, description: str | None = None, *, default: str | None = None, **kwargs: Any
) -> StrictString:
    """One of ``names`` (a method, a frequency); ``default`` when left out."""
    if default is not None:
        kwargs["load_default"] = default
    if description is not None:
        kwargs["metadata"] = {"description": description, **kwargs.get("metadata", {})}
    return StrictString(
        validate=validate.OneOf(names, error="must be one of {choices}"), **kwargs
    )
