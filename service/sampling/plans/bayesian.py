"""Planning and evaluation with prior evidence: a beta prior on the deviation rate.

The deviation rate ``p`` gets a Beta(a, b) prior; after ``d`` deviations in ``n`` items
the posterior is Beta(a + d, b + n − d) (the beta distribution is conjugate to the
binomial likelihood). The prior is given in one of three forms:

- ``uniform``: Beta(1, 1), every rate equally likely before testing;
- ``expected_rate`` with a ``strength`` ``s`` in equivalent items: the uniform prior plus
  ``s`` items observed at the expected rate ``e``, Beta(1 + e s, 1 + (1 − e) s);
- ``previous_sample`` of ``n0`` items with ``d0`` deviations, discounted by a ``weight``
  ``w`` in [0, 1]: Beta(1 + w d0, 1 + w (n0 − d0)), the power prior of Ibrahim & Chen
  (2000) on a uniform initial prior (``w = 0`` ignores the earlier sample, ``w = 1``
  pools it).

Evaluation
    The posterior probability that the rate is at most the tolerable rate,
    ``P(p ≤ t | data) = I_t(a + d, b + n − d)``, and the posterior upper limit, the
    ``confidence`` quantile of the posterior.
Planning
    The smallest ``n`` such that, if the expected deviations ``k = ceil(e n)`` are found,
    the posterior probability that ``p ≤ t`` reaches the confidence. The classical plan of
    :func:`service.sampling.attributes.size_sample` is always given beside it, with the
    classical risk of overreliance the Bayesian plan carries.

The posterior treats ``p`` as the rate of a large population: the population size, when
given, bounds the sample but does not enter the posterior (for a finite population the
posterior on its deviant count would be narrower, so the limits here are conservative
in that respect).

References
----------
Steele, A. (1992). *Audit Risk and Audit Evidence: The Bayesian Approach to Statistical
Auditing*. Academic Press.
Gelman, A. et al. (2013). *Bayesian Data Analysis*, 3rd ed., CRC Press, §2.4 (beta–binomial).
Ibrahim, J. G. & Chen, M.-H. (2000). Power prior distributions for regression models.
*Statistical Science* 15(1), 46–60.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from fractions import Fraction
from typing import Any

import numpy as np
from scipy import special

from service.sampling.attributes import (
    DEFAULT_MAX_SAMPLE_SIZE,
    MAX_ALLOWED_DEVIATIONS,
    Evaluation,
    SampleSizePlan,
    evaluate_sample,
    size_sample,
)
from service.sampling.distributions import deviant_items, resolve_model
from service.sampling.errors import ComputationTooLarge, InvalidInput, NoFeasiblePlan
from service.sampling.rates import ceil_product, exact_rate, floor_quotient

PRIOR_TYPES = ("uniform", "expected_rate", "previous_sample")
# Largest strength or previous sample accepted, in items.
MAX_PRIOR_ITEMS = 10_000_000

PRIOR_CAUTION = (
    "The prior is evidence like any other: its choice must be justified by evidence "
    "obtained before this test and documented, and the answer without it "
    "(classical_sample_size) considered beside it."
)


@dataclass(frozen=True)
class BetaPrior:
    """A Beta(alpha, beta) prior on the deviation rate, with the inputs it came from."""

    type: str
    alpha: float
    beta: float
    expected_rate: float | None = None
    strength: float | None = None
    sample_size: int | None = None
    deviations: int | None = None
    weight: float | None = None

    @property
    def mean(self) -> float:
        return self.alpha / (self.alpha + self.beta)


def beta_prior(
    type: str,
    *,
    expected_rate: float | None = None,
    strength: float | None = None,
    sample_size: int | None = None,
    deviations: int | None = None,
    weight: float | None = None,
) -> BetaPrior:
    """The beta prior for one of the three forms (see the module docstring).

    Examples
    --------
    >>> beta_prior("uniform").alpha, beta_prior("uniform").beta
    (1.0, 1.0)
    >>> p = beta_prior("previous_sample", sample_size=60, deviations=1, weight=0.5)
    >>> p.alpha, p.beta
    (1.5, 30.5)
    """
    given = {
        "expected_rate": expected_rate,
        "strength": strength,
        "sample_size": sample_size,
        "deviations": deviations,
        "weight": weight,
    }
    needs = {
        "uniform": (),
        "expected_rate": ("expected_rate", "strength"),
        "previous_sample": ("sample_size", "deviations", "weight"),
    }
    if type not in needs:
        raise InvalidInput("prior.type", f"prior.type {type!r} must be one of {list(PRIOR_TYPES)}")
    for name, value in given.items():
        if name in needs[type] and value is None:
            raise InvalidInput(f"prior.{name}", f"a {type} prior needs prior.{name}")
        if name not in needs[type] and value is not None:
            raise InvalidInput(f"prior.{name}", f"a {type} prior takes no prior.{name}")
    if type == "uniform":
        return BetaPrior(type, 1.0, 1.0)
    if type == "expected_rate":
        expected_rate, strength = float(expected_rate or 0.0), float(strength or 0.0)
        if not (0.0 <= expected_rate < 1.0):
            raise InvalidInput(
                "prior.expected_rate",
                f"prior.expected_rate {expected_rate!r} must be from 0 up to (not including) 1",
            )
        if not (0.0 < strength <= MAX_PRIOR_ITEMS):
            raise InvalidInput(
                "prior.strength",
                f"prior.strength {strength!r} must be above 0 and at most {MAX_PRIOR_ITEMS:,}",
            )
        return BetaPrior(
            type,
            1.0 + expected_rate * strength,
            1.0 + (1.0 - expected_rate) * strength,
            expected_rate=expected_rate,
            strength=strength,
        )
    sample_size, deviations, weight = (
        int(sample_size or 0),
        int(deviations or 0),
        float(weight or 0.0),
    )
    if not (1 <= sample_size <= MAX_PRIOR_ITEMS):
        raise InvalidInput(
            "prior.sample_size",
            f"prior.sample_size {sample_size} must be from 1 to {MAX_PRIOR_ITEMS:,}",
        )
    if not (0 <= deviations <= sample_size):
        raise InvalidInput(
            "prior.deviations",
            f"prior.deviations {deviations} must be from 0 to prior.sample_size {sample_size}",
        )
    if not (0.0 <= weight <= 1.0):
        raise InvalidInput("prior.weight", f"prior.weight {weight!r} must be from 0 to 1")
    return BetaPrior(
        type,
        1.0 + weight * deviations,
        1.0 + weight * (sample_size - deviations),
        sample_size=sample_size,
        deviations=deviations,
        weight=weight,
    )


def posterior_probability(prior: BetaPrior, n: int, d: int, tolerable_rate: float) -> float:
    """``P(p ≤ t)`` under the posterior Beta(a + d, b + n − d): ``I_t(a + d, b + n − d)``."""
    return float(special.betainc(prior.alpha + d, prior.beta + n - d, tolerable_rate))


def posterior_upper_limit(prior: BetaPrior, n: int, d: int, confidence: float) -> float:
    """The ``confidence`` quantile of the posterior Beta(a + d, b + n − d)."""
    return float(special.betaincinv(prior.alpha + d, prior.beta + n - d, confidence))


@dataclass(frozen=True)
class BayesianPlan(SampleSizePlan):
    """A plan with a prior. The inherited risks are the classical ones of this (n, k)."""

    prior: BetaPrior | None = None
    posterior_probability: float | None = None
    posterior_upper_limit: float | None = None
    classical_sample_size: int | None = None
    classical_allowed_deviations: int | None = None
    items_saved: int | None = None


@dataclass(frozen=True)
class BayesianEvaluation(Evaluation):
    """An evaluation with a prior, beside the classical one it extends."""

    prior: BetaPrior | None = None
    posterior_probability: float | None = None
    posterior_upper_limit: float | None = None


def _parent_fields(value: Any) -> dict[str, Any]:
    return {f.name: getattr(value, f.name) for f in fields(value)}


def size_with_prior(
    tolerable_rate: float,
    expected_rate: float,
    confidence: float,
    prior: BetaPrior,
    population_size: int | None = None,
    method: str | None = None,
    *,
    population_label: str | None = None,
    max_sample_size: int = DEFAULT_MAX_SAMPLE_SIZE,
) -> BayesianPlan:
    """The smallest sample whose expected result gives the posterior the confidence asked.

    Returns
    -------
    BayesianPlan
        ``sample_size`` and ``allowed_deviations`` (``ceil(e n)``) of the Bayesian plan,
        the posterior probability and upper limit if that many deviations are found, the
        classical plan's size, and the classical risks this ``(n, k)`` carries.

    Examples
    --------
    >>> plan = size_with_prior(0.05, 0.0, 0.95, beta_prior("uniform"))
    >>> plan.sample_size, plan.classical_sample_size, plan.items_saved
    (58, 59, 1)
    """
    classical = size_sample(
        tolerable_rate,
        expected_rate,
        confidence,
        population_size,
        method,
        population_label=population_label,
        max_sample_size=max_sample_size,
    )
    model = resolve_model(classical.method, population_size)
    expected, tolerable = exact_rate(expected_rate), exact_rate(tolerable_rate)
    max_n = max_sample_size if population_size is None else min(max_sample_size, population_size)
    n = _smallest_bayesian(prior, expected, tolerable_rate, confidence, max_n)
    k = ceil_product(expected, n)
    risk_over = float(model.lower_tail(k, n, tolerable, population_size))
    risk_under = 0.0 if expected == 0 else float(model.upper_tail(k, n, expected, population_size))
    warnings = [PRIOR_CAUTION]
    if risk_over > 1.0 - confidence:
        warnings.append(
            f"Without the prior this plan's risk of overreliance is {risk_over:.4g}, above "
            f"the {1.0 - confidence:.4g} asked for: the difference rests on the prior alone."
        )
    if population_size is not None:
        warnings.append(
            "The posterior treats the deviation rate as that of a large population: the "
            "population size bounds the sample but does not narrow the posterior."
        )
    if n > classical.sample_size:
        warnings.append(
            "The prior expects more deviations than the plan's expected rate: it asks for a "
            "larger sample than the classical plan."
        )
    return BayesianPlan(
        method=model.name,
        tolerable_rate=tolerable_rate,
        expected_rate=expected_rate,
        confidence=confidence,
        population_size=population_size,
        population_label=population_label,
        sample_size=n,
        allowed_deviations=k,
        achieved_confidence=1.0 - risk_over,
        risk_of_overreliance=risk_over,
        risk_of_underreliance=risk_under,
        warnings=tuple(warnings),
        tolerable_deviant_items=(
            None if population_size is None else deviant_items(tolerable, population_size)
        ),
        prior=prior,
        posterior_probability=posterior_probability(prior, n, k, tolerable_rate),
        posterior_upper_limit=posterior_upper_limit(prior, n, k, confidence),
        classical_sample_size=classical.sample_size,
        classical_allowed_deviations=classical.allowed_deviations,
        items_saved=classical.sample_size - n,
    )


def _smallest_bayesian(
    prior: BetaPrior, expected: Fraction, tolerable_rate: float, confidence: float, max_n: int
) -> int:
    """Smallest n with ``I_t(a + k, b + n − k) ≥ confidence`` for ``k = ceil(e n)``.

    For a fixed k the posterior probability grows with n, so within each block of n that
    share one k the condition holds from some n on: the first block that holds at its
    largest n holds the answer, found by bisection inside it (the search of
    :func:`service.sampling.attributes.size_sample`, with the posterior in place of the
    sampling distribution).
    """

    def holds(k: Any, n: Any) -> Any:
        return special.betainc(prior.alpha + k, prior.beta + n - k, tolerable_rate) >= confidence

    def first_in(k: int, low: int, high: int) -> int:
        while low < high:
            mid = (low + high) // 2
            if holds(k, mid):
                high = mid
            else:
                low = mid + 1
        return low

    if expected == 0:
        if holds(0, max_n):
            return first_in(0, 1, max_n)
        raise _no_bayesian_plan(max_n, confidence)
    first_k, chunk = 1, 16
    while first_k <= MAX_ALLOWED_DEVIATIONS:
        ks = list(range(first_k, first_k + chunk))
        block_low = [min(floor_quotient(k - 1, expected) + 1, max_n + 1) for k in ks]
        if block_low[0] > max_n:
            break
        block_high = [min(floor_quotient(k, expected), max_n) for k in ks]
        k_arr, high_arr = np.array(ks), np.array(block_high)
        nonempty = np.array(block_low) <= high_arr
        hits = np.flatnonzero(nonempty & holds(k_arr, np.maximum(high_arr, k_arr)))
        if hits.size:
            i = int(hits[0])
            return first_in(ks[i], block_low[i], block_high[i])
        first_k += chunk
        chunk = min(4 * chunk, 4096)
    else:
        raise ComputationTooLarge(
            "prior",
            f"the Bayesian plan would allow more than {MAX_ALLOWED_DEVIATIONS:,} deviations: "
            "the prior expects too many deviations for this tolerable rate",
        )
    raise _no_bayesian_plan(max_n, confidence)


def _no_bayesian_plan(max_n: int, confidence: float) -> NoFeasiblePlan:
    return NoFeasiblePlan(
        "prior",
        f"with this prior no sample of at most {max_n:,} items reaches a posterior "
        f"probability of {confidence!r} that the rate is at most the tolerable rate when the "
        "expected deviations are found: the prior expects too many deviations",
    )


def evaluate_with_prior(
    sample_size: int,
    deviations: int,
    confidence: float,
    prior: BetaPrior,
    tolerable_rate: float | None = None,
    population_size: int | None = None,
    method: str | None = None,
    *,
    population_label: str | None = None,
    expected_rate: float | None = None,
) -> BayesianEvaluation:
    """The classical evaluation with the posterior beside it.

    Examples
    --------
    >>> result = evaluate_with_prior(58, 0, 0.95, beta_prior("uniform"), 0.05)
    >>> round(result.posterior_probability, 4)
    0.9515
    """
    classical = evaluate_sample(
        sample_size,
        deviations,
        confidence,
        tolerable_rate,
        population_size,
        method,
        population_label=population_label,
        expected_rate=expected_rate,
    )
    warnings = [*classical.warnings, PRIOR_CAUTION]
    if population_size is not None:
        warnings.append(
            "The posterior treats the deviation rate as that of a large population: the "
            "population size does not narrow the posterior."
        )
    return BayesianEvaluation(
        **{**_parent_fields(classical), "warnings": tuple(warnings)},
        prior=prior,
        posterior_probability=(
            None
            if tolerable_rate is None
            else posterior_probability(prior, sample_size, deviations, tolerable_rate)
        ),
        posterior_upper_limit=posterior_upper_limit(prior, sample_size, deviations, confidence),
    )
