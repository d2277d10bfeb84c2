"""Attribute sample sizes: the smallest n, and the deviations it allows, whose risk of
overreliance at the tolerable rate is at most ``1 - confidence`` (binomial, hypergeometric
or Poisson), searched down from the binomial plan where that bounds it, with the plan's
warnings and a bounded memo of plans."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache, partial
from typing import Any

import numpy as np
from scipy import special

from service.sampling.attributes.checks import (
    _LARGE_PLAN_FACTOR,
    _LARGE_SAMPLING_FRACTION,
    _TINY_EXPECTED_COUNT,
    DEFAULT_MAX_SAMPLE_SIZE,
    MAX_ALLOWED_DEVIATIONS,
    _check_confidence,
    _check_population,
    _check_tolerable_rate,
    _items,
    _TooManyDeviations,
)
from service.sampling.attributes.results import SampleSizePlan
from service.sampling.attributes.searches import _smallest_satisfying, _smallest_satisfying_below
from service.sampling.distributions import MODELS, Model, deviant_items, resolve_model
from service.sampling.errors import ComputationTooLarge, InvalidInput, NoFeasiblePlan
from service.sampling.rates import exact_rate, floor_quotient
from service.sampling.ties import at_most, at_most_each


def _tail_within(model: Model, rate: Fraction, population_size: int | None, risk: Fraction,
                 k: int, n: int) -> bool:
    return at_most(model.name, k, n, rate, population_size, risk).holds


def _normal_size_estimate(tolerable: float, expected: float, confidence: float) -> float:
    """Rough size from the normal approximation, used only to refuse absurd requests fast."""
    z = float(special.ndtri(confidence))
    return z * z * tolerable * (1.0 - tolerable) / (tolerable - expected) ** 2


def _plan_search(
    model: Model,
    tolerable: Fraction,
    expected: Fraction,
    alpha: Fraction,
    population_size: int | None,
    max_n: int,
    max_deviations: int = MAX_ALLOWED_DEVIATIONS,
) -> tuple[int, int] | None:
    """Return (n, k) of the smallest plan with n ≤ max_n, or None if there is none.

    For a fixed k the tail P(X ≤ k) falls as n grows, so the sizing condition
    holds for n ≥ n_k. The n that allow exactly k deviations form the block
    I_k = {n : ceil(e n) = k}; the first block that contains an n ≥ n_k holds
    the answer. Blocks are tested in vectorised chunks at their largest n,
    then the answer is found by bisection inside the winning block. Every
    comparison with the risk ``alpha`` is exact near a tie (:mod:`service.sampling.ties`).
    """

    def tail(k: Any, n: Any) -> Any:
        return model.lower_tail(k, n, tolerable, population_size)

    within = partial(_tail_within, model, tolerable, population_size, alpha)
    if model.needs_population and population_size is not None:
        found = _plan_below_binomial(
            within, tolerable, expected, alpha, population_size, max_n, max_deviations, tail
        )
        if found is not None:
            return found
    if expected == 0:
        if not within(0, max_n):
            return None
        return _smallest_satisfying(partial(within, 0), 1, max_n), 0

    # The scan below costs time in proportion to the deviations allowed; plans
    # beyond this many are refused as impractical (see MAX_ALLOWED_DEVIATIONS).

    first_k, chunk = 1, 8
    while True:
        if first_k > max_deviations:
            raise _TooManyDeviations
        ks = list(range(first_k, min(first_k + chunk, max_deviations + 1)))
        # Clipped to max_n + 1 so that a tiny expected rate (1e-19) stays within int64.
        block_low = [min(floor_quotient(k - 1, expected) + 1, max_n + 1) for k in ks]
        if block_low[0] > max_n:
            return None
        block_high = [min(floor_quotient(k, expected), max_n) for k in ks]
        k_arr = np.array(ks, dtype=np.int64)
        high_arr = np.array(block_high, dtype=np.int64)
        nonempty = np.array(block_low, dtype=np.int64) <= high_arr
        n_arr = np.maximum(high_arr, k_arr)
        feasible = nonempty & at_most_each(
            model.name, k_arr, n_arr, tail(k_arr, n_arr), tolerable, population_size, alpha
        )
        hits = np.flatnonzero(feasible)
        if hits.size:
            i = int(hits[0])
            k = ks[i]
            return _smallest_satisfying(partial(within, k), block_low[i], block_high[i]), k
        first_k += chunk
        chunk = min(4 * chunk, 4096)


def _binomial_holds(rate: float, alpha: float, k: int, n: int) -> bool:
    """``P(X ≤ k) ≤ alpha`` for X ~ Binomial(n, rate), in doubles."""
    return bool(k < n and special.betaincc(k + 1, n - k, rate) <= alpha)


#: Deviations tried by :func:`_binomial_plan_by_inversion` before the scan decides.
_INVERTED_DEVIATIONS = 16


def _binomial_plan_by_inversion(
    rate: float, expected: Fraction, alpha: float, max_n: int
) -> tuple[int, int] | None:
    """The binomial plan at ``rate`` from the inverse of the binomial distribution in ``n``.

    For each number of deviations ``k`` the tail ``P(X ≤ k)`` falls as ``n`` grows, and
    ``scipy.special.bdtrin(k, alpha, rate)`` is the real ``n`` where it crosses ``alpha``
    (cdflib's inversion); its ceiling is the smallest sample allowing ``k`` deviations,
    to the inversion's accuracy. The plan is the first ``k`` whose block of sizes
    ``{n : ceil(e n) = k}`` reaches that size: one inversion for each ``k`` up to
    :data:`_INVERTED_DEVIATIONS`, then one tail at the size found. None when that tail
    does not hold, or the plan allows more deviations, and :func:`_binomial_plan_scan`
    decides.
    """
    for k in range(1, _INVERTED_DEVIATIONS + 1) if expected else (0,):
        crossing = float(special.bdtrin(k, alpha, rate))
        if not math.isfinite(crossing):
            return None
        n = max(math.ceil(crossing), k + 1)
        if expected:
            n = max(n, floor_quotient(k - 1, expected) + 1)
        if n > max_n:
            return None
        if not expected or n <= floor_quotient(k, expected):
            return (n, k) if _binomial_holds(rate, alpha, k, n) else None
    return None


def _binomial_plan_guess(
    rate: float, expected: Fraction, alpha: float, max_n: int, max_deviations: int
) -> tuple[int, int] | None:
    """The binomial plan at ``rate``, decided in doubles (no exact decision near a tie):
    a starting point for the exact hypergeometric search, not an answer. None when it
    would allow more than ``max_deviations`` deviations or need more than ``max_n`` items.
    Found by :func:`_binomial_plan_by_inversion` where it can, else by
    :func:`_binomial_plan_scan`.
    """
    found = _binomial_plan_by_inversion(rate, expected, alpha, max_n)
    if found is not None and found[1] <= max_deviations:
        return found
    return _binomial_plan_scan(rate, expected, alpha, max_n, max_deviations)


def _binomial_plan_scan(
    rate: float, expected: Fraction, alpha: float, max_n: int, max_deviations: int
) -> tuple[int, int] | None:
    """:func:`_binomial_plan_guess` by a scan of the blocks of sizes allowing 1, 2, …
    deviations, each tested at its largest size, then a bisection in the first that holds.
    """
    holds = partial(_binomial_holds, rate, alpha)

    if expected == 0:
        if not holds(0, max_n):
            return None
        return _smallest_satisfying(partial(holds, 0), 1, max_n), 0
    # Blocks of n allowing k deviations, tested at their largest n, in growing chunks.
    first, chunk = 1, 8
    while first <= max_deviations:
        ks = range(first, min(first + chunk, max_deviations + 1))
        # Capped at max_n + 1 (a block beyond the cap), so that a tiny expected rate
        # (5e-324) does not give a block start too large for an int64.
        lows = [min(floor_quotient(k - 1, expected) + 1, max_n + 1) for k in ks]
        highs = [min(floor_quotient(k, expected), max_n) for k in ks]
        k_arr, high_arr = np.array(ks, dtype=np.int64), np.array(highs, dtype=np.int64)
        inside = (np.array(lows, dtype=np.int64) <= high_arr) & (k_arr < high_arr)
        tails = special.betaincc(k_arr + 1, np.where(inside, high_arr - k_arr, 1), rate)
        hits = np.flatnonzero(inside & (tails <= alpha))
        if hits.size:
            i = int(hits[0])
            return _smallest_satisfying(partial(holds, ks[i]), lows[i], highs[i]), ks[i]
        if lows[-1] > max_n:
            return None
        first += chunk
        chunk = min(4 * chunk, 4096)
    return None


def _plan_below_binomial(
    within: Callable[[int, int], bool],
    tolerable: Fraction,
    expected: Fraction,
    alpha: Fraction,
    population_size: int,
    max_n: int,
    max_deviations: int,
    tail: Callable[[Any, Any], Any],
) -> tuple[int, int] | None:
    """The hypergeometric plan, searched downwards from the binomial one; None when the
    binomial plan is not an upper bound here (the full search then decides).

    The binomial plan at the population's deviation rate ``ceil(t N) / N`` usually
    satisfies the hypergeometric condition too (sampling without replacement is less
    dispersed), so it bounds the answer from above; this is checked, not assumed, and
    the binomial plan is found in doubles alone (:func:`_binomial_plan_guess`): a wrong
    guess costs time, never the answer. With ``n_b`` allowing ``k_b`` deviations,
    blocks allowing fewer deviations are tested at their largest ``n`` (one vectorised
    evaluation); the answer is the smallest ``n``
    of the first of them that holds there, or else of block ``k_b`` up to ``n_b``, found
    downwards. It is the one :func:`_plan_search` finds by scanning up from one deviation.
    """
    rate = deviant_items(tolerable, population_size) / population_size
    bound = _binomial_plan_guess(rate, expected, float(alpha), max_n, max_deviations)
    if bound is None:
        return None
    n_b, k_b = bound
    if not within(k_b, n_b):
        return None
    # Sampling without replacement shrinks the variance by about (N − n) / N, and the
    # sample needed roughly with it: the first step down is that much of n_b.
    first_step = n_b * n_b // population_size
    if expected == 0:
        return _smallest_satisfying_below(partial(within, 0), 1, n_b, first_step), 0
    if k_b > 1:
        ks = np.arange(1, k_b, dtype=np.int64)
        block_low = np.array([floor_quotient(k - 1, expected) + 1 for k in range(1, k_b)],
                             dtype=np.int64)
        block_high = np.array([floor_quotient(k, expected) for k in range(1, k_b)],
                              dtype=np.int64)
        ns = np.maximum(block_high, ks)
        # One scalar tail each: a short loop of them costs less than one vectorised call.
        tails = np.array([tail(int(k), int(n)) for k, n in zip(ks, ns, strict=True)],
                         dtype=np.float64)
        feasible = (block_low <= block_high) & at_most_each(
            "hypergeometric", ks, ns, tails, tolerable, population_size, alpha
        )
        hits = np.flatnonzero(feasible)
        if hits.size:
            # The first block that holds at its largest n holds the answer, as in the scan.
            i = int(hits[0])
            holds = partial(within, int(ks[i]))
            return _smallest_satisfying_below(holds, int(block_low[i]), int(ns[i])), int(ks[i])
    low = floor_quotient(k_b - 1, expected) + 1
    return _smallest_satisfying_below(partial(within, k_b), low, n_b, first_step), k_b


def size_sample(
    tolerable_rate: float,
    expected_rate: float = 0.0,
    confidence: float = 0.95,
    population_size: int | None = None,
    method: str | None = None,
    *,
    population_label: str | None = None,
    max_sample_size: int = DEFAULT_MAX_SAMPLE_SIZE,
) -> SampleSizePlan:
    """Smallest sample size for a test of controls.

    Parameters
    ----------
    tolerable_rate : float
        Tolerable deviation rate ``t``, a fraction in (0, 1).
    expected_rate : float
        Expected population deviation rate ``e``, in [0, t).
    confidence : float
        One minus the acceptable risk of overreliance, in (0, 1).
    population_size : int, optional
        Number of items N; absent means a population large enough to ignore.
    method : {"binomial", "hypergeometric", "poisson"}, optional
        Defaults to hypergeometric when N is given, else binomial.
    max_sample_size : int
        Largest sample the search may consider.

    Returns
    -------
    SampleSizePlan

    Notes
    -----
    Defined as the smallest ``n`` with ``P(X ≤ ceil(e n)) ≤ 1 − confidence``
    at the tolerable rate; see the module docstring. Counts are computed on
    the exact decimal value of each rate (:mod:`service.sampling.rates`).
    Under the hypergeometric model the population at the tolerable rate holds
    ``ceil(t N)`` deviant items and the sample cannot exceed N.

    References
    ----------
    AICPA, *Audit Guide: Audit Sampling* (2019), table A-1 (5% risk of
    overreliance) and table A-2 (10%).

    Examples
    --------
    >>> plan = size_sample(0.05, 0.0, 0.95)
    >>> plan.sample_size, plan.allowed_deviations
    (59, 0)
    >>> plan = size_sample(0.05, 0.01, 0.95)
    >>> plan.sample_size, plan.allowed_deviations
    (93, 1)
    """
    _check_tolerable_rate(tolerable_rate)
    _check_confidence(confidence)
    if not (0.0 <= expected_rate < tolerable_rate):
        raise InvalidInput(
            "expected_rate",
            f"expected_rate {expected_rate!r} must be at least 0 and below "
            f"tolerable_rate {tolerable_rate!r}",
        )
    _check_population(population_size)
    model = resolve_model(method, population_size)

    tolerable, expected = exact_rate(tolerable_rate), exact_rate(expected_rate)
    alpha = 1 - exact_rate(confidence)
    max_n = max_sample_size
    if model.needs_population and population_size is not None:
        max_n = min(max_n, population_size)

    if expected > 0:
        estimate = _normal_size_estimate(tolerable_rate, expected_rate, confidence)
        if population_size is not None and model.needs_population:
            estimate = estimate / (1.0 + estimate / population_size)
        if estimate > 2 * max_sample_size or estimate * expected_rate > 2 * MAX_ALLOWED_DEVIATIONS:
            raise _too_large(estimate, expected_rate, tolerable_rate, max_sample_size)

    try:
        planned = _planned(model.name, tolerable, expected, alpha, population_size, max_n)
    except _TooManyDeviations:
        raise _over_the_cap(
            model, tolerable, expected, alpha, population_size, max_n, expected_rate,
            tolerable_rate, confidence,
        ) from None
    if planned is None:
        if max_n == max_sample_size:
            raise ComputationTooLarge(
                "tolerable_rate",
                f"no sample of at most {max_sample_size:,} items reaches confidence "
                f"{confidence!r} at tolerable_rate {tolerable_rate!r} with expected_rate "
                f"{expected_rate!r}",
            )
        raise NoFeasiblePlan(
            "expected_rate",
            f"no sample from a population of {population_size:,} items reaches confidence "
            f"{confidence!r}: with expected_rate {expected_rate!r} the deviations allowed "
            f"reach the {deviant_items(tolerable, max_n)} deviant items the population "
            f"holds at tolerable_rate {tolerable_rate!r}",
        )
    return SampleSizePlan(
        method=model.name,
        tolerable_rate=tolerable_rate,
        expected_rate=expected_rate,
        confidence=confidence,
        population_size=population_size,
        population_label=population_label,
        sample_size=planned.sample_size,
        allowed_deviations=planned.allowed_deviations,
        achieved_confidence=1.0 - planned.risk_of_overreliance,
        risk_of_overreliance=planned.risk_of_overreliance,
        risk_of_underreliance=planned.risk_of_underreliance,
        warnings=planned.warnings,
        tolerable_deviant_items=(
            None if population_size is None else deviant_items(tolerable, population_size)
        ),
    )


@dataclass(frozen=True)
class _Planned:
    """What a plan's exact inputs determine: the plan, its two risks and its warnings."""

    sample_size: int
    allowed_deviations: int
    risk_of_overreliance: float
    risk_of_underreliance: float
    warnings: tuple[str, ...]


#: Plans kept per process, keyed by their exact inputs: month-end requests repeat a
#: firm's standard parameters. A plan is a few hundred bytes.
PLAN_MEMO_SIZE = 1024


@lru_cache(maxsize=PLAN_MEMO_SIZE)
def _planned(
    method: str,
    tolerable: Fraction,
    expected: Fraction,
    alpha: Fraction,
    population_size: int | None,
    max_n: int,
) -> _Planned | None:
    """The plan for exact rates, or None when no sample of at most ``max_n`` items holds.

    A pure function of its arguments (the written rates, not their doubles), so its
    answers are kept in a bounded memo; refusals raise and are not kept.
    """
    model = MODELS[method]
    found = _plan_search(model, tolerable, expected, alpha, population_size, max_n)
    if found is None:
        return None
    n, k = found
    risk_over = at_most(model.name, k, n, tolerable, population_size, alpha).value
    risk_under = 0.0 if expected == 0 else float(model.upper_tail(k, n, expected, population_size))
    # With no deviations expected the plan is its own zero-deviation plan.
    zero_size = n if expected == 0 else None
    warnings = _plan_warnings(model, n, population_size, tolerable, alpha, max_n, zero_size)
    if 0 < expected * n < _TINY_EXPECTED_COUNT:
        warnings += (_tiny_expected_warning(model, expected, n, k, tolerable, alpha,
                                            population_size, max_n),)
    return _Planned(n, k, risk_over, risk_under, warnings)


def _tiny_expected_warning(
    model: Model, expected: Fraction, n: int, k: int, tolerable: Fraction, alpha: Fraction,
    population_size: int | None, max_n: int,
) -> str:
    zero_plan = _plan_search(model, tolerable, Fraction(0), alpha, population_size, max_n)
    zero = "" if zero_plan is None else f"; with an expected rate of 0 it is {zero_plan[0]:,}"
    return (
        f"The expected rate {float(expected):.3g} times the sample of {n:,} items is "
        f"{float(expected * n):.3g} deviations, yet the plan allows {k} deviation"
        f"{'' if k == 1 else 's'} (ceil(expected rate × sample size)), which enlarges the "
        f"sample{zero}. Check that the expected rate is the one meant."
    )


def _over_the_cap(
    model: Model, tolerable: Fraction, expected: Fraction, alpha: Fraction,
    population_size: int | None, max_n: int, expected_rate: float, tolerable_rate: float,
    confidence: float,
) -> ComputationTooLarge:
    """The refusal when no plan allows at most MAX_ALLOWED_DEVIATIONS deviations.

    The plan that would be needed is searched for up to twice the cap so that the
    message can name it; beyond that it is given from the normal approximation.
    """
    try:
        needed = _plan_search(model, tolerable, expected, alpha, population_size, max_n,
                              2 * MAX_ALLOWED_DEVIATIONS)
    except _TooManyDeviations:
        needed = None
    if needed is None:
        estimate = _normal_size_estimate(tolerable_rate, expected_rate, confidence)
        plan = (f"about {estimate:,.0f} items allowing about {estimate * expected_rate:,.0f} "
                "deviations (normal approximation)")
    else:
        plan = f"{needed[0]:,} items allowing {needed[1]:,} deviations"
    return ComputationTooLarge(
        "expected_rate",
        f"expected_rate {expected_rate!r} is too close to tolerable_rate {tolerable_rate!r}: "
        f"no plan allowing at most {MAX_ALLOWED_DEVIATIONS:,} deviations reaches confidence "
        f"{confidence!r}; the plan would need {plan}",
    )


def _too_large(
    estimate: float, expected_rate: float, tolerable_rate: float, max_sample_size: int
) -> ComputationTooLarge:
    return ComputationTooLarge(
        "expected_rate",
        f"expected_rate {expected_rate!r} is too close to tolerable_rate {tolerable_rate!r}: "
        f"the plan would need about {estimate:,.0f} items allowing about "
        f"{estimate * expected_rate:,.0f} deviations; this service sizes plans of at most "
        f"{max_sample_size:,} items and {MAX_ALLOWED_DEVIATIONS:,} allowed deviations",
    )


def _plan_warnings(
    model: Model,
    n: int,
    population_size: int | None,
    tolerable: Fraction,
    alpha: Fraction,
    max_n: int,
    zero_size: int | None,
) -> tuple[str, ...]:
    warnings: list[str] = []
    if population_size is not None:
        if n > population_size:
            warnings.append(
                f"The sample of {n:,} exceeds the population of {_items(population_size)}; "
                "the hypergeometric method sizes samples drawn without replacement."
            )
        elif n == population_size:
            warnings.append(
                f"The plan tests every item of the population ({n:,} of {n:,}): the result "
                "will be the population's exact deviation count, with no sampling risk."
            )
        elif 2 * n > population_size:
            warnings.append(
                f"The sample of {n:,} is more than half the population of "
                f"{_items(population_size)}; consider testing every item."
            )
        if (
            not model.needs_population
            and n <= population_size
            and (Fraction(n, population_size) > _LARGE_SAMPLING_FRACTION)
        ):
            warnings.append(
                "The sample is more than 10% of the population; the hypergeometric method "
                "would give a smaller sample (common practice threshold)."
            )
    # The zero-deviation plan's size z is the smallest n with P(X = 0) ≤ risk, a tail
    # that falls as n grows; so n > 3 z exactly when the condition holds at
    # m = floor((n − 1) / 3). One tail decides, and z itself is searched for only when
    # the warning is given, to be named in it.
    if zero_size is None:
        largest_small = (n - 1) // _LARGE_PLAN_FACTOR
        if largest_small >= 1 and _tail_within(model, tolerable, population_size, alpha, 0,
                                               largest_small):
            zero_plan = _plan_search(model, tolerable, Fraction(0), alpha, population_size,
                                     largest_small)
            zero_size = None if zero_plan is None else zero_plan[0]
    if zero_size is not None and n > _LARGE_PLAN_FACTOR * zero_size:
        warnings.append(
            f"The expected rate is close to the tolerable rate: the sample of {n:,} is more "
            f"than {_LARGE_PLAN_FACTOR} times the zero-deviation sample of {zero_size:,}; "
            "consider whether testing this control is efficient."
        )
    return tuple(warnings)
