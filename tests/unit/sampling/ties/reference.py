"""The definitions of the README written out in plain rational arithmetic.

Every probability here is a :class:`fractions.Fraction` built from ``math.comb``
(Python's standard library), term by term from the textbook formulas, with no
shortcut shared with the service's code. Johnson, Kemp & Kotz, *Univariate
Discrete Distributions*, 3rd ed. (2005), chapters 3 (binomial) and 6
(hypergeometric).
"""

from __future__ import annotations

import math
from decimal import Decimal, localcontext
from fractions import Fraction


def decimal(text: str) -> Fraction:
    return Fraction(text)


def binomial_lower(k: int, n: int, p: Fraction) -> Fraction:
    return sum(
        (math.comb(n, i) * p**i * (1 - p) ** (n - i) for i in range(min(k, n) + 1)), Fraction(0)
    )


def deviant(rate: Fraction, population: int) -> int:
    """``ceil(t × N)``, the README's count of deviant items at the tolerable rate."""
    return math.ceil(rate * population)


def hypergeometric_lower(k: int, population: int, marked: int, n: int) -> Fraction:
    favourable = sum(
        math.comb(marked, i) * math.comb(population - marked, n - i) for i in range(k + 1)
    )
    return Fraction(favourable, math.comb(population, n))


def lower_tail(k: int, n: int, rate: Fraction, population: int | None) -> Fraction:
    if population is None:
        return binomial_lower(k, n, rate)
    return hypergeometric_lower(k, population, deviant(rate, population), n)


def sample_size(
    tolerable: Fraction, expected: Fraction, confidence: Fraction, population: int | None,
    limit: int = 5000,
) -> tuple[int, int]:
    """Smallest n with ``P(X ≤ ceil(e n)) ≤ 1 − confidence`` at the tolerable rate."""
    risk = 1 - confidence
    last = limit if population is None else population
    for n in range(1, last + 1):
        k = math.ceil(expected * n)
        if lower_tail(k, n, tolerable, population) <= risk:
            return n, k
    raise AssertionError("no plan within the search limit")


def short_decimal(value: Fraction) -> float | None:
    """The float whose shortest form is exactly ``value``, if ``value`` has such a form."""
    with localcontext() as context:
        context.prec = 40
        text = str(Decimal(value.numerator) / Decimal(value.denominator))
    number = float(text)
    return number if Fraction(repr(number)) == value else None


def usable_risk(risk: Fraction) -> float | None:
    """``1 − risk`` as a confidence the service accepts (0.5 … 0.999999), or None."""
    if not (Fraction(1, 10**6) <= risk <= Fraction(1, 2)):
        return None
    return short_decimal(1 - risk)
