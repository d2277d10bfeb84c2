"""Exact integer arithmetic of the miss condition ``|x - n p| > n e``: which outcomes are
misses, decided without rounding."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np

from service.sampling.estimation.limits import IntArray


def _floor_times(m: IntArray, q: Fraction) -> IntArray:
    """``floor(m·q)`` element by element, exactly, for integers ``m`` and rational ``q``.

    A float product decides every element whose fractional part is clearly away from an
    integer; the others (and any product too large for exact floats) are redone in
    integer arithmetic.
    """
    approx = m.astype(np.float64) * float(q)
    floor = np.floor(approx)
    frac = approx - floor
    slack = np.abs(approx) * 1e-15 + 1e-300
    doubtful = (frac <= slack) | (1.0 - frac <= slack) | (np.abs(approx) >= 2.0**52)
    result = floor.astype(np.int64)
    if doubtful.any():
        numerator, denominator = q.numerator, q.denominator
        index = np.flatnonzero(doubtful)
        result[index] = [(value * numerator) // denominator for value in m[index].tolist()]
    return result


def _ceil_times(m: IntArray, q: Fraction) -> IntArray:
    """``ceil(m·q)`` exactly."""
    return -_floor_times(m, -q)


def _population_deviations(population: int, rate: Fraction) -> int:
    """Number of deviations ``M`` in a population of ``N`` items at the anticipated rate.

    ``M`` is ``N·p`` rounded up, as the deviant count of attribute sampling
    (``ceil(t × N)``), then kept within ``1 … N − 1`` (a rate strictly between 0 and 1
    means at least one deviation and at least one conforming item) when ``N ≥ 2``.  The
    population rate is then ``M/N``, and the miss is measured from it.
    """
    deviations = math.ceil(population * rate)
    if population >= 2:
        deviations = min(max(deviations, 1), population - 1)
    return deviations
