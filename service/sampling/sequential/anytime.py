"""Anytime-valid evaluation: a confidence sequence for the deviation rate.

After each tested item ``t`` (with ``S_t`` deviations so far) the upper deviation limit
``u_t`` is such that

    P(the true rate exceeds u_t for some t) ≤ 1 − confidence,

so the guarantee holds at whatever moment the tester stops, including a moment chosen by
looking at the results so far; a fixed-size limit (Clopper–Pearson) holds only at a
sample size fixed in advance.

With replacement (a population large enough to ignore its size)
    Robbins' beta-binomial mixture: with a Beta(a, b) mixing distribution the likelihood
    ratio ``M_t(p) = B(a + S_t, b + t − S_t) / B(a, b) / (p^S_t (1 − p)^(t − S_t))`` is a
    nonnegative martingale with ``M_0 = 1`` when ``p`` is the true rate, so by Ville's
    inequality ``{p : M_t(p) < 1 / α}`` is a confidence sequence; ``u_t`` is its upper end.
Without replacement (population of ``N`` items, ``M`` deviant)
    The prior-posterior ratio for a beta-binomial prior on ``M``: the sequence's
    probability given ``M`` is ``L_t(M) = [M]_S [N − M]_(t − S) / [N]_t`` (falling
    factorials) and its prior predictive probability is again ``B(a + S, b + t − S) /
    B(a, b)``, so ``{M : L_t(M) > α B(a + S, b + t − S) / B(a, b)}`` is a confidence
    sequence for ``M``; ``u_t`` is its largest member divided by ``N``.

Both sets are intervals (the log-likelihoods are concave), so the upper end is found by
bisection above the maximum. The limit reported after each item is that item's upper
end (not the running minimum, which would also be valid but would not rise when a
deviation is found). The mixing distribution is Jeffreys' Beta(1/2, 1/2).

References
----------
Robbins, H. (1970). Statistical methods related to the law of the iterated logarithm.
*Annals of Mathematical Statistics* 41(5), 1397–1409.
Howard, S. R., Ramdas, A., McAuliffe, J. & Sekhon, J. (2021). Time-uniform,
nonparametric, nonasymptotic confidence sequences. *Annals of Statistics* 49(2).
Waudby-Smith, I. & Ramdas, A. (2020). Confidence sequences for sampling without
replacement. *Advances in Neural Information Processing Systems* 33.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from scipy import optimize, special

from service.sampling.errors import InvalidInput

PRIOR_A = 0.5
PRIOR_B = 0.5
MAX_RESULTS = 10_000


@dataclass(frozen=True)
class SequencePoint:
    """The limits after the first ``sample_size`` items."""

    sample_size: int
    deviations: int
    upper_deviation_limit: float
    fixed_size_upper_deviation_limit: float


@dataclass(frozen=True)
class ConfidenceSequence:
    """Running upper deviation limits valid at any stopping time."""

    method: str
    confidence: float
    population_size: int | None
    tolerable_rate: float | None
    sample_size: int
    deviations: int
    upper_deviation_limit: float
    supports_reliance: bool | None
    first_supporting_sample_size: int | None
    points: tuple[SequencePoint, ...]


def _log_evidence(s: int, t: int) -> float:
    """log of the prior predictive probability of a given sequence: B(a+S, b+t−S) / B(a, b)."""
    return float(special.betaln(PRIOR_A + s, PRIOR_B + t - s) - special.betaln(PRIOR_A, PRIOR_B))


def upper_with_replacement(s: int, t: int, alpha: float) -> float:
    """Upper end of ``{p : p^S (1 − p)^(t − S) > α · B(a + S, b + t − S) / B(a, b)}``.

    With no deviation the bound has the closed form
    ``1 − (α B(a, b + t) / B(a, b))^(1 / t)``:

    >>> import math
    >>> from scipy import special
    >>> closed = 1 - math.exp((math.log(0.05) + special.betaln(0.5, 100.5)
    ...                        - special.betaln(0.5, 0.5)) / 100)
    >>> abs(upper_with_replacement(0, 100, 0.05) - closed) < 1e-12
    True
    """
    if s == t:
        return 1.0
    threshold = math.log(alpha) + _log_evidence(s, t)

    def gap(p: float) -> float:
        return s * math.log(p) + (t - s) * math.log1p(-p) - threshold if p > 0 else (
            -math.inf if s > 0 else (t - s) * math.log1p(-p) - threshold)

    low = s / t
    high = 1.0 - 1e-15
    if gap(high) > 0:
        return 1.0
    return float(optimize.brentq(gap, low, high, xtol=1e-14, rtol=1e-12))


def _log_falling(m: int, k: int) -> float:
    """log of m (m − 1) … (m − k + 1), as lgamma(k) − log B(m − k + 1, k).

    The beta function form keeps full precision for m up to 10^12, where differences of
    lgamma values (of order 10^13) would lose the digits that matter.
    """
    if k == 0:
        return 0.0
    return math.lgamma(k) - float(special.betaln(m - k + 1, k))


def _log_likelihood(m: int, s: int, t: int, size: int) -> float:
    return _log_falling(m, s) + _log_falling(size - m, t - s) - _log_falling(size, t)


def upper_without_replacement(s: int, t: int, alpha: float, size: int) -> int:
    """Largest deviant count ``M`` with ``L_t(M) > α · B(a + S, b + t − S) / B(a, b)``.

    >>> upper_without_replacement(0, 100, 0.05, 100)  # every item tested
    0
    """
    threshold = math.log(alpha) + _log_evidence(s, t)
    lo = s  # the set always holds a maximiser near S N / t; start from the top bracket
    hi = size - (t - s)
    mode = min(max(round(s * size / t), lo), hi)
    if _log_likelihood(hi, s, t, size) > threshold:
        return hi
    lo = mode
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if _log_likelihood(mid, s, t, size) > threshold:
            lo = mid
        else:
            hi = mid
    return lo


def _fixed_size_upper(s: int, t: int, confidence: float) -> float:
    """Clopper–Pearson one-sided upper limit, for comparison only."""
    return 1.0 if s == t else float(special.betaincinv(s + 1, t - s, confidence))


def confidence_sequence(
    results: Sequence[bool],
    confidence: float = 0.95,
    population_size: int | None = None,
    tolerable_rate: float | None = None,
) -> ConfidenceSequence:
    """Running upper deviation limit after each tested item, valid at any stopping time.

    Parameters
    ----------
    results : sequence of bool
        The tested items in the order tested: True for a deviation.
    confidence : float
        One minus the probability that the limit is ever below the true rate.
    population_size : int, optional
        N, for the without-replacement form; at least the number of results.
    tolerable_rate : float, optional
        When given: whether, and from which item on, the running limit is below it.

    Examples
    --------
    >>> cs = confidence_sequence([False] * 100)
    >>> cs.upper_deviation_limit > cs.points[-1].fixed_size_upper_deviation_limit
    True
    """
    if not results:
        raise InvalidInput("results", "results must hold at least one tested item")
    if len(results) > MAX_RESULTS:
        raise InvalidInput("results", f"results holds {len(results):,} items; at most "
                           f"{MAX_RESULTS:,}")
    if not (0.5 <= confidence <= 0.999999):
        raise InvalidInput("confidence", f"confidence {confidence!r} must be from 0.5 to 0.999999")
    if population_size is not None and population_size < len(results):
        raise InvalidInput(
            "population.size",
            f"population.size {population_size} is below the {len(results)} items tested",
        )
    if tolerable_rate is not None and not (0.0 < tolerable_rate < 1.0):
        raise InvalidInput("tolerable_rate", f"tolerable_rate {tolerable_rate!r} must be "
                           "strictly between 0 and 1")
    alpha = 1.0 - confidence
    s = 0
    points: list[SequencePoint] = []
    first: int | None = None
    for t, deviant in enumerate(results, start=1):
        s += bool(deviant)
        if population_size is None:
            upper = upper_with_replacement(s, t, alpha)
        else:
            upper = upper_without_replacement(s, t, alpha, population_size) / population_size
        points.append(SequencePoint(t, s, upper, _fixed_size_upper(s, t, confidence)))
        if first is None and tolerable_rate is not None and upper < tolerable_rate:
            first = t
    supports = None if tolerable_rate is None else upper < tolerable_rate
    return ConfidenceSequence(
        method="without_replacement" if population_size is not None else "with_replacement",
        confidence=confidence,
        population_size=population_size,
        tolerable_rate=tolerable_rate,
        sample_size=len(results),
        deviations=s,
        upper_deviation_limit=upper,
        supports_reliance=supports,
        first_supporting_sample_size=first,
        points=tuple(points),
    )
