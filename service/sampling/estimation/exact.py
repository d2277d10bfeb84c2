"""The ``exact`` method: the smallest size from which on the exact miss probability stays
at most ``1 - confidence`` (the lattice rule of :func:`_size_exact`), and the public
:func:`exact_miss_probability`."""

from __future__ import annotations

import math
from collections.abc import Callable
from fractions import Fraction
from functools import partial

import numpy as np

from service.sampling.errors import ComputationTooLarge
from service.sampling.estimation.binomial import (
    _binomial_miss_at_rate,
    _binomial_supremum,
    _binomial_supremum_low,
    _binomial_thresholds,
)
from service.sampling.estimation.closed_forms import _size_chebyshev, _size_hoeffding, _size_normal
from service.sampling.estimation.hypergeometric import (
    _hypergeometric_maximum,
    _hypergeometric_maximum_low,
    _hypergeometric_miss_at_rate,
    _hypergeometric_search_work,
    _hypergeometric_thresholds,
    _hypergeometric_work,
)
from service.sampling.estimation.inputs import (
    _open_unit,
    _population,
    _Problem,
    _sample_size,
    _Sized,
)
from service.sampling.estimation.lattice import _floor_times, _population_deviations
from service.sampling.estimation.limits import (
    _FIRST_CHUNK,
    _HYPERGEOMETRIC_WORK_LIMIT,
    _LARGEST_CHUNK,
    EXACT_SIZE_LIMIT,
    FloatArray,
    IntArray,
)
from service.sampling.ties import exact_tails
from service.sampling.ties.band import RELATIVE_BAND, near


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
        population holds ``M`` deviations, ``N·p`` rounded up (``p`` read as the decimal
        it is written as) and kept within ``1 … N − 1``; the miss is then measured from
        ``M/N``.

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
