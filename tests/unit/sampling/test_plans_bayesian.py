"""Bayesian planning and evaluation, checked against scipy.stats.beta and by hand.

scipy.stats.beta is the general-purpose reference for the posterior; the uniform-prior
zero-deviation plan is derived by hand: with Beta(1, 1) and no deviation in n items the
posterior is Beta(1, n + 1), so P(p ≤ t) = 1 − (1 − t)^(n + 1); at t = 5% and 95% this
first reaches 0.95 at n + 1 = 59 (0.95^59 ≈ 0.0485, 0.95^58 ≈ 0.0510), so n = 58, one
fewer than the classical 59 (1 − 0.95^59 ≥ 0.95 is the classical condition at n = 59).
"""

from __future__ import annotations

import math

import pytest
from scipy import stats

from service.sampling.attributes import evaluate_sample, size_sample
from service.sampling.errors import InvalidInput, NoFeasiblePlan
from service.sampling.plans.bayesian import (
    PRIOR_CAUTION,
    beta_prior,
    evaluate_with_prior,
    size_with_prior,
)


def test_uniform_prior_zero_deviation_plan_by_hand() -> None:
    assert 1 - 0.95**59 >= 0.95 > 1 - 0.95**58
    plan = size_with_prior(0.05, 0.0, 0.95, beta_prior("uniform"))
    assert plan.sample_size == 58
    assert plan.classical_sample_size == 59
    assert plan.items_saved == 1
    assert plan.posterior_probability == pytest.approx(1 - 0.95**59, rel=1e-12)
    # The classical risk of 58 items with none allowed: 0.95^58 > 5%.
    assert plan.risk_of_overreliance == pytest.approx(0.95**58, rel=1e-9)
    assert PRIOR_CAUTION in plan.warnings
    assert any("rests on the prior alone" in w for w in plan.warnings)


def _scan(a: float, b: float, t: float, e: float, confidence: float) -> int:
    n = 1
    while True:
        k = math.ceil(round(e * n, 9))
        if stats.beta.cdf(t, a + k, b + n - k) >= confidence:
            return n
        n += 1


@pytest.mark.parametrize(
    ("prior", "a", "b"),
    [
        (beta_prior("uniform"), 1, 1),
        (beta_prior("expected_rate", expected_rate=0.01, strength=50), 1.5, 50.5),
        (beta_prior("previous_sample", sample_size=93, deviations=1, weight=0.5), 1.5, 47),
        (beta_prior("previous_sample", sample_size=93, deviations=1, weight=0.0), 1, 1),
    ],
)
@pytest.mark.parametrize(("t", "e"), [(0.05, 0.0), (0.05, 0.01), (0.10, 0.02)])
def test_plans_against_a_scan_with_scipy_beta(
    prior, a: float, b: float, t: float, e: float
) -> None:  # type: ignore[no-untyped-def]
    assert (prior.alpha, prior.beta) == pytest.approx((a, b))
    plan = size_with_prior(t, e, 0.95, prior)
    assert plan.sample_size == _scan(a, b, t, e, 0.95)
    n, k = plan.sample_size, plan.allowed_deviations
    assert k == math.ceil(round(e * n, 9))
    assert plan.posterior_probability == pytest.approx(
        stats.beta.cdf(t, a + k, b + n - k), rel=1e-9
    )
    assert plan.posterior_upper_limit == pytest.approx(
        stats.beta.ppf(0.95, a + k, b + n - k), rel=1e-9
    )
    assert plan.classical_sample_size == size_sample(t, e, 0.95).sample_size
    assert plan.items_saved == plan.classical_sample_size - n
    assert plan.risk_of_overreliance == pytest.approx(stats.binom.cdf(k, n, t), rel=1e-9)


def test_evaluation_against_scipy_beta_beside_the_classical_one() -> None:
    prior = beta_prior("previous_sample", sample_size=60, deviations=0, weight=0.8)
    result = evaluate_with_prior(80, 2, 0.95, prior, 0.06, 3000)
    a, b = 1 + 0.8 * 0, 1 + 0.8 * 60
    assert result.posterior_probability == pytest.approx(
        stats.beta.cdf(0.06, a + 2, b + 78), rel=1e-9
    )
    assert result.posterior_upper_limit == pytest.approx(
        stats.beta.ppf(0.95, a + 2, b + 78), rel=1e-9
    )
    classical = evaluate_sample(80, 2, 0.95, 0.06, 3000)
    assert result.upper_deviation_limit == classical.upper_deviation_limit
    assert result.supports_reliance == classical.supports_reliance


def test_a_pessimistic_prior_costs_items_and_says_so() -> None:
    prior = beta_prior("expected_rate", expected_rate=0.04, strength=100)
    plan = size_with_prior(0.05, 0.0, 0.95, prior)
    assert plan.sample_size > plan.classical_sample_size
    assert plan.items_saved is not None and plan.items_saved < 0


def test_a_prior_that_never_reaches_the_confidence_is_refused() -> None:
    prior = beta_prior("expected_rate", expected_rate=0.5, strength=1_000_000)
    with pytest.raises(NoFeasiblePlan) as caught:
        size_with_prior(0.05, 0.0, 0.95, prior, population_size=5000)
    assert caught.value.field == "prior"


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"type": "flat"}, "prior.type"),
        (
            {"type": "previous_sample", "sample_size": 60, "deviations": 0, "weight": 1.5},
            "prior.weight",
        ),
        (
            {"type": "previous_sample", "sample_size": 60, "deviations": 0, "weight": -0.1},
            "prior.weight",
        ),
        (
            {"type": "previous_sample", "sample_size": 60, "deviations": 61, "weight": 1.0},
            "prior.deviations",
        ),
        ({"type": "previous_sample", "sample_size": 60, "deviations": 0}, "prior.weight"),
        ({"type": "expected_rate", "expected_rate": 0.01}, "prior.strength"),
        ({"type": "expected_rate", "expected_rate": 0.01, "strength": 0}, "prior.strength"),
        ({"type": "uniform", "weight": 0.5}, "prior.weight"),
    ],
)
def test_bad_priors_name_the_field(kwargs: dict, field: str) -> None:  # type: ignore[type-arg]
    with pytest.raises(InvalidInput) as caught:
        beta_prior(**kwargs)
    assert caught.value.field == field


def test_the_expected_deviation_search_agrees_with_a_plain_scan_near_the_saw_tooth() -> None:
    # Rates where the allowed deviations step up often: the block search must give the
    # same first n as scanning every n with scipy.stats.beta.
    for t, e in ((0.06, 0.03), (0.08, 0.05), (0.2, 0.1)):
        prior = beta_prior("expected_rate", expected_rate=e, strength=20)
        plan = size_with_prior(t, e, 0.90, prior)
        assert plan.sample_size == _scan(prior.alpha, prior.beta, t, e, 0.90)
