"""Sample sizes for estimating a rate within a margin.

An auditor who wants to *estimate* a deviation rate (rather than test it against a
tolerable rate) asks: how many items must be drawn so that the sample rate lands within
``margin`` of the true rate with probability at least ``confidence``?  This module answers
with several methods side by side, each labelled with the kind of guarantee it gives:

``exact``
    The smallest sample size from which on the exact probability that the sample rate
    misses the rate by more than the margin is at most ``1 - confidence`` at every larger
    size too (see :func:`_size_exact` for this lattice rule).  Binomial sampling (with
    replacement, or an unlimited population); hypergeometric when a population size is
    given.  With no anticipated rate, the miss probability is its supremum over all
    rates (binomial) or its maximum over all populations of the given size
    (hypergeometric).
    Guarantee: ``"exact"``.
``wilson``
    The smallest size whose Wilson score interval (Wilson 1927) has half-width at most the
    margin.  Guarantee: ``"approximate"``.
``normal``
    The textbook (Wald) size ``z² p(1−p)/e²`` with Cochran's finite population correction
    (Cochran 1977, §4.4).  Guarantee: ``"approximate"``.
``chebyshev``
    The size at which Chebyshev's inequality bounds the miss probability by
    ``1 - confidence``.  Guarantee: ``"distribution_free_bound"``.
``hoeffding``
    The size at which Hoeffding's inequality (Hoeffding 1963) bounds the miss probability
    by ``1 - confidence``.  Guarantee: ``"distribution_free_bound"``.

Definitions
-----------
For a sample of ``n`` items with ``X`` deviations, the sample rate is ``X/n``.  Given the
rate ``p`` and the margin ``e``, the *miss probability* is ``P(|X/n − p| > e)``, the chance
that the sample rate falls strictly outside ``[p − e, p + e]``.  The planning condition is
``miss probability ≤ α`` with ``α = 1 − confidence``.

Exactness
---------
Margins, confidences and rates are turned into fractions from the shortest decimal form of
the float given (``Fraction(repr(x))``), so ``0.05`` is exactly ``1/20``.  Closed-form sizes
are computed in rational arithmetic and rounded up once, so ``1/(4·0.05·0.05²)`` gives
2,000 and not 2,001 (the irrational factors ``z`` and ``ln(2/α)`` enter as the exact value
of their double-precision approximation).  Which outcomes count as misses is decided in
exact integer
arithmetic (``|x − n p| > n e``); the probabilities themselves are floats (full double
precision), and a comparison with ``α`` within the error band of
:mod:`service.sampling.ties` is redone on exact fractions.

References
----------
.. [1] Chebyshev's inequality ``P(|Y − E Y| ≥ k) ≤ Var(Y)/k²`` (I.-J. Bienaymé 1853,
       P. L. Chebyshev 1867), in any probability text.
.. [2] W. Hoeffding, "Probability inequalities for sums of bounded random variables",
       Journal of the American Statistical Association 58 (1963) 13–30.
.. [3] E. B. Wilson, "Probable inference, the law of succession, and statistical
       inference", Journal of the American Statistical Association 22 (1927) 209–212.
.. [4] W. G. Cochran, *Sampling Techniques*, 3rd ed., Wiley (1977), §4.4.
.. [5] C. Loader, "Fast and accurate computation of binomial probabilities" (2000), for
       writing the hypergeometric probability as a ratio of binomial probabilities.

Examples
--------
>>> plan = size_for_estimation(0.05, 0.95, methods=["chebyshev", "hoeffding", "normal"])
>>> [(row.method, row.sample_size) for row in plan.rows]
[('chebyshev', 2000), ('hoeffding', 738), ('normal', 385)]
>>> plan.recommended
'hoeffding'
>>> size_for_estimation(0.05, 0.95, population_size=4200, methods=["normal"]).rows[0].sample_size
353
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from fractions import Fraction
from functools import partial
from typing import Literal, NamedTuple

import numpy as np
import numpy.typing as npt
from scipy import stats

from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.rates import WrittenDecimal, exact_rate
from service.sampling.ties import exact_tails
from service.sampling.ties.band import RELATIVE_BAND, near

__all__ = [
    "EXACT_SIZE_LIMIT",
    "MAX_CONFIDENCE",
    "MAX_POPULATION_SIZE",
    "METHODS",
    "MIN_CONFIDENCE",
    "MIN_MARGIN",
    "EstimationPlan",
    "EstimationRow",
    "Guarantee",
    "exact_miss_probability",
    "size_for_estimation",
]

Guarantee = Literal["exact", "approximate", "distribution_free_bound"]

IntArray = npt.NDArray[np.int64]
FloatArray = npt.NDArray[np.float64]

#: Largest sample size for which exact miss probabilities are computed (the exact method
#: raises :class:`ComputationTooLarge` above it; other rows then report no miss probability).
EXACT_SIZE_LIMIT = 400_000

#: Smallest margin accepted: a hundredth of a percentage point.  Smaller margins need
#: more items than any sample could hold, and push the size formulas below the floating
#: point range.
MIN_MARGIN = 0.0001

#: Confidence levels accepted: from an even chance to one miss in a million.
MIN_CONFIDENCE = 0.5
MAX_CONFIDENCE = 0.999999

#: Largest population size accepted (keeps the exact integer thresholds within 64 bits).
MAX_POPULATION_SIZE = 10**11

#: Work limit for exact hypergeometric computations, in (candidate × summed term) units;
#: about a second of computation.
_HYPERGEOMETRIC_WORK_LIMIT = 100_000_000

#: Relative size below which a further term of a hypergeometric tail sum is dropped.
_TAIL_TOLERANCE = 2.0**-60

_FIRST_CHUNK = 256
_LARGEST_CHUNK = 65_536
_DIRECT = 2048


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class EstimationRow:
    """One method's answer.

    Attributes
    ----------
    method : str
        Method name (``exact``, ``wilson``, ``normal``, ``chebyshev``, ``hoeffding``).
    sample_size : int
        Sample size the method asks for, never more than the population size.
    guarantee : {"exact", "approximate", "distribution_free_bound"}
        What the size guarantees about the miss probability.
    miss_probability : float or None
        Exact miss probability ``P(|X/n − p| > e)`` at ``sample_size`` (binomial, or
        hypergeometric when a population size is given); with no anticipated rate, the
        supremum over all rates.  ``None`` when the computation is too large.
    ratio_to_exact : float or None
        ``sample_size`` divided by the exact method's size, when the exact method was run.
    finite_population_correction : bool
        Whether the method's finite-population form was used.
    """

    method: str
    sample_size: int
    guarantee: Guarantee
    miss_probability: float | None
    ratio_to_exact: float | None
    finite_population_correction: bool


@dataclass(frozen=True)
class EstimationPlan:
    """Sample sizes from several methods for one estimation goal.

    Attributes
    ----------
    margin, confidence : float
        The requested margin ``e`` and confidence ``c``.
    anticipated_rate : float or None
        The anticipated rate, or ``None`` for the worst case over all rates.
    population_size : int or None
        The population size, or ``None`` for an unlimited population.
    rows : tuple of EstimationRow
        One row per method, in the order requested.
    recommended : str
        The method with the smallest size among those whose guarantee is ``exact`` or
        ``distribution_free_bound`` (the first such row on a tie); when only approximate
        methods were requested, the smallest of those.
    """

    margin: float
    confidence: float
    anticipated_rate: float | None
    population_size: int | None
    rows: tuple[EstimationRow, ...]
    recommended: str


# --------------------------------------------------------------------------- inputs


@dataclass(frozen=True)
class _Problem:
    margin: Fraction
    alpha: Fraction
    rate: Fraction | None
    population: int | None
    max_sample_size: int

    @property
    def alpha_float(self) -> float:
        return float(self.alpha)

    @property
    def variance_factor(self) -> Fraction:
        """``p(1 − p)`` at the anticipated rate, or its largest value 1/4."""
        if self.rate is None:
            return Fraction(1, 4)
        return self.rate * (1 - self.rate)

    @property
    def population_variance_factor(self) -> Fraction:
        """``p(1 − p)`` of the population the miss is measured from: ``M/N`` when a
        population and a rate are given (see :func:`_population_deviations`)."""
        if self.rate is None or self.population is None:
            return self.variance_factor
        share = Fraction(_population_deviations(self.population, self.rate), self.population)
        return share * (1 - share)

    @property
    def z(self) -> float:
        """Two-sided standard normal quantile ``Φ⁻¹(1 − α/2)``."""
        return float(stats.norm.ppf(1.0 - self.alpha_float / 2.0))


class _Sized(NamedTuple):
    sample_size: int
    finite_population_correction: bool
    miss_probability: float | None = None


def _real(value: object, field: str) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise InvalidInput(field, f"must be a number; got {value!r}")
    number = float(value)
    if not math.isfinite(number):
        raise InvalidInput(field, f"must be a finite number; got {value!r}")
    return number


def _exact(number: float) -> Fraction:
    """The rational number written by the shortest decimal form of ``number``."""
    return Fraction(repr(number))


def _open_unit(value: object, field: str, upper: float = 1.0) -> Fraction:
    number = _real(value, field)
    exact = exact_rate(value) if isinstance(value, WrittenDecimal) else _exact(number)
    if not 0 < exact < _exact(upper):
        raise InvalidInput(
            field, f"must be greater than 0 and less than {upper:g}; got {number!r}"
        )
    return exact


def _population(value: object) -> int | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int):
        raise InvalidInput("population.size", f"must be a whole number; got {value!r}")
    if value < 1:
        raise InvalidInput("population.size", f"must be at least 1; got {value}")
    if value > MAX_POPULATION_SIZE:
        raise ComputationTooLarge(
            "population.size",
            f"{value:,} is above the largest supported population, {MAX_POPULATION_SIZE:,}",
        )
    return value


def _sample_size(value: object, population: int | None) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise InvalidInput("sample_size", f"must be a whole number; got {value!r}")
    if value < 1:
        raise InvalidInput("sample_size", f"must be at least 1; got {value}")
    if population is not None and value > population:
        raise InvalidInput(
            "sample_size", f"{value} is above the population size {population}"
        )
    return value


# ------------------------------------------------------------------------ exact integer arithmetic


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


# --------------------------------------------------------------------------- binomial


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


# --------------------------------------------------------------------------- hypergeometric


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


# --------------------------------------------------------------------------- exact miss probability


def _miss(n: int, rate: Fraction | None, margin: Fraction, population: int | None) -> float:
    sizes = np.array([n], dtype=np.int64)
    if population is None:
        if rate is None:
            return _binomial_supremum(n, margin)
        return float(_binomial_miss_at_rate(sizes, rate, margin)[0])
    if rate is None:
        return _hypergeometric_maximum(n, population, margin)
    deviations = _population_deviations(population, rate)
    return float(_hypergeometric_miss_at_rate(sizes, deviations, population, margin)[0])


def _miss_feasible(n: int, rate: Fraction | None, population: int | None) -> bool:
    if n > EXACT_SIZE_LIMIT:
        return False
    if population is None:
        return True
    candidates = 1 if rate is not None else 4 * n + 2
    return _hypergeometric_work(n, population, candidates) <= _HYPERGEOMETRIC_WORK_LIMIT


def exact_miss_probability(n: int, p: float | None, e: float,
                           population_size: int | None = None) -> float:
    """Exact probability that the sample rate misses the rate by more than the margin.

    Parameters
    ----------
    n : int
        Sample size, at least 1 (and at most the population size).
    p : float or None
        The rate, ``0 < p < 1``; ``None`` for the worst case: the supremum over all rates
        ``0 < p < 1`` (binomial; not attained, it is the limit at a breakpoint) or the
        maximum over all populations of ``N`` items (hypergeometric).
    e : float
        Margin, ``0 < e < 0.5``.
    population_size : int or None
        Population size ``N``; given, the sample is drawn without replacement and the
        population holds ``M`` deviations, ``N·p`` rounded to the nearest integer (halves
        up) and kept within ``1 … N − 1``; the miss is then measured from ``M/N``.

    Returns
    -------
    float
        ``P(|X/n − p| > e)`` with ``X ~ Bin(n, p)``, or ``P(|X/n − M/N| > e)`` with
        ``X ~ Hypergeometric(N, M, n)``.

    Raises
    ------
    InvalidInput
        For an input outside its domain (fields ``sample_size``, ``anticipated_rate``,
        ``margin``, ``population.size``).
    ComputationTooLarge
        When the exact computation is above this module's limits.

    Examples
    --------
    >>> round(exact_miss_probability(10, 0.5, 0.2), 6)  # P(X ≤ 2) + P(X ≥ 8), X ~ Bin(10, 1/2)
    0.109375
    """
    margin = _open_unit(e, "margin", 0.5)
    rate = None if p is None else _open_unit(p, "anticipated_rate")
    population = _population(population_size)
    size = _sample_size(n, population)
    if not _miss_feasible(size, rate, population):
        raise ComputationTooLarge(
            "sample_size", f"an exact miss probability at {size:,} items is above the limits"
        )
    return _miss(size, rate, margin, population)


# --------------------------------------------------------------------------- the methods


def _ceil_positive(value: Fraction) -> int:
    return max(1, math.ceil(value))


def _cap(size: int, problem: _Problem) -> int:
    """A sample cannot be larger than the population (a census)."""
    if problem.population is not None:
        return min(size, problem.population)
    return size


def _exact_miss_at_rate(size: int, rate: Fraction, margin: Fraction,
                        population: int | None) -> Fraction | None:
    """The miss probability at one size as an exact fraction, or None above the work limit."""
    sizes = np.array([size], dtype=np.int64)
    if population is None:
        low, high = _binomial_thresholds(sizes, rate, margin)
        if exact_tails.binomial_cost(size, size, rate) > exact_tails.WORK_LIMIT:
            return None
        return exact_tails.binomial_outside(int(low[0]) - 1, int(high[0]), size, rate)
    deviations = _population_deviations(population, rate)
    slack = _floor_times(sizes, population * margin)
    low, high = _hypergeometric_thresholds(sizes, deviations, population, slack)
    if exact_tails.hypergeometric_cost(size, population, deviations, size) > exact_tails.WORK_LIMIT:
        return None
    return exact_tails.hypergeometric_outside(int(low[0]) - 1, int(high[0]), population,
                                              deviations, size)


def _within(size: int, miss: float, alpha: Fraction,
            exact_miss: Callable[[int], Fraction | None] | None) -> tuple[bool, float]:
    """``miss ≤ α`` for the miss at ``size``, decided exactly when ``miss`` is within the
    error band of ``α`` (:mod:`service.sampling.ties`); the miss reported beside it is
    then the exact one, rounded once."""
    if exact_miss is not None and near(miss, float(alpha)):
        exact = exact_miss(size)
        if exact is not None:
            return exact <= alpha, float(exact)
    return miss <= float(alpha), miss


def _search_stable(last: int, alpha: Fraction, low: Callable[[IntArray], FloatArray],
                   value: Callable[[int], float] | None,
                   exact_miss: Callable[[int], Fraction | None] | None
                   ) -> tuple[int, float] | None:
    """Smallest ``n`` in ``1 … last`` such that every size from ``n`` to ``last`` meets the
    condition (the caller guarantees every size above ``last`` does).

    ``low(ns)`` gives, for each size, the exact miss probability (``value`` is ``None``)
    or a lower bound of it (``value(n)`` then gives the exact value).  Every size up to
    ``last`` is visited in chunks; a size whose ``low`` is above ``α`` fails and restarts
    the search after it.  With ``value`` given, the sizes above the answer are checked on
    the lower bound only.
    """
    risk = float(alpha)
    found: tuple[int, float] | None = None
    start, chunk = 1, _FIRST_CHUNK
    while start <= last:
        stop = min(last, start + chunk - 1)
        sizes = np.arange(start, stop + 1, dtype=np.int64)
        lows = low(sizes)
        fails = lows > risk
        if value is None:
            doubtful = np.abs(lows - risk) <= RELATIVE_BAND * np.maximum(lows, risk)
            for at in np.flatnonzero(doubtful).tolist():
                fails[at] = not _within(int(sizes[at]), float(lows[at]), alpha, exact_miss)[0]
        failing = np.flatnonzero(fails)
        first = 0
        if failing.size:
            found = None
            first = int(failing[-1]) + 1
        if found is None:
            for index in range(first, sizes.size):
                size = int(sizes[index])
                double = float(lows[index]) if value is None else value(size)
                holds, miss = _within(size, double, alpha, exact_miss)
                if holds:
                    found = (size, miss)
                    break
        start, chunk = stop + 1, min(2 * chunk, _LARGEST_CHUNK)
    return found


def _size_exact(problem: _Problem) -> _Sized:
    """Exact size: the smallest ``n ≥ 1`` such that every size ``n' ≥ n`` has miss
    probability ``≤ α``.

    Lattice effect: the miss probability is not monotone in ``n`` (the count of hit
    outcomes ``⌊n(p+e)⌋ − ⌈n(p−e)⌉ + 1`` grows in steps), so a size a little above the
    smallest passing one can fail the condition again (margin 0.02, 99%, anticipated
    0.995: ``n = 1`` and ``2`` pass, ``n = 3`` fails).  A plan that stops holding when one
    more item is tested is no plan, so the answer is the smallest size from which the
    condition holds for good.  Every size at or above the Chebyshev and Hoeffding sizes
    (``last``, at most ``N``, where the census has no miss) is certain to meet it, so the
    sizes from 1 to ``last`` are all checked.  With an anticipated rate the check is exact
    at every size, and comparisons within the error band of ``α`` are made in rational
    arithmetic (:mod:`service.sampling.ties`).  With no anticipated rate the worst case
    is computed for the candidate answers, and the sizes above the answer are checked
    at a rate next to 1/2 (a lower bound of the worst case), which shows every failure
    the lattice effect causes at that rate.

    Limits: the exact method is not run (``ComputationTooLarge``) when the normal
    approximation already asks for more than :data:`EXACT_SIZE_LIMIT` items, or when
    sampling without replacement would need more than a few seconds of exact tail sums.
    """
    margin, rate, population = problem.margin, problem.rate, problem.population
    hoeffding = _size_hoeffding(problem).sample_size
    chebyshev = _size_chebyshev(problem).sample_size
    last = min(hoeffding, chebyshev, problem.max_sample_size, EXACT_SIZE_LIMIT)
    low: Callable[[IntArray], FloatArray]
    value: Callable[[int], float] | None = None
    if population is None:
        if rate is None:
            low = partial(_binomial_supremum_low, margin=margin)
            value = partial(_binomial_supremum, margin=margin)
        else:
            low = partial(_binomial_miss_at_rate, rate=rate, margin=margin)
    else:
        total = population
        last = min(last, total)
        probable = min(last, math.ceil(1.25 * _size_normal(problem).sample_size))
        if rate is None:
            low = partial(_hypergeometric_maximum_low, population=total, margin=margin)
            value = partial(_hypergeometric_maximum, population=total, margin=margin)
            work = _hypergeometric_search_work(probable, total, worst_case=True)
        else:
            deviations = _population_deviations(total, rate)
            low = partial(_hypergeometric_miss_at_rate, deviations=deviations,
                          population=total, margin=margin)
            work = _hypergeometric_search_work(probable, total, worst_case=False)
        if work > _HYPERGEOMETRIC_WORK_LIMIT:
            raise ComputationTooLarge(
                "margin",
                f"exact sizing without replacement near {probable:,} items is above the "
                "limits of the exact computation; leave 'exact' out of methods",
            )
    if _size_normal(problem).sample_size > EXACT_SIZE_LIMIT:
        raise ComputationTooLarge(
            "margin",
            f"the normal approximation already asks for {_size_normal(problem).sample_size:,} "
            f"items, above {EXACT_SIZE_LIMIT:,}, the limit of the exact computation; leave "
            "'exact' out of methods or widen the margin",
        )
    exact_miss = None if rate is None else partial(
        _exact_miss_at_rate, rate=rate, margin=margin, population=population)
    found = _search_stable(last, problem.alpha, low, value, exact_miss)
    if found is None:
        limit = min(problem.max_sample_size, EXACT_SIZE_LIMIT)
        raise ComputationTooLarge(
            "margin",
            f"the exact size is above {limit:,} items, the limit of the exact computation; "
            "leave 'exact' out of methods or widen the margin",
        )
    size, miss = found
    return _Sized(size, population is not None, miss)


def _wilson_half_width(n: int, rate: float, z: float) -> float:
    """Half-width of the Wilson score interval at sample rate ``rate`` (Wilson 1927)."""
    z2 = z * z
    return z * math.sqrt(rate * (1.0 - rate) / n + z2 / (4.0 * n * n)) / (1.0 + z2 / n)


def _size_wilson(problem: _Problem) -> _Sized:
    """Smallest ``n`` whose Wilson interval half-width at the anticipated rate (1/2 if none,
    where the half-width is largest) is at most ``e``.

    The half-width ``z √(p(1−p) n + z²/4) / (n + z²)`` decreases in ``n`` (its square has
    derivative of the sign of ``p(1−p)z² − p(1−p)n − z²/2 < 0``), so the smallest ``n`` is
    found from the root of ``e²u² − z²p(1−p)u − z⁴(1/4 − p(1−p)) = 0`` with ``u = n + z²``,
    then confirmed in floating point.
    """
    z = problem.z
    rate = 0.5 if problem.rate is None else float(problem.rate)
    e = float(problem.margin)
    pq = rate * (1.0 - rate)
    z2 = z * z
    # The half-width falls as n grows: if the largest admissible size is still too wide,
    # the answer is a census or over the limit.
    largest = problem.max_sample_size
    if problem.population is not None:
        largest = min(largest, problem.population)
    if _wilson_half_width(largest, rate, z) > e:
        if problem.population is not None and problem.population <= problem.max_sample_size:
            return _Sized(problem.population, False)
        raise ComputationTooLarge(
            "margin",
            f"method 'wilson' needs more items than the limit of {problem.max_sample_size:,}",
        )
    denominator = 2.0 * e * e
    if denominator == 0.0:
        # e² is below the smallest float (so z is nearly 0 as well): bisect on the
        # decreasing half-width between 1 and the largest admissible size instead.
        low, high = 1, largest
        while low < high:
            middle = (low + high) // 2
            if _wilson_half_width(middle, rate, z) <= e:
                high = middle
            else:
                low = middle + 1
        return _Sized(_cap(low, problem), False)
    root = (z2 * pq + math.sqrt((z2 * pq) ** 2 + 2.0 * denominator * z2 * z2 * (0.25 - pq))) / (
        denominator
    )
    size = max(1, math.ceil(root - z2)) if math.isfinite(root) else largest
    while size > 1 and _wilson_half_width(size - 1, rate, z) <= e:
        size -= 1
    while _wilson_half_width(size, rate, z) > e:
        size += 1
    return _Sized(_cap(size, problem), False)


def _size_normal(problem: _Problem) -> _Sized:
    """Wald size ``n₀ = z² p(1−p)/e²`` and, with ``N``, Cochran's ``n₀/(1 + (n₀ − 1)/N)``
    computed from the unrounded ``n₀``; rounded up once at the end."""
    n0 = Fraction(problem.z) ** 2 * problem.variance_factor / problem.margin**2
    if problem.population is None:
        return _Sized(_ceil_positive(n0), False)
    corrected = n0 / (1 + (n0 - 1) / problem.population)
    return _Sized(_cap(_ceil_positive(corrected), problem), True)


def _size_chebyshev(problem: _Problem) -> _Sized:
    """Chebyshev: ``P(|X/n − p| ≥ e) ≤ Var(X/n)/e² ≤ α``.

    ``Var = p(1−p)/n`` gives ``n ≥ p(1−p)/(α e²)`` (``1/(4 α e²)`` with no anticipated
    rate); without replacement ``Var = p(1−p)/n · (N−n)/(N−1)`` with ``p = M/N`` the
    population's own rate (the centre the miss is measured from), solved exactly:
    ``n ≥ p(1−p) N / (α e² (N−1) + p(1−p))``, which is Cochran's correction applied to the
    unrounded ``n₀``.  Both forms are proven bounds for the miss as defined.
    """
    spread = problem.population_variance_factor
    scale = problem.alpha * problem.margin**2
    if problem.population is None:
        return _Sized(_ceil_positive(spread / scale), False)
    total = problem.population
    size = _ceil_positive(spread * total / (scale * (total - 1) + spread))
    return _Sized(_cap(size, problem), True)


def _size_hoeffding(problem: _Problem) -> _Sized:
    """Hoeffding: ``P(|X/n − p| ≥ e) ≤ 2 exp(−2 n e²) ≤ α`` gives
    ``n ≥ ln(2/α)/(2e²)``, whatever the rate.  Hoeffding (1963, Theorem 4) shows that
    sampling without replacement satisfies the same bound, so the same size is valid for a
    finite population; no reduction is made for it."""
    log_term = Fraction(math.log(2.0 / problem.alpha_float))
    size = _ceil_positive(log_term / (2 * problem.margin**2))
    return _Sized(_cap(size, problem), False)


class _Method(NamedTuple):
    size: Callable[[_Problem], _Sized]
    guarantee: Guarantee


_METHODS: Mapping[str, _Method] = {
    "exact": _Method(_size_exact, "exact"),
    "wilson": _Method(_size_wilson, "approximate"),
    "normal": _Method(_size_normal, "approximate"),
    "chebyshev": _Method(_size_chebyshev, "distribution_free_bound"),
    "hoeffding": _Method(_size_hoeffding, "distribution_free_bound"),
}

#: Method names in their default order.
METHODS: tuple[str, ...] = tuple(_METHODS)

_PROVEN: frozenset[Guarantee] = frozenset({"exact", "distribution_free_bound"})


def _method_names(methods: Sequence[str] | None) -> tuple[str, ...]:
    if methods is None:
        return METHODS
    if isinstance(methods, str):
        methods = (methods,)
    names = tuple(dict.fromkeys(methods))
    if not names:
        raise InvalidInput("methods", "at least one method is required; got none")
    for name in names:
        if name not in _METHODS:
            raise InvalidInput(
                "methods", f"unknown method {name!r}; known methods: {', '.join(METHODS)}"
            )
    return names


def size_for_estimation(margin: float, confidence: float = 0.95,
                        anticipated_rate: float | None = None,
                        population_size: int | None = None,
                        methods: Sequence[str] | None = None, *,
                        max_sample_size: int = 10_000_000) -> EstimationPlan:
    """Sample sizes to estimate a rate within ``margin`` with probability ``confidence``.

    Parameters
    ----------
    margin : float
        Margin ``e``, ``0 < e < 0.5``: the largest acceptable distance between the sample
        rate and the rate.
    confidence : float
        Confidence ``c``, ``0 < c < 1``; the miss probability may be at most ``1 − c``.
    anticipated_rate : float or None
        Anticipated rate ``p``, ``0 < p < 1``; ``None`` plans for the worst case over all
        rates (``p = 1/2`` in the closed forms, the supremum over ``p`` for ``exact``).
    population_size : int or None
        Population size ``N ≥ 1``; given, the sample is drawn without replacement, the
        methods that allow it use their finite-population form, and no size exceeds ``N``.
    methods : sequence of str or None
        Methods to run, in the order of the rows; ``None`` runs all of
        ``exact, wilson, normal, chebyshev, hoeffding``.  Repeated names count once.
    max_sample_size : int
        Largest size any method may return.

    Returns
    -------
    EstimationPlan
        One row per method and the recommended method.

    Raises
    ------
    InvalidInput
        With field ``margin``, ``confidence``, ``anticipated_rate``, ``population.size`` or
        ``methods`` for an input outside its domain.
    ComputationTooLarge
        When a method needs more than ``max_sample_size`` items, or the exact computation
        is above its limits (:data:`EXACT_SIZE_LIMIT`).

    Notes
    -----
    ``exact`` returns the plain smallest size meeting the condition; see
    :func:`_size_exact` for the lattice effect and :func:`_binomial_supremum` and
    :func:`_hypergeometric_maximum` for the worst case.

    Examples
    --------
    >>> plan = size_for_estimation(0.1, 0.9, anticipated_rate=0.2, methods=["normal", "chebyshev"])
    >>> [(row.sample_size, row.guarantee) for row in plan.rows]
    [(44, 'approximate'), (160, 'distribution_free_bound')]
    """
    e = _open_unit(margin, "margin", 0.5)
    if e < _exact(MIN_MARGIN):
        raise InvalidInput("margin", f"must be at least {MIN_MARGIN:g}; got {float(margin)!r}")
    c = _open_unit(confidence, "confidence")
    if not _exact(MIN_CONFIDENCE) <= c <= _exact(MAX_CONFIDENCE):
        raise InvalidInput(
            "confidence",
            f"must be from {MIN_CONFIDENCE:g} to {MAX_CONFIDENCE:g}; got {float(confidence)!r}",
        )
    rate = None if anticipated_rate is None else _open_unit(anticipated_rate, "anticipated_rate")
    population = _population(population_size)
    names = _method_names(methods)
    if isinstance(max_sample_size, bool) or not isinstance(max_sample_size, int) or (
        max_sample_size < 1
    ):
        raise InvalidInput(
            "max_sample_size", f"must be a whole number ≥ 1; got {max_sample_size!r}"
        )
    problem = _Problem(e, 1 - c, rate, population, max_sample_size)

    sized: dict[str, _Sized] = {}
    for name in names:
        result = _METHODS[name].size(problem)
        if result.sample_size > max_sample_size:
            raise ComputationTooLarge(
                "margin",
                f"method {name!r} needs {result.sample_size:,} items, above the limit of "
                f"{max_sample_size:,}",
            )
        sized[name] = result

    exact_size = sized["exact"].sample_size if "exact" in sized else None
    rows = []
    for name in names:
        result = sized[name]
        miss = result.miss_probability
        if miss is None and _miss_feasible(result.sample_size, rate, population):
            miss = _miss(result.sample_size, rate, e, population)
            if rate is not None:
                miss = _within(result.sample_size, miss, problem.alpha, partial(
                    _exact_miss_at_rate, rate=rate, margin=e, population=population))[1]
        ratio = None if exact_size is None else result.sample_size / exact_size
        rows.append(EstimationRow(
            method=name,
            sample_size=int(result.sample_size),
            guarantee=_METHODS[name].guarantee,
            miss_probability=None if miss is None else float(miss),
            ratio_to_exact=ratio,
            finite_population_correction=result.finite_population_correction,
        ))

    proven = [row for row in rows if row.guarantee in _PROVEN] or rows
    recommended = min(proven, key=lambda row: row.sample_size).method
    return EstimationPlan(
        margin=float(margin),
        confidence=float(confidence),
        anticipated_rate=None if anticipated_rate is None else float(anticipated_rate),
        population_size=population,
        rows=tuple(rows),
        recommended=recommended,
    )
