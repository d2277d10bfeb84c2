"""Miss probabilities of hypergeometric sampling (a population of given size, without
replacement), and their maximum over every population of that size when no rate is
anticipated; the hypergeometric probability is written as a ratio of binomial
probabilities (Loader 2000)."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
from scipy import stats

from service.sampling.estimation.binomial import _largest
from service.sampling.estimation.lattice import _floor_times
from service.sampling.estimation.limits import _TAIL_TOLERANCE, FloatArray, IntArray


def _hypergeometric_pmf(k: FloatArray, population: int, deviations: FloatArray,
                        n: FloatArray) -> FloatArray:
    """Hypergeometric probability ``C(M,k) C(N−M,n−k) / C(N,n)`` as the ratio of binomial
    probabilities ``b(k; M, t) b(n−k; N−M, t) / b(n; N, t)`` with ``t = n/N``."""
    t = n / population
    value = (stats.binom.pmf(k, deviations, t) * stats.binom.pmf(n - k, population - deviations, t)
             / stats.binom.pmf(n, population, t))
    return np.asarray(value, dtype=np.float64)


def _hypergeometric_tail(start: IntArray, population: int, deviations: IntArray,
                         n: IntArray, *, upward: bool, steps: int | None = None) -> FloatArray:
    """``P(X ≥ start)`` (``upward``) or ``P(X ≤ start)``, ``X ~ Hypergeometric(N, M, n)``.

    Sums the probabilities term by term from ``start`` outwards with the exact ratio of
    successive probabilities, until a term is negligible (below 2⁻⁶⁰ of the sum so far) and
    the terms are decreasing.  With ``steps``, stops after about that many terms: the
    partial sum is then a lower bound of the tail.
    """
    shape = np.broadcast(start, deviations, n).shape
    k = np.broadcast_to(start, shape).astype(np.float64)
    big_m = np.broadcast_to(deviations, shape).astype(np.float64)
    nf = np.broadcast_to(n, shape).astype(np.float64)
    support_low = np.maximum(0.0, nf - (population - big_m))
    support_high = np.minimum(nf, big_m)
    if upward:
        empty = k > support_high
        k = np.maximum(k, support_low)
    else:
        empty = k < support_low
        k = np.minimum(k, support_high)
    first = np.where(empty, 0.0, _hypergeometric_pmf(k, population, big_m, nf))
    result = first.copy()
    index = np.flatnonzero(first > 0.0)
    # Working copies of the unfinished sums; finished ones are dropped every few steps
    # (a finished sum only gains terms below the tolerance meanwhile).
    term, total, x = first[index], result[index], k[index]
    big_m, nf = big_m[index], nf[index]
    rest = population - big_m - nf
    step = 1.0 if upward else -1.0
    taken = 0
    while index.size and (steps is None or taken < steps):
        taken += 16
        for _ in range(16):
            if upward:
                ratio = (big_m - x) * (nf - x) / ((x + 1.0) * (rest + x + 1.0))
            else:
                ratio = x * (rest + x) / ((big_m - x + 1.0) * (nf - x + 1.0))
            np.maximum(ratio, 0.0, out=ratio)
            term *= ratio
            total += term
            x += step
        going = (term > total * _TAIL_TOLERANCE) | ((ratio >= 1.0) & (term > 0.0))
        result[index] = total
        if not going.all():
            index, term, total, x = index[going], term[going], total[going], x[going]
            big_m, nf, rest = big_m[going], nf[going], rest[going]
    return np.asarray(np.minimum(result, 1.0), dtype=np.float64)


def _hypergeometric_miss(below: IntArray, above: IntArray, population: int,
                         deviations: IntArray, n: IntArray, steps: int | None = None
                         ) -> FloatArray:
    """``P(X ≤ below) + P(X > above)``, ``X ~ Hypergeometric(N, M, n)`` (a lower bound of
    it when ``steps`` limits the terms summed)."""
    lower = _hypergeometric_tail(below, population, deviations, n, upward=False, steps=steps)
    upper = _hypergeometric_tail(above + 1, population, deviations, n, upward=True, steps=steps)
    return np.asarray(np.minimum(lower + upper, 1.0), dtype=np.float64)


def _hypergeometric_thresholds(n: IntArray | int, deviations: IntArray | int, population: int,
                               slack: IntArray | int) -> tuple[IntArray, IntArray]:
    """Hit outcomes ``a ≤ x ≤ b`` for ``|x/n − M/N| ≤ e``, i.e. ``|N x − n M| ≤ n N e``.

    With ``Q = ⌊n N e⌋`` (``slack``): ``a = ⌈(n M − Q)/N⌉`` and ``b = ⌊(n M + Q)/N⌋``; the
    fractional part of ``n N e`` never moves either bound, since ``n M`` and ``N`` are
    integers.
    """
    centre = np.asarray(n, dtype=np.int64) * np.asarray(deviations, dtype=np.int64)
    low = -((slack - centre) // population)
    high = (centre + slack) // population
    return np.asarray(low, dtype=np.int64), np.asarray(high, dtype=np.int64)


def _hypergeometric_miss_at_rate(n: IntArray, deviations: int, population: int,
                                 margin: Fraction, steps: int | None = None) -> FloatArray:
    slack = _floor_times(n, population * margin)
    low, high = _hypergeometric_thresholds(n, deviations, population, slack)
    big_m = np.full_like(n, deviations)
    return _hypergeometric_miss(low - 1, high, population, big_m, n, steps)


def _partial_steps(n: IntArray) -> int:
    """Terms summed for a quick lower bound of hypergeometric tails at sizes ``n``: about
    two standard deviations of the largest size (most of each tail's mass)."""
    return 16 + 2 * math.isqrt(int(n.max()) // 4 + 1)


def _hypergeometric_miss_at_rate_low(n: IntArray, deviations: int, population: int,
                                     margin: Fraction) -> FloatArray:
    return _hypergeometric_miss_at_rate(n, deviations, population, margin, _partial_steps(n))


def _hypergeometric_miss_at_rate_one(n: int, deviations: int, population: int,
                                     margin: Fraction) -> float:
    sizes = np.array([n], dtype=np.int64)
    return float(_hypergeometric_miss_at_rate(sizes, deviations, population, margin)[0])


def _piece_starts(n: int, population: int, slack: int, k: IntArray
                  ) -> tuple[IntArray, IntArray]:
    """Smallest ``M`` with ``a(M) ≥ k`` and smallest ``M`` with ``b(M) ≥ k``."""
    start_low = ((k - 1) * population + slack) // n + 1
    start_high = -((slack - k * population) // n)
    return start_low, start_high


def _hypergeometric_maximum(n: int, population: int, margin: Fraction) -> float:
    """``max over M = 0 … N of P(|X/n − M/N| > e)``, ``X ~ Hypergeometric(N, M, n)``.

    The hit outcomes ``a(M) … b(M)`` change only at the ``M`` where ``a`` or ``b`` steps.
    Within a run of ``M`` with the same ``a, b``, the change of ``P(a ≤ X ≤ b)`` from ``M``
    to ``M + 1`` is ``(n/N)[h(a−1) − h(b)]`` with ``h`` the ``Hypergeometric(N−1, M, n−1)``
    probability; by the monotone likelihood ratio of that family in ``M`` it changes sign
    at most once, from + to −.  So the miss probability falls then rises along the run, and
    its largest value is at the first or last ``M`` of a run: only those are evaluated.
    """
    slack = math.floor(n * population * margin)
    k = np.arange(0, n + 2, dtype=np.int64)
    start_low, start_high = _piece_starts(n, population, slack, k)
    starts = np.concatenate([start_low, start_high])
    candidates = np.concatenate([starts, starts - 1, np.array([0, population], dtype=np.int64)])
    deviations = np.unique(np.clip(candidates, 0, population)).astype(np.int64)
    low, high = _hypergeometric_thresholds(n, deviations, population, slack)
    sizes = np.full_like(deviations, n)

    def evaluate(index: IntArray) -> FloatArray:
        return _hypergeometric_miss(low[index] - 1, high[index], population,
                                    deviations[index], sizes[index])

    def block_bound(first: IntArray, last: IntArray) -> FloatArray:
        # a(M), b(M) grow with M; P(X ≤ k) falls and P(X > k) grows with M (more
        # deviations in the population shift the count up): bound at the block's corners.
        lower = _hypergeometric_tail(low[last] - 1, population, deviations[first],
                                     sizes[first], upward=False)
        upper = _hypergeometric_tail(high[first] + 1, population, deviations[last],
                                     sizes[last], upward=True)
        return np.asarray(lower + upper, dtype=np.float64)

    middle = int(np.searchsorted(deviations, population // 2))
    seeds = np.unique(np.clip(np.arange(middle - 3, middle + 4), 0, deviations.size - 1))
    return _largest(int(deviations.size), seeds.astype(np.int64), evaluate, block_bound)


def _hypergeometric_maximum_low(n: IntArray, population: int, margin: Fraction) -> FloatArray:
    """A lower bound of :func:`_hypergeometric_maximum` for each ``n``: the largest miss
    probability over four populations next to ``⌊N/2⌋`` deviations, those where the hits
    have just lost their lowest outcome (``M`` where ``a`` steps up) or are about to gain a
    highest one (the ``M`` before ``b`` steps up).  These have the fewest hit outcomes,
    like the one-sided limits of the binomial case.  The tails are partial sums, which
    only lowers the bound."""
    slack = _floor_times(n, population * margin)
    low, high = _hypergeometric_thresholds(n, population // 2, population, slack)
    candidates = (
        ((low - 1) * population + slack) // n + 1,  # smallest M with a(M) ≥ a(N/2)
        (low * population + slack) // n + 1,  # smallest M with a(M) ≥ a(N/2) + 1
        -((slack - high * population) // n) - 1,  # largest M with b(M) < b(N/2)
        -((slack - (high + 1) * population) // n) - 1,  # largest M with b(M) ≤ b(N/2)
    )
    steps = _partial_steps(n)
    best = np.zeros(n.shape, dtype=np.float64)
    for deviations in candidates:
        big_m = np.clip(deviations, 0, population).astype(np.int64)
        a, b = _hypergeometric_thresholds(n, big_m, population, slack)
        best = np.maximum(best, _hypergeometric_miss(a - 1, b, population, big_m, n, steps))
    return best


def _hypergeometric_work(n: int, population: int, candidates: int) -> float:
    """Rough count of summed terms for exact hypergeometric tails of ``candidates``
    populations at size ``n`` (about eight standard deviations per tail)."""
    spread = math.sqrt(n * 0.25 * max(population - n, 0) / max(population - 1, 1))
    return candidates * (16.0 * spread + 20.0)


def _hypergeometric_search_work(last: int, population: int, worst_case: bool) -> float:
    """Rough count of summed terms for the exact search up to size ``last``: partial sums
    (two standard deviations per tail) for every size, plus full sums at the last size
    (for the worst case, over a quarter of the candidate populations)."""
    spread = math.sqrt(last * 0.25)
    per_size = (4 if worst_case else 1) * (4.0 * spread + 32.0)
    full = _hypergeometric_work(last, population, last + 1 if worst_case else 1)
    return last * per_size + full
