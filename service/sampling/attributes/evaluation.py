"""Evaluation of the deviations found: upper and lower deviation limits (Clopper-Pearson
style exact limits of each model), the allowance for sampling risk and whether the sample
supports reliance."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache

from scipy import special, stats

from service.sampling import hypergeometric
from service.sampling.attributes.checks import (
    _LARGE_SAMPLING_FRACTION,
    _check_confidence,
    _check_population,
    _check_tolerable_rate,
)
from service.sampling.attributes.results import Evaluation, Interval
from service.sampling.attributes.searches import _largest_qualifying, _smallest_qualifying
from service.sampling.attributes.sizing import PLAN_MEMO_SIZE
from service.sampling.distributions import deviant_items, resolve_model
from service.sampling.errors import InvalidInput
from service.sampling.rates import ceil_product, exact_rate
from service.sampling.ties import at_most, hypergeometric_above

try:
    # the quantile scipy.stats.beta.ppf calls, without its generic argument handling
    from scipy.special._ufuncs import _beta_ppf
except ImportError:  # pragma: no cover - a scipy that moved it
    _beta_ppf = stats.beta.ppf


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
