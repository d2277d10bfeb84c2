"""Binomial and hypergeometric lower tails as exact fractions.

Binomial, ``p = a / b`` in lowest terms, ``c = b − a``:

    P(X ≤ k) = Σ_{i=0..k} C(n, i) a^i c^(n−i) / b^n.

Hypergeometric, ``M`` deviant items among ``N``, ``n`` drawn:

    P(X ≤ k) = Σ_{i} C(M, i) C(N − M, n − i) / C(N, n).

Both sums are formed on integers, each term from the one before by the ratio of
successive terms (Johnson, Kemp & Kotz, *Univariate Discrete Distributions*, 3rd ed.,
2005, §3.2 and §6.2), with every division exact. The integers grow with the sample
(about ``n log2 b`` bits for the binomial), so :func:`binomial_cost` and
:func:`hypergeometric_cost` estimate the work in bit operations and callers skip the
exact path above :data:`WORK_LIMIT` (samples of hundreds of thousands of items, where
an exact tie of a round risk cannot occur in practice).
"""

from __future__ import annotations

import math
from fractions import Fraction

#: Largest estimated work (bits times terms) of one exact tail, about a second.
WORK_LIMIT = 4 * 10**9


def binomial_cost(k: int, n: int, rate: Fraction) -> float:
    """Estimated work of :func:`binomial_lower`: bits of ``b^n`` times the terms summed."""
    terms = max(0, min(k, n) + 1)
    return n * max(1, rate.denominator.bit_length()) * terms


def binomial_lower(k: int, n: int, rate: Fraction) -> Fraction:
    """``P(X ≤ k)`` for ``X ~ Binomial(n, rate)``, exactly.

    >>> binomial_lower(0, 3, Fraction(3, 10))  # 0.7 ** 3
    Fraction(343, 1000)
    >>> binomial_lower(1, 2, Fraction(1, 2))
    Fraction(3, 4)
    """
    if k < 0:
        return Fraction(0)
    if k >= n:
        return Fraction(1)
    a, b = rate.numerator, rate.denominator
    c = b - a
    if a == 0:
        return Fraction(1)
    if c == 0:
        return Fraction(0)
    term = c**n
    total = term
    for i in range(k):
        term = term * (n - i) * a // ((i + 1) * c)
        total += term
    return Fraction(total, b**n)


def hypergeometric_cost(k: int, population: int, deviant: int, n: int) -> float:
    """Estimated work of :func:`hypergeometric_lower`: bits of ``C(N, n)`` times terms."""
    drawn = min(n, population - n)
    bits = drawn * max(1.0, math.log2(population / max(drawn, 1)) + 1.5) if drawn else 1.0
    terms = max(0, min(k, n, deviant) + 1)
    return bits * terms


def hypergeometric_lower(k: int, population: int, deviant: int, n: int) -> Fraction:
    """``P(X ≤ k)`` for ``X ~ Hypergeometric(N, M, n)``, exactly.

    >>> hypergeometric_lower(0, 10, 1, 9)  # the one deviant item is the one left out
    Fraction(1, 10)
    >>> hypergeometric_lower(0, 2, 1, 1)
    Fraction(1, 2)
    """
    conforming = population - deviant
    first = max(0, n - conforming)
    last = min(k, n, deviant)
    if last < first:
        return Fraction(0)
    if last >= min(n, deviant):
        return Fraction(1)
    term = math.comb(deviant, first) * math.comb(conforming, n - first)
    total = term
    for i in range(first, last):
        term = term * (deviant - i) * (n - i) // ((i + 1) * (conforming - n + i + 1))
        total += term
    return Fraction(total, math.comb(population, n))


def binomial_outside(below: int, above: int, n: int, rate: Fraction) -> Fraction:
    """``P(X ≤ below) + P(X > above)`` for ``X ~ Binomial(n, rate)``, exactly.

    >>> binomial_outside(0, 1, 1, Fraction(99, 100))  # one item at 99%: only X = 0 is outside
    Fraction(1, 100)
    """
    return binomial_lower(below, n, rate) + 1 - binomial_lower(above, n, rate)


def hypergeometric_outside(below: int, above: int, population: int, deviant: int,
                           n: int) -> Fraction:
    """``P(X ≤ below) + P(X > above)`` for ``X ~ Hypergeometric(N, M, n)``, exactly."""
    return (hypergeometric_lower(below, population, deviant, n) + 1
            - hypergeometric_lower(above, population, deviant, n))
