"""Exact arithmetic on rates given as decimal fractions.

Rates reach the service as JSON numbers such as ``0.07``. In binary floating
point ``0.07 * 100`` is ``7.000000000000001``, and a naive ``ceil`` turns the
7 deviations a practitioner means into 8. Every count derived from a rate
(deviations allowed, deviant items in a population) is therefore computed on
the exact decimal the caller wrote: the shortest decimal string that round-trips
to the float (Python's ``repr``), read as a :class:`fractions.Fraction`.
"""

from __future__ import annotations

from fractions import Fraction


def exact_rate(rate: float) -> Fraction:
    """Return the decimal the caller wrote for ``rate`` as an exact fraction.

    Examples
    --------
    >>> exact_rate(0.07)
    Fraction(7, 100)
    >>> exact_rate(0.07) * 100
    Fraction(7, 1)
    """
    return Fraction(repr(float(rate)))


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
