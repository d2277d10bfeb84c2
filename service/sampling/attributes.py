"""Attribute sampling for tests of controls: sample sizes and evaluation.

A test of controls asks, one-sided, whether the population deviation rate is
at or below the *tolerable deviation rate* ``t``. The sample size plan and the
evaluation below use one definition throughout, so that they always agree.

Sample size (``size_sample``)
    The smallest ``n`` such that, with ``k = ceil(e × n)`` deviations allowed
    (``e`` the expected population deviation rate),

        P(X ≤ k) ≤ 1 − confidence  when the true rate equals ``t``,

    X following the chosen model (see :mod:`service.sampling.distributions`).
    ``e = 0`` gives the zero-deviation (discovery) plan. ``P(X ≤ k)`` at ``t``
    is the *risk of overreliance* the plan accepts; ``P(X > k)`` at ``e`` is
    its *risk of underreliance*.

Evaluation (``evaluate_sample``)
    For ``d`` deviations in ``n`` items, the *upper deviation limit* is the
    exact one-sided upper confidence bound for the rate; the result supports
    reliance exactly when ``P(X ≤ d) ≤ 1 − confidence`` at the tolerable rate,
    which is the sizing condition again. Hence, for a plan from
    ``size_sample``, ``k`` deviations support reliance and ``k + 1`` do not.

References
----------
AICPA, *Audit Guide: Audit Sampling* (2019), chapter 3 and tables A-1 to A-4.
Clopper, C. J. & Pearson, E. S. (1934). The use of confidence or fiducial
limits illustrated in the case of the binomial. *Biometrika* 26(4), 404–413.
Wright, T. (1991). Exact confidence bounds when sampling from small finite
universes: an easy reference based on the hypergeometric distribution (monograph).
Garwood, F. (1936). Fiducial limits for the Poisson distribution.
*Biometrika* 28(3/4), 437–442.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache, partial
from typing import Any

import numpy as np
from scipy import special, stats

try:
    # the quantile scipy.stats.beta.ppf calls, without its generic argument handling
    from scipy.special._ufuncs import _beta_ppf
except ImportError:  # pragma: no cover - a scipy that moved it
    _beta_ppf = stats.beta.ppf

from service.sampling import hypergeometric
from service.sampling.distributions import MODELS, Model, deviant_items, resolve_model
from service.sampling.errors import ComputationTooLarge, InvalidInput, NoFeasiblePlan
from service.sampling.rates import ceil_product, exact_rate, floor_quotient
from service.sampling.ties import at_most, at_most_each, hypergeometric_above

DEFAULT_MAX_SAMPLE_SIZE = 10_000_000
# A computation cap: a plan allowing more deviations than this (a sample of
# hundreds of thousands of items) is refused rather than searched for.
MAX_ALLOWED_DEVIATIONS = 10_000
# Sampling fraction above which the with-replacement models lose materially
# against the hypergeometric one (common practice threshold, not a standard).
_LARGE_SAMPLING_FRACTION = Fraction(1, 10)
_LARGE_PLAN_FACTOR = 3
# Expected deviations e × n below which a plan allowing ceil(e × n) = 1 deviation is
# flagged: the expected rate adds a deviation the caller probably did not mean.
_TINY_EXPECTED_COUNT = Fraction(1, 100)


@dataclass(frozen=True)
class Interval:
    """A closed interval ``[low, high]`` of deviation rates."""

    low: float
    high: float


@dataclass(frozen=True)
class SampleSizePlan:
    """A test-of-controls plan: the inputs, repeated, beside the answer."""

    method: str
    tolerable_rate: float
    expected_rate: float
    confidence: float
    population_size: int | None
    population_label: str | None
    sample_size: int
    allowed_deviations: int
    achieved_confidence: float
    risk_of_overreliance: float
    risk_of_underreliance: float
    warnings: tuple[str, ...]
    tolerable_deviant_items: int | None = None

    @property
    def whole_population(self) -> bool:
        """True when the plan tests every item of the population (no sampling risk)."""
        return self.population_size is not None and self.sample_size == self.population_size


@dataclass(frozen=True)
class Evaluation:
    """The evaluation of a finished test: the inputs, repeated, beside the answer."""

    method: str
    population_size: int | None
    population_label: str | None
    sample_size: int
    deviations: int
    confidence: float
    tolerable_rate: float | None
    sample_deviation_rate: float
    upper_deviation_limit: float
    upper_deviation_count: int | None
    allowance_for_sampling_risk: float
    interval: Interval
    risk_at_tolerable_rate: float | None
    supports_reliance: bool | None
    warnings: tuple[str, ...]
    expected_rate: float | None = None
    planned_allowed_deviations: int | None = None
    whole_population: bool = False
    tolerable_deviant_items: int | None = None


class _TooManyDeviations(Exception):
    """Internal signal: the plan search passed MAX_ALLOWED_DEVIATIONS."""


# --- validation -------------------------------------------------------------


def _items(count: int) -> str:
    return f"{count:,} item" + ("" if count == 1 else "s")


def _check_open_unit(field: str, value: float) -> None:
    if not (0.0 < value < 1.0):
        raise InvalidInput(field, f"{field} {value!r} must be strictly between 0 and 1")


#: Confidence levels accepted: from an even chance to a risk of one in a million.  Beyond
#: them the quantiles leave the floating point range.
MIN_CONFIDENCE = 0.5
MAX_CONFIDENCE = 0.999999

#: Smallest tolerable rate accepted: a hundredth of a percent.
MIN_TOLERABLE_RATE = 0.0001


def _check_confidence(value: float) -> None:
    _check_open_unit("confidence", value)
    if not (MIN_CONFIDENCE <= value <= MAX_CONFIDENCE):
        raise InvalidInput(
            "confidence",
            f"confidence {value!r} must be from {MIN_CONFIDENCE:g} to {MAX_CONFIDENCE:g}",
        )


def _check_tolerable_rate(value: float) -> None:
    _check_open_unit("tolerable_rate", value)
    if value < MIN_TOLERABLE_RATE:
        raise InvalidInput(
            "tolerable_rate",
            f"tolerable_rate {value!r} must be at least {MIN_TOLERABLE_RATE:g}",
        )


def _check_population(population_size: int | None) -> None:
    if population_size is not None and population_size < 1:
        raise InvalidInput(
            "population.size", f"population.size {population_size} must be at least 1"
        )


# --- sizing -----------------------------------------------------------------


def _bisect_smallest(holds: Callable[[int], bool], lo: int, hi: int) -> int:
    """Smallest n in [lo, hi] with ``holds(n)``, by bisection, for ``holds`` monotone
    and true at ``hi``."""
    while lo < hi:
        mid = (lo + hi) // 2
        if holds(mid):
            hi = mid
        else:
            lo = mid + 1
    return lo


def _smallest_satisfying(holds: Callable[[int], bool], lo: int, hi: int) -> int:
    """Smallest n in [lo, hi] with ``holds(n)``, for ``holds`` monotone and true at ``hi``.

    The bracket is grown from ``lo`` by doubling before the bisection, so the
    distributions are evaluated near the answer and not at ``hi``, which may be
    very large (a population of 10^12 items).
    """
    step = 1
    while lo + step < hi and not holds(lo + step):
        lo += step + 1
        step *= 2
    hi = min(hi, lo + step)
    return _bisect_smallest(holds, lo, hi)


def _smallest_satisfying_below(
    holds: Callable[[int], bool], lo: int, hi: int, first_step: int = 1
) -> int:
    """Smallest n in [lo, hi] with ``holds(n)``, for ``holds`` monotone and true at ``hi``.

    Searched downwards from ``hi`` by doubling steps, the first of ``first_step``, then
    by bisection: when ``hi`` is a close upper bound of the answer (the binomial plan for
    a hypergeometric one) and ``first_step`` about the distance to it, a few evaluations
    settle it.
    """
    step = max(1, first_step)
    while hi - step >= lo and holds(hi - step):
        hi -= step
        step *= 2
    lo = max(lo, hi - step + 1)
    return _bisect_smallest(holds, lo, hi)


def _largest_qualifying(qualifies: Callable[[int], bool], lo: int, hi: int, guess: int) -> int:
    """Largest m in [lo, hi] with ``qualifies(m)``, for ``qualifies`` true at ``lo`` and
    monotone (true, then false).

    The search starts at ``guess`` and moves away from it by doubling steps until the
    answer is bracketed, then bisects; a guess within a few units of the answer settles
    it in a few evaluations, and any guess gives the same answer.
    """
    probe = min(max(guess, lo), hi)
    if probe > lo:
        step = 1
        if qualifies(probe):
            lo = probe
            while lo + step <= hi:
                if not qualifies(lo + step):
                    hi = lo + step - 1
                    break
                lo += step
                step *= 2
        else:
            hi = probe - 1
            while hi - step + 1 > lo:
                below = hi - step + 1
                if qualifies(below):
                    lo = below
                    break
                hi = below - 1
                step *= 2
    while lo < hi:
        mid = (lo + hi + 1) // 2
        if qualifies(mid):
            lo = mid
        else:
            hi = mid - 1
    return lo


def _smallest_qualifying(qualifies: Callable[[int], bool], lo: int, hi: int, guess: int) -> int:
    """Smallest m in [lo, hi] with ``qualifies(m)``, for ``qualifies`` true at ``hi`` and
    monotone (false, then true); searched from ``guess`` as :func:`_largest_qualifying`."""
    return -_largest_qualifying(lambda m: qualifies(-m), -hi, -lo, -guess)


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


def _binomial_plan_guess(
    rate: float, expected: Fraction, alpha: float, max_n: int, max_deviations: int
) -> tuple[int, int] | None:
    """The binomial plan at ``rate``, decided in doubles (no exact decision near a tie):
    a starting point for the exact hypergeometric search, not an answer. None when it
    would allow more than ``max_deviations`` deviations or need more than ``max_n`` items.
    """

    def holds(k: int, n: int) -> bool:
        return bool(k < n and special.betaincc(k + 1, n - k, rate) <= alpha)

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
        feasible = (block_low <= block_high) & at_most_each(
            "hypergeometric", ks, ns, tail(ks, ns), tolerable, population_size, alpha
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


# --- evaluation -------------------------------------------------------------


# The bounds below take the risk ``alpha`` (one tail), computed exactly from the written
# confidence and rounded once, and use the inverse of the tail that holds it, so that a
# confidence of 99.9999% does not reach them as the rounded double 1 − 0.999999.


def _binomial_upper(d: int, n: int, alpha: float) -> float:
    """Clopper–Pearson one-sided upper bound with risk ``alpha``."""
    if d == n:
        return 1.0
    # the inverse scipy.stats.beta.isf calls, without its generic argument handling
    return float(special.betainccinv(d + 1, n - d, alpha))


def _binomial_lower(d: int, n: int, alpha: float) -> float:
    """Clopper–Pearson one-sided lower bound with risk ``alpha``."""
    if d == 0:
        return 0.0
    return float(_beta_ppf(alpha, d, n - d + 1))


def _poisson_upper(d: int, n: int, alpha: float) -> float:
    """Garwood upper bound on the rate, ``λ`` with ``Q(d + 1, λ) = alpha``, over n, capped at 1."""
    return min(1.0, float(special.gammainccinv(d + 1, alpha)) / n)


def _poisson_lower(d: int, n: int, alpha: float) -> float:
    """Garwood lower bound on the rate, ``λ`` with ``P(d, λ) = alpha``, over n."""
    if d == 0:
        return 0.0
    return min(1.0, float(special.gammaincinv(d, alpha)) / n)


def _hypergeometric_upper_count(d: int, n: int, size: int, alpha: Fraction) -> int:
    """Largest deviant count M with P(X ≤ d | M) > alpha (exact).

    Searched from the Clopper–Pearson bound ``p_U N``, which sampling without
    replacement rarely exceeds by much: the bracket grows from there by doubling steps
    and is then bisected, so the answer is the one a bisection over ``[d, N − n + d]``
    gives, in a few evaluations instead of ``log2 N``.
    """
    lo, hi = d, size - (n - d)  # P(X ≤ d | M = d) = 1, so lo always qualifies

    def qualifies(m: int) -> bool:
        value = float(hypergeometric.cdf(d, size, m, n))
        return hypergeometric_above(d, size, m, n, alpha, value, upper=False)

    guess = math.floor(_binomial_upper(d, n, float(alpha)) * size)
    return _largest_qualifying(qualifies, lo, hi, guess)


def _hypergeometric_lower_count(d: int, n: int, size: int, alpha: Fraction) -> int:
    """Smallest deviant count M with P(X ≥ d | M) > alpha (exact), searched from the
    Clopper–Pearson lower bound as :func:`_hypergeometric_upper_count` is."""
    if d == 0:
        return 0
    lo, hi = d, size - (n - d)  # P(X ≥ d | M = hi) = 1, so hi always qualifies

    def qualifies(m: int) -> bool:
        value = float(hypergeometric.sf(d - 1, size, m, n))
        return hypergeometric_above(d - 1, size, m, n, alpha, value, upper=True)

    guess = math.ceil(_binomial_lower(d, n, float(alpha)) * size)
    return _smallest_qualifying(qualifies, lo, hi, guess)


@dataclass(frozen=True)
class _Limits:
    upper: float
    upper_count: int | None
    interval: Interval


def _binomial_limits(d: int, n: int, alpha: Fraction, size: int | None) -> _Limits:
    half = float(alpha / 2)
    return _Limits(
        _binomial_upper(d, n, float(alpha)),
        None,
        Interval(_binomial_lower(d, n, half), _binomial_upper(d, n, half)),
    )


def _poisson_limits(d: int, n: int, alpha: Fraction, size: int | None) -> _Limits:
    half = float(alpha / 2)
    return _Limits(
        _poisson_upper(d, n, float(alpha)),
        None,
        Interval(_poisson_lower(d, n, half), _poisson_upper(d, n, half)),
    )


def _hypergeometric_limits(d: int, n: int, alpha: Fraction, size: int | None) -> _Limits:
    if size is None:
        raise InvalidInput("population.size", "the hypergeometric method needs a population size")
    upper = _hypergeometric_upper_count(d, n, size, alpha)
    low = _hypergeometric_lower_count(d, n, size, alpha / 2)
    high = _hypergeometric_upper_count(d, n, size, alpha / 2)
    return _Limits(upper / size, upper, Interval(low / size, high / size))


_LIMITS: dict[str, Callable[[int, int, Fraction, int | None], _Limits]] = {
    "binomial": _binomial_limits,
    "hypergeometric": _hypergeometric_limits,
    "poisson": _poisson_limits,
}


@lru_cache(maxsize=PLAN_MEMO_SIZE)
def _limits(method: str, d: int, n: int, alpha: Fraction, size: int | None) -> _Limits:
    """The limits of ``d`` deviations in ``n`` items at risk ``alpha``: a pure function of
    its arguments, kept in a bounded memo as the plans are."""
    return _LIMITS[method](d, n, alpha, size)


@lru_cache(maxsize=PLAN_MEMO_SIZE)
def _reliance(method: str, d: int, n: int, tolerable: Fraction, size: int | None,
              alpha: Fraction) -> tuple[float, bool]:
    """The risk at the tolerable rate, ``P(X ≤ d)``, and whether it is at most ``alpha``
    (decided exactly near a tie); kept in a bounded memo as the limits are."""
    decision = at_most(method, d, n, tolerable, size, alpha)
    return decision.value, decision.holds


def evaluate_sample(
    sample_size: int,
    deviations: int,
    confidence: float = 0.95,
    tolerable_rate: float | None = None,
    population_size: int | None = None,
    method: str | None = None,
    *,
    population_label: str | None = None,
    expected_rate: float | None = None,
) -> Evaluation:
    """Evaluate the deviations found in a test of controls.

    Parameters
    ----------
    sample_size : int
        Items tested, ``n ≥ 1`` (at most N when a population size is given).
    deviations : int
        Deviations found, ``0 ≤ d ≤ n``.
    confidence : float
        Confidence of the limits, in (0, 1).
    tolerable_rate : float, optional
        When given, the result says whether the sample supports reliance.
    population_size : int, optional
        N, required by the hypergeometric method (the default when given).
    method : {"binomial", "hypergeometric", "poisson"}, optional
    expected_rate : float, optional
        The expected population deviation rate of the plan, in [0, tolerable rate): the
        result then reports the deviations the plan allowed for this sample size,
        ``ceil(expected_rate × n)``, beside those found.

    Returns
    -------
    Evaluation

    Notes
    -----
    Upper deviation limit: binomial, the Clopper–Pearson bound, the ``p`` with
    ``P(X ≤ d | p) = 1 − confidence``; hypergeometric, ``M_U / N`` with
    ``M_U`` the largest deviant count for which ``P(X ≤ d | M) > 1 − confidence``;
    Poisson, ``λ_U / n`` with ``P(Y ≤ d | λ_U) = 1 − confidence`` (Garwood).
    The two-sided interval puts ``(1 − confidence) / 2`` in each tail.
    The sample supports reliance when ``P(X ≤ d) ≤ 1 − confidence`` at the
    tolerable rate, the same condition the sample size plan uses.

    When every item of the population was tested (``n = N``) there is no sampling risk:
    the deviation rate is known exactly, the limits and both ends of the interval are
    ``d / N`` and the allowance is 0, whatever the model; reliance is supported when
    ``d`` is below the ``ceil(t N)`` deviant items the population holds at the tolerable
    rate (the hypergeometric condition at ``n = N``).

    References
    ----------
    Clopper & Pearson (1934); Wright (1991); Garwood (1936); AICPA,
    *Audit Guide: Audit Sampling* (2019), tables A-3 and A-4.

    Examples
    --------
    >>> result = evaluate_sample(100, 2, 0.95)
    >>> round(result.upper_deviation_limit, 4)
    0.0616
    """
    if sample_size < 1:
        raise InvalidInput("sample_size", f"sample_size {sample_size} must be at least 1")
    if not (0 <= deviations <= sample_size):
        raise InvalidInput(
            "deviations",
            f"deviations {deviations} must be between 0 and sample_size {sample_size}",
        )
    _check_confidence(confidence)
    if tolerable_rate is not None:
        _check_tolerable_rate(tolerable_rate)
    _check_population(population_size)
    if population_size is not None and sample_size > population_size:
        raise InvalidInput(
            "sample_size",
            f"sample_size {sample_size} exceeds population.size {population_size}",
        )
    if expected_rate is not None and not (
        0.0 <= expected_rate < (1.0 if tolerable_rate is None else tolerable_rate)
    ):
        raise InvalidInput(
            "expected_rate",
            f"expected_rate {expected_rate!r} must be at least 0 and below "
            + ("1" if tolerable_rate is None else f"tolerable_rate {tolerable_rate!r}"),
        )
    model = resolve_model(method, population_size)
    whole = population_size is not None and sample_size == population_size

    rate = Fraction(deviations, sample_size)
    if whole:
        exact = float(rate)
        count = deviations if model.needs_population else None
        limits = _Limits(exact, count, Interval(exact, exact))
    else:
        limits = _limits(model.name, deviations, sample_size, 1 - exact_rate(confidence),
                         population_size)
    upper = (
        Fraction(limits.upper_count, population_size)
        if limits.upper_count is not None and population_size is not None
        else Fraction(limits.upper)
    )
    upper = rate if whole else max(upper, rate)

    risk: float | None = None
    supports: bool | None = None
    tolerable_count: int | None = None
    if tolerable_rate is not None:
        if population_size is not None:
            tolerable_count = deviant_items(exact_rate(tolerable_rate), population_size)
        if whole and tolerable_count is not None:
            # Every item tested: the population holds exactly d deviant items.
            risk = 1.0 if deviations >= tolerable_count else 0.0
            supports = deviations < tolerable_count
        else:
            risk, supports = _reliance(
                model.name, deviations, sample_size, exact_rate(tolerable_rate),
                population_size, 1 - exact_rate(confidence),
            )

    warnings: list[str] = []
    if whole and not model.needs_population:
        warnings.append(
            f"Every item of the population was tested, so the {model.name} model (sampling "
            "with replacement) does not apply: the limits are the population's exact "
            "deviation rate."
        )
    if model.name == "poisson" and rate > Fraction(1, 10):
        warnings.append(
            "The sample deviation rate is above 10%, where the Poisson approximation is "
            "markedly conservative; the binomial or hypergeometric method is more accurate."
        )
    if model.name == "poisson" and limits.upper >= 1.0 and not whole:
        warnings.append("The Poisson bound reached 1 and was capped there.")
    if (
        population_size is not None
        and not whole
        and not model.needs_population
        and Fraction(sample_size, population_size) > _LARGE_SAMPLING_FRACTION
    ):
        warnings.append(
            "The sample is more than 10% of the population; the hypergeometric method "
            "would give a tighter limit (common practice threshold)."
        )
    planned: int | None = None
    if expected_rate is not None:
        planned = ceil_product(exact_rate(expected_rate), sample_size)

    return Evaluation(
        method=model.name,
        population_size=population_size,
        population_label=population_label,
        sample_size=sample_size,
        deviations=deviations,
        confidence=confidence,
        tolerable_rate=tolerable_rate,
        sample_deviation_rate=float(rate),
        upper_deviation_limit=float(upper),
        upper_deviation_count=limits.upper_count,
        # one rounding, of the exact difference
        allowance_for_sampling_risk=float(upper - rate),
        interval=limits.interval,
        risk_at_tolerable_rate=risk,
        supports_reliance=supports,
        warnings=tuple(warnings),
        expected_rate=expected_rate,
        planned_allowed_deviations=planned,
        whole_population=whole,
        tolerable_deviant_items=tolerable_count,
    )


__all__ = [
    "DEFAULT_MAX_SAMPLE_SIZE",
    "Evaluation",
    "Interval",
    "SampleSizePlan",
    "evaluate_sample",
    "size_sample",
]
