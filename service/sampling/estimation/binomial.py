"""Miss probabilities of binomial sampling (with replacement, or an unlimited population),
and their supremum over every rate when none is anticipated."""

from __future__ import annotations

import math
from collections.abc import Callable
from fractions import Fraction

import numpy as np
import numpy.typing as npt
from scipy import stats

from service.sampling.estimation.lattice import _ceil_times, _floor_times
from service.sampling.estimation.limits import _DIRECT, FloatArray, IntArray


def _binomial_miss(n: npt.ArrayLike, below: npt.ArrayLike, above: npt.ArrayLike,
                   p: npt.ArrayLike) -> FloatArray:
    """``P(X ≤ below) + P(X > above)`` for ``X ~ Bin(n, p)``."""
    lower = stats.binom.cdf(below, n, p)
    upper = stats.binom.sf(above, n, p)
    return np.asarray(lower + upper, dtype=np.float64)


def _largest(count: int, seeds: IntArray, evaluate: Callable[[IntArray], FloatArray],
             block_bound: Callable[[IntArray, IntArray], FloatArray]) -> float:
    """Largest value over candidates ``0 … count−1``, by branch and bound.

    ``evaluate(i)`` gives the exact values of the candidates ``i``; ``block_bound(s, t)``
    gives, for each block of consecutive candidates ``s[j] … t[j]``, a number at least as
    large as every value in the block.  Blocks whose bound does not exceed the best value
    found so far are dropped; the others are halved until they are single candidates,
    which are evaluated.  The result is the exact maximum.
    """
    if count <= _DIRECT:
        return float(np.max(evaluate(np.arange(count, dtype=np.int64))))
    best = float(np.max(evaluate(seeds)))
    edges = np.unique(np.linspace(0, count, min(count, 64) + 1).astype(np.int64))
    starts, stops = edges[:-1], edges[1:] - 1
    while starts.size:
        single = starts == stops
        if single.any():
            best = max(best, float(np.max(evaluate(starts[single]))))
            starts, stops = starts[~single], stops[~single]
            if not starts.size:
                break
        keep = block_bound(starts, stops) > best
        starts, stops = starts[keep], stops[keep]
        middle = (starts + stops) // 2
        starts, stops = np.concatenate([starts, middle + 1]), np.concatenate([middle, stops])
    return best


def _binomial_thresholds(n: IntArray, rate: Fraction, margin: Fraction
                         ) -> tuple[IntArray, IntArray]:
    """Outcomes ``x`` with ``low ≤ x ≤ high`` are hits: ``|x − n p| ≤ n e``."""
    low = _ceil_times(n, rate - margin)
    high = _floor_times(n, rate + margin)
    return low, high


def _binomial_miss_at_rate(n: IntArray, rate: Fraction, margin: Fraction) -> FloatArray:
    low, high = _binomial_thresholds(n, rate, margin)
    return _binomial_miss(n, low - 1, high, float(rate))


def _binomial_supremum(n: int, margin: Fraction) -> float:
    """``sup over 0 < p < 1 of P(|X − n p| > n e)``, ``X ~ Bin(n, p)``.

    The set of hit outcomes changes only where ``p = x/n ± e``.  Between two such
    breakpoints the miss probability is ``1 − P(a ≤ X ≤ b)`` for fixed ``a, b``.  The
    derivative of ``P(a ≤ X ≤ b)`` in ``p`` is ``n[b(a−1; n−1, p) − b(b; n−1, p)]``
    (``b(·; n−1, p)`` the binomial probability), and the ratio of its two terms is
    increasing in ``p``, so it changes sign at most once, from + to −.  The miss
    probability therefore falls then rises across the piece, and its supremum over the
    piece is a limit at one of its ends (not attained: at the breakpoint itself the
    boundary outcome is a hit).  By the symmetry ``p ↔ 1 − p`` it is enough to
    take both one-sided limits at the breakpoints ``p = x/n + e``: just above, outcome
    ``x`` has become a miss and the hits are ``x+1 … x+⌊2ne⌋``; just below (which differs
    only when ``2ne`` is an integer), the hits are ``x … x+2ne−1``.
    """
    two_ne = 2 * n * margin
    width = math.floor(two_ne)
    both = two_ne.denominator == 1
    largest_x = math.ceil(n * (1 - margin)) - 1
    e = float(margin)

    def rate(x: IntArray) -> FloatArray:
        return np.asarray(np.minimum(x / n + e, np.nextafter(1.0, 0.0)), dtype=np.float64)

    def evaluate(x: IntArray) -> FloatArray:
        p = rate(x)
        value = _binomial_miss(n, x, x + width, p)
        if both:
            value = np.maximum(value, _binomial_miss(n, x - 1, x + width - 1, p))
        return value

    def block_bound(first: IntArray, last: IntArray) -> FloatArray:
        # For first ≤ x ≤ last: P(X ≤ x) grows with x and falls as p grows, P(X > x + w)
        # falls with x and grows with p; so each tail is largest at a corner of the block.
        lower = stats.binom.cdf(last, n, rate(first))
        upper = stats.binom.sf(first + width - (1 if both else 0), n, rate(last))
        return np.asarray(lower + upper, dtype=np.float64)

    middle = min(max(math.floor(n * (Fraction(1, 2) - margin)), 0), largest_x)
    seeds = np.unique(np.clip(np.arange(middle - 2, middle + 3), 0, largest_x)).astype(np.int64)
    return _largest(largest_x + 1, seeds, evaluate, block_bound)


def _binomial_supremum_low(n: IntArray, margin: Fraction) -> FloatArray:
    """A lower bound of :func:`_binomial_supremum` for each ``n``: the one-sided limit at
    the breakpoint ``p = x/n + e`` with ``x = ⌊n(1/2 − e)⌋``, next to the rate 1/2."""
    x = _floor_times(n, Fraction(1, 2) - margin)
    width_floor = _floor_times(n, 2 * margin)
    p = x / n + float(margin)
    return _binomial_miss(n, x, x + width_floor, p)
