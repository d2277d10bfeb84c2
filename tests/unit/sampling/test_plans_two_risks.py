"""Plans bounding both risks, checked against a brute-force scan over (n, k).

The scan uses scipy.stats.binom and scipy.stats.hypergeom (general-purpose reference
implementations) and tries every k from 0 to n at each n, independently of the
service's bisection.
"""

from __future__ import annotations

import math

import pytest
from scipy import stats

from service.sampling.attributes import evaluate_sample, size_sample
from service.sampling.errors import ComputationTooLarge, InvalidInput, NoFeasiblePlan
from service.sampling.plans.two_risks import size_two_risks


def _brute_force(
    t: float, e: float, confidence: float, beta: float, population: int | None = None
) -> tuple[int, int]:
    alpha = 1 - confidence
    n = 1
    while True:
        if population is None:
            over = stats.binom.cdf(range(n + 1), n, t)
            under = stats.binom.sf(range(n + 1), n, e)
        else:
            deviant_t = math.ceil(round(t * population, 9))
            deviant_e = math.ceil(round(e * population, 9))
            over = stats.hypergeom.cdf(range(n + 1), population, deviant_t, n)
            under = stats.hypergeom.sf(range(n + 1), population, deviant_e, n)
        feasible = [k for k in range(n + 1) if over[k] <= alpha and under[k] <= beta]
        if feasible:
            return n, max(feasible)
        n += 1


@pytest.mark.parametrize(
    ("t", "e", "confidence", "beta"),
    [
        (0.05, 0.01, 0.95, 0.10),
        (0.05, 0.01, 0.95, 0.20),
        (0.10, 0.02, 0.90, 0.10),
        (0.07, 0.0, 0.95, 0.05),
        (0.08, 0.03, 0.95, 0.25),
    ],
)
def test_binomial_plan_is_the_brute_force_plan(
    t: float, e: float, confidence: float, beta: float
) -> None:
    plan = size_two_risks(t, e, confidence, beta)
    assert (plan.sample_size, plan.allowed_deviations) == _brute_force(t, e, confidence, beta)
    n, k = plan.sample_size, plan.allowed_deviations
    assert plan.risk_of_overreliance == pytest.approx(stats.binom.cdf(k, n, t), rel=1e-9)
    expected_under = stats.binom.sf(k, n, e) if e else 0.0
    assert plan.risk_of_underreliance == pytest.approx(expected_under, rel=1e-9, abs=1e-15)
    assert plan.classical_sample_size == size_sample(t, e, confidence).sample_size


def test_hypergeometric_plan_is_the_brute_force_plan() -> None:
    plan = size_two_risks(0.05, 0.01, 0.95, 0.10, population_size=500)
    assert plan.method == "hypergeometric"
    assert (plan.sample_size, plan.allowed_deviations) == _brute_force(0.05, 0.01, 0.95, 0.10, 500)


def test_the_five_one_plan_risk_of_underreliance_is_bounded() -> None:
    # The classical 5%/1% plan (93 items, 1 deviation) carries about 24% risk of
    # underreliance: scipy.stats.binom.sf(1, 93, 0.01) ≈ 0.238.
    assert stats.binom.sf(1, 93, 0.01) == pytest.approx(0.238, abs=0.001)
    plan = size_two_risks(0.05, 0.01, 0.95, 0.10)
    assert plan.risk_of_underreliance <= 0.10
    assert plan.sample_size > 93


def test_the_allowed_deviations_are_where_the_evaluation_still_supports_reliance() -> None:
    plan = size_two_risks(0.05, 0.01, 0.95, 0.10)
    n, k = plan.sample_size, plan.allowed_deviations
    assert evaluate_sample(n, k, 0.95, 0.05).supports_reliance is True
    assert evaluate_sample(n, k + 1, 0.95, 0.05).supports_reliance is False


def test_no_plan_under_the_cap_is_a_clear_error() -> None:
    with pytest.raises(NoFeasiblePlan) as caught:
        size_two_risks(0.05, 0.04, 0.95, 0.01, max_sample_size=2_000)
    assert caught.value.field == "underreliance_risk"
    assert "2,000" in caught.value.message
    assert "looser underreliance_risk" in caught.value.message


def test_no_plan_in_a_small_population() -> None:
    # 40 items, 5% tolerable (2 deviant items), 4% expected (2 deviant items): the two
    # rates give the same population, so no plan separates them.
    with pytest.raises(NoFeasiblePlan):
        size_two_risks(0.05, 0.04, 0.95, 0.10, population_size=40)


@pytest.mark.parametrize("beta", [0.0, 1.0, -0.1])
def test_limit_outside_the_unit_interval(beta: float) -> None:
    with pytest.raises(InvalidInput) as caught:
        size_two_risks(0.05, 0.01, 0.95, beta)
    assert caught.value.field == "underreliance_risk"


def test_a_plan_allowing_too_many_deviations_is_refused_with_the_reason() -> None:
    with pytest.raises(ComputationTooLarge) as caught:
        size_two_risks(0.05, 0.049, 0.99, 0.01)
    assert caught.value.field == "underreliance_risk"
    assert "10,000" in caught.value.message
