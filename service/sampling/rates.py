"""Exact arithmetic on rates given as decimal fractions.

Rates reach the service as JSON numbers such as ``0.07``. In binary floating
point ``0.07 * 100`` is ``7.000000000000001``, and a naive ``ceil`` turns the
7 deviations a practitioner means into 8. Every count derived from a rate
(deviations allowed, deviant items in a population) is therefore computed on
the exact decimal the caller wrote, read as a :class:`fractions.Fraction`:

- a :class:`WrittenDecimal` (what the JSON reader makes of every number with a
  fraction or an exponent) carries that decimal itself, at any length:
  ``0.0100000000000000001`` stays that number, not the double ``0.01``;
- a plain ``float`` (a call from Python) stands for the shortest decimal string
  that round-trips to it (Python's ``repr``).

:data:`MAX_SIGNIFICANT_DIGITS` bounds what the service accepts as written.
"""

from __future__ import annotations

from decimal import Decimal
from fractions import Fraction
from functools import lru_cache

#: Most significant digits a written rate may carry; longer ones are refused, not rounded.
MAX_SIGNIFICANT_DIGITS = 30


class WrittenDecimal(float):
    """A number as a float that keeps the decimal it was written as (``.decimal``).

    It behaves as the nearest double everywhere a float is expected, and
    :func:`exact_rate` reads the written decimal from it.

    >>> rate = WrittenDecimal("0.0100000000000000001")
    >>> rate == 0.01, rate.decimal
    (True, Decimal('0.0100000000000000001'))
    """

    decimal: Decimal

    def __new__(cls, text: str) -> WrittenDecimal:
        number = super().__new__(cls, text)
        number.decimal = Decimal(text)
        return number

    def __reduce__(self) -> tuple[type[WrittenDecimal], tuple[str]]:
        return (WrittenDecimal, (str(self.decimal),))


def significant_digits(value: Decimal) -> int:
    """Digits of ``value`` from its first non-zero digit to its last written one.

    >>> significant_digits(Decimal("0.0466")), significant_digits(Decimal("1e-400"))
    (3, 1)
    """
    return len(value.as_tuple().digits) if value else 1


def exact_rate(rate: float) -> Fraction:
    """Return the decimal the caller wrote for ``rate`` as an exact fraction.

    Examples
    --------
    >>> exact_rate(0.07)
    Fraction(7, 100)
    >>> exact_rate(0.07) * 100
    Fraction(7, 1)
    >>> exact_rate(WrittenDecimal("0.0100000000000000001"))
    Fraction(100000000000000001, 10000000000000000000)
    """
    written = getattr(rate, "decimal", None)
    if isinstance(written, Decimal):
        return _decimal_fraction(written)
    return _float_fraction(float(rate))


# A request carries a few rates from a short list (95 %, 5 %, …): their fractions are
# kept rather than parsed again. Equal decimals (0.05, 0.050) have one fraction.
@lru_cache(maxsize=1024)
def _decimal_fraction(written: Decimal) -> Fraction:
    return Fraction(written)


@lru_cache(maxsize=1024)
def _float_fraction(rate: float) -> Fraction:
    return Fraction(repr(rate))


def ceil_product(rate: Fraction, count: int) -> int:
    """Return ``ceil(rate * count)`` computed exactly on integers.

    Examples
    --------
    >>> ceil_product(Fraction(7, 100), 100)
    7
    >>> ceil_product(Fraction(1, 100), 93)
    1
    """
    return -((-rate.numerator * count) // rate.denominator)


def floor_quotient(count: int, rate: Fraction) -> int:
    """Return ``floor(count / rate)`` computed exactly on integers (``rate > 0``)."""
    return (count * rate.denominator) // rate.numerator
