"""Exact amounts: decimals read as whole numbers of the smallest currency unit.

Money is never held as a binary float. An amount is read as a :class:`~decimal.Decimal`
(from a string, an int or a Decimal) and turned into an integer count of the smallest
currency unit (cents when ``scale`` is 2). Totals and intervals are then sums and
fractions of integers, exact whatever the number of items; decimals are only written
back for reading, rounded half-even at the currency's scale.
"""

from __future__ import annotations

from decimal import Decimal, InvalidOperation
from fractions import Fraction
from typing import Final

from service.sampling.errors import InvalidInput

DEFAULT_SCALE: Final = 2
"""Decimal places of the smallest currency unit (2: cents)."""

MAX_SCALE: Final = 6
"""Most decimal places accepted for a currency unit."""

MAX_UNITS: Final = 10**18
"""Largest amount accepted, in smallest currency units (exact as a 64-bit integer)."""


def to_units(value: object, field: str, scale: int = DEFAULT_SCALE) -> int:
    """``value`` as a whole number of units of ``10**-scale``; more decimals are refused.

    >>> to_units("1234.5", "amount"), to_units(Decimal("-0.10"), "amount"), to_units(7, "amount")
    (123450, -10, 700)
    """
    if isinstance(value, bool) or not isinstance(value, str | int | Decimal):
        raise InvalidInput(field, f"must be a decimal number, got {type(value).__name__}")
    try:
        amount = Decimal(value.strip()) if isinstance(value, str) else Decimal(value)
    except InvalidOperation:
        raise InvalidInput(field, f"must be a decimal number, got {value!r}") from None
    if not amount.is_finite():
        raise InvalidInput(field, f"must be a finite decimal number, got {value!r}")
    units = amount.scaleb(scale)
    if units != units.to_integral_value():
        raise InvalidInput(
            field, f"{value!r} has more than {scale} decimal places (the smallest currency unit)"
        )
    whole = int(units)
    if abs(whole) > MAX_UNITS:
        raise InvalidInput(field, f"{value!r} is larger than this service accepts")
    return whole


def to_decimal(units: int | Fraction, scale: int = DEFAULT_SCALE) -> Decimal:
    """Units of ``10**-scale`` as a Decimal at that scale, rounded half-even when fractional.

    >>> to_decimal(123450), to_decimal(Fraction(250_000_000, 60))
    (Decimal('1234.50'), Decimal('41666.67'))
    """
    value = Fraction(units)
    quotient, remainder = divmod(value.numerator, value.denominator)
    twice = 2 * remainder
    if twice > value.denominator or (twice == value.denominator and quotient % 2):
        quotient += 1
    return Decimal(quotient).scaleb(-scale)


def fraction_text(value: Fraction, scale: int = DEFAULT_SCALE) -> str:
    """An amount in units as an exact, reduced fraction of currency, e.g. ``"125000/3"``.

    >>> fraction_text(Fraction(250_000_000, 60)), fraction_text(Fraction(700))
    ('125000/3', '7')
    """
    return str(value / 10**scale)
