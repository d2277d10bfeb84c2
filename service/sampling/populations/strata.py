"""Amount strata by the cumulative square root of frequency rule.

Dalenius and Hodges (1959) choose stratum boundaries for a skewed variable so that the
strata have near-equal shares of the cumulative square root of frequency: the range of
the amounts is cut into many classes of equal width, the square root of each class's
frequency is accumulated, and the boundary of stratum h (h = 1 .. L - 1) is the class
edge whose cumulative value is nearest to h/L of the total (Cochran 1977, §5A.7). Two
targets that fall on the same edge give one boundary, and a boundary that would leave a
stratum empty is dropped, so fewer strata than asked may result; nearest ties go to the
lower edge.

References
----------
.. [1] T. Dalenius and J. L. Hodges, "Minimum variance stratification", *Journal of the
   American Statistical Association* 54(285), 88-101, 1959.
.. [2] W. G. Cochran, *Sampling Techniques*, 3rd ed., Wiley, 1977, section 5A.7.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from decimal import ROUND_CEILING, Decimal
from fractions import Fraction
from itertools import accumulate
from typing import Final

from service.sampling.errors import InvalidInput

CLASSES: Final = 100
"""Equal-width classes the amounts are counted in (common practice: many more classes
than strata; Cochran's examples use about ten per stratum or more)."""


def cumulative_root_boundaries(counts: Sequence[int], strata: int) -> tuple[int, ...]:
    """The class edges that end each stratum but the last, by the cum sqrt(f) rule.

    Parameters
    ----------
    counts : sequence of int
        Frequencies of consecutive equal-width classes.
    strata : int
        Number of strata L asked for, at least 2.

    Returns
    -------
    tuple of int
        For each boundary, the number of classes below it (an edge j lies between class
        j - 1 and class j, 0-based), ascending and distinct; at most L - 1 of them.

    Examples
    --------
    The square roots of 16, 9, 4, 1, 1, 4, 9, 16 accumulate to 4, 7, 9, 10, 11, 13, 16,
    20; halves of 20 fall at 10, after the fourth class:

    >>> cumulative_root_boundaries([16, 9, 4, 1, 1, 4, 9, 16], 2)
    (4,)
    """
    if strata < 2:
        raise InvalidInput("strata", f"strata must be at least 2, got {strata}")
    cumulative = list(accumulate(math.sqrt(f) for f in counts))
    total = cumulative[-1] if cumulative else 0.0
    edges: list[int] = []
    for h in range(1, strata):
        target = total * h / strata
        nearest = min(range(len(cumulative) - 1), key=lambda j: abs(cumulative[j] - target),
                      default=None)
        if nearest is None:
            break
        edge = nearest + 1
        previous = edges[-1] if edges else 0
        if edge > previous and sum(counts[previous:edge]) > 0:
            edges.append(edge)
    if edges and sum(counts[edges[-1] :]) == 0:
        edges.pop()
    return tuple(edges)


def class_edge(low: Decimal, high: Decimal, classes: int, edge: int, places: int) -> Decimal:
    """Edge ``edge`` of ``classes`` equal classes over [low, high], as an amount bound.

    The exact edge is low + edge × (high − low) / classes; it is rounded up to ``places``
    decimal places, which keeps "amount below the edge" true for the same amounts of that
    many places.
    """
    exact = Fraction(low) + Fraction(edge) * (Fraction(high) - Fraction(low)) / classes
    quantum = Decimal(1).scaleb(-places)
    up = (Decimal(exact.numerator) / Decimal(exact.denominator)).quantize(
        quantum, rounding=ROUND_CEILING
    )
    # Decimal division rounds at 28 digits; step up one quantum if that fell below.
    return up if Fraction(up) >= exact else up + quantum
