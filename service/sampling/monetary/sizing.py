"""Sample sizes for monetary-unit sampling.

With book value BV, tolerable misstatement TM and expected misstatement EM, let t = TM/BV
and e = EM/BV. For the ``poisson``, ``binomial`` and ``hypergeometric`` methods the sample
size is the smallest n such that, if the expected taint total k = e x n occurs, the upper
limit of the misstatement rate at the confidence asked is at most t:

- ``poisson``: gammaincinv(k + 1, confidence) <= n x t (continuous in k);
- ``binomial``: betaincinv(k + 1, n - k, confidence) <= t (continuous in k);
- ``hypergeometric``: the population is the N = BV monetary units (in the smallest
  currency unit) and M = floor(TM) of them misstated; k = ceil(e x n) whole units and
  P(X <= k; N, M, n) <= 1 - confidence.

With no expected misstatement at 95% the Poisson size is ceil(2.9957 x BV / TM).

The ``expansion_factor`` method is the conventional formula of audit practice (common
practice): n = ceil(BV x RF(0) / (TM - EM x EF)), RF(0) the Poisson factor for no
misstatement and EF the expansion factor, 1.6 at 5% and 1.5 at 10% risk of incorrect
acceptance (values recalled from memory from audit practice guides). Other confidences
have no expansion factor and are refused.

The sampling interval is BV / n; items at or above it are certain to be selected and
are tested in full (individually significant).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from decimal import Decimal
from fractions import Fraction
from math import ceil, log, log1p
from typing import Final

from scipy import special

from service.sampling.errors import InvalidInput, NoFeasiblePlan
from service.sampling.monetary.factors import hypergeometric_risk, poisson_factor

EXPANSION_FACTORS: Final[Mapping[float, float]] = {0.95: 1.6, 0.90: 1.5}
"""Expansion factor by confidence (common practice; recalled from memory)."""

METHODS: Final = ("poisson", "binomial", "hypergeometric", "expansion_factor")
"""Names of the sizing methods; ``poisson`` is the default."""

DEFAULT_MAX_SAMPLE_SIZE: Final = 1_000_000


@dataclass(frozen=True, slots=True)
class MonetaryPlan:
    """A monetary-unit sample size and what follows from it.

    Amounts are in smallest currency units (integers or exact fractions); ``scale`` gives
    the decimal places of one unit.
    """

    book_value: int
    tolerable_misstatement: int
    expected_misstatement: int
    confidence: float
    method: str
    scale: int
    sample_size: int
    sampling_interval: Fraction
    basic_precision: Fraction
    expected_upper_limit: Fraction
    achieved_risk_of_incorrect_acceptance: float
    risk_of_incorrect_acceptance: float
    warnings: tuple[str, ...]


_Sizer = Callable[[int, int, int, float, int], int]


def _scan(fits: Callable[[int], bool], first: int, limit: int) -> int:
    """The smallest n from ``first`` up to ``limit`` for which ``fits(n)``.

    Galloping then bisection: the conditions hold from some n on (the upper limits grow
    concavely with the number of misstatements -- the Poisson factors' increments 1.75,
    1.55, 1.46, ... fall -- so n x t less the limit is convex in n and, negative at 0,
    stays positive once positive). The hypergeometric condition, with its whole k, may
    not be monotone near a step of k, so the values just below the bisection's answer
    are checked one by one (up to ``_CHECKED_BELOW`` of them).
    """
    low = max(first, 1) - 1  # fits(low) is false or low is 0
    if low >= limit:
        raise _infeasible(limit)
    step, high = 1, low + 1
    while not fits(high):
        if high >= limit:
            raise _infeasible(limit)
        low, step = high, step * 2
        high = min(limit, high + step)
    while high - low > 1:
        middle = (low + high) // 2
        if fits(middle):
            high = middle
        else:
            low = middle
    for n in range(high - 1, max(first, 1, high - _CHECKED_BELOW) - 1, -1):
        if fits(n):
            high = n
    return high


_CHECKED_BELOW: Final = 200


def _infeasible(limit: int) -> NoFeasiblePlan:
    return NoFeasiblePlan(
        "tolerable_misstatement",
        f"no sample size up to {limit:,} meets the confidence; raise tolerable_misstatement "
        "or lower expected_misstatement",
    )


def _poisson(bv: int, tm: int, em: int, confidence: float, limit: int) -> int:
    t, e = Fraction(tm, bv), Fraction(em, bv)
    first = ceil(poisson_factor(0, confidence) / t)
    return _scan(lambda n: poisson_factor(float(e * n), confidence) <= n * t, first, limit)


def _binomial(bv: int, tm: int, em: int, confidence: float, limit: int) -> int:
    t, e = Fraction(tm, bv), Fraction(em, bv)

    def fits(n: int) -> bool:
        k = float(e * n)
        return n > k and float(special.betaincinv(k + 1, n - k, confidence)) <= t

    return _scan(fits, ceil(log(1 - confidence) / log1p(-float(t))), limit)


def _hypergeometric(bv: int, tm: int, em: int, confidence: float, limit: int) -> int:
    alpha = 1 - confidence

    def fits(n: int) -> bool:
        k = ceil(Fraction(em * n, bv))
        return k < n and hypergeometric_risk(k, n, bv, tm) <= alpha

    t = tm / bv
    # P(X = 0) >= (1 - 2t)^n while n <= N / 2, so fewer units cannot be enough.
    first = ceil(log(alpha) / log1p(-2 * t)) if t < 0.5 else 1
    return _scan(fits, min(first, bv // 2), min(limit, bv))


def _expansion(bv: int, tm: int, em: int, confidence: float, limit: int) -> int:
    factor = EXPANSION_FACTORS.get(round(confidence, 10))
    if factor is None:
        raise InvalidInput(
            "confidence",
            "the expansion_factor method has expansion factors for confidence 0.95 and 0.90 "
            f"only, got {confidence!r}",
        )
    denominator = Fraction(tm) - Fraction(em) * Fraction(str(factor))
    if denominator <= 0:
        raise InvalidInput(
            "expected_misstatement",
            f"expected_misstatement x {factor} must be below tolerable_misstatement",
        )
    n = ceil(Fraction(bv) * Fraction(poisson_factor(0, confidence)) / denominator)
    if n > limit:
        raise NoFeasiblePlan("tolerable_misstatement", f"the sample size {n:,} exceeds {limit:,}")
    return n


_SIZERS: Final[Mapping[str, _Sizer]] = {
    "poisson": _poisson,
    "binomial": _binomial,
    "hypergeometric": _hypergeometric,
    "expansion_factor": _expansion,
}


def size_monetary_sample(
    book_value: int,
    tolerable_misstatement: int,
    expected_misstatement: int = 0,
    confidence: float = 0.95,
    method: str = "poisson",
    *,
    scale: int = 2,
    max_sample_size: int = DEFAULT_MAX_SAMPLE_SIZE,
) -> MonetaryPlan:
    """Monetary-unit sample size; amounts in smallest currency units (see the module).

    Parameters
    ----------
    book_value, tolerable_misstatement, expected_misstatement : int
        Amounts in units of ``10**-scale``: 0 < TM < BV, 0 <= EM < TM.
    confidence : float
        One minus the risk of incorrect acceptance.
    method : {"poisson", "binomial", "hypergeometric", "expansion_factor"}

    Examples
    --------
    >>> plan = size_monetary_sample(250_000_000, 12_500_000)
    >>> plan.sample_size, float(plan.sampling_interval) / 100
    (60, 41666.666666666664)
    """
    sizer = _SIZERS.get(method)
    if sizer is None:
        raise InvalidInput("method", f"must be one of {', '.join(METHODS)}, got {method!r}")
    if book_value <= 0:
        raise InvalidInput("book_value", f"must be above 0, got {book_value}")
    if not 0 < tolerable_misstatement < book_value:
        raise InvalidInput("tolerable_misstatement", "must be above 0 and below book_value")
    if not 0 <= expected_misstatement < tolerable_misstatement:
        raise InvalidInput(
            "expected_misstatement", "must be at least 0 and below tolerable_misstatement"
        )
    if not 0 < confidence < 1:
        raise InvalidInput("confidence", f"must be strictly between 0 and 1, got {confidence!r}")
    n = sizer(
        book_value, tolerable_misstatement, expected_misstatement, confidence, max_sample_size
    )
    interval = Fraction(book_value, n)
    k = Fraction(expected_misstatement) / interval
    rf0 = poisson_factor(0, confidence)
    expected_limit = interval * Fraction(poisson_factor(float(k), confidence))
    achieved = float(
        special.gammaincc(float(k) + 1, float(n * Fraction(tolerable_misstatement, book_value)))
    )
    warnings: list[str] = []
    if method == "expansion_factor":
        warnings.append(
            "The expansion factors (1.6 at 95% and 1.5 at 90% confidence) are common practice, "
            "not an exact model; the poisson method gives the exact size."
        )
    if expected_limit > tolerable_misstatement:
        warnings.append(
            "If the expected misstatement occurs, the Poisson upper misstatement limit exceeds "
            "the tolerable misstatement."
        )
    return MonetaryPlan(
        book_value=book_value,
        tolerable_misstatement=tolerable_misstatement,
        expected_misstatement=expected_misstatement,
        confidence=confidence,
        method=method,
        scale=scale,
        sample_size=n,
        sampling_interval=interval,
        basic_precision=interval * Fraction(rf0),
        expected_upper_limit=expected_limit,
        achieved_risk_of_incorrect_acceptance=achieved,
        risk_of_incorrect_acceptance=float(1 - Decimal(repr(confidence))),
        warnings=tuple(warnings),
    )
