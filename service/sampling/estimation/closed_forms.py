"""The closed-form methods: ``wilson`` (Wilson 1927), ``normal`` (Wald, with Cochran's finite
population correction), ``chebyshev`` and ``hoeffding`` (Hoeffding 1963); each size is
computed in rational arithmetic and rounded up once."""

from __future__ import annotations

import math
from fractions import Fraction

from service.sampling.errors import ComputationTooLarge
from service.sampling.estimation.inputs import _cap, _ceil_positive, _Problem, _Sized


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
    if spread == 0:
        # Every item alike (the population's rate is 0 or 1, as in a population of one):
        # the sample rate is the population's at any size.
        return _Sized(1, True)
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
