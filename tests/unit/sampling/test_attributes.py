"""Sizing and evaluation of tests of controls against published values and reference libraries."""

from __future__ import annotations

import math

import pytest
from scipy import stats
from statsmodels.stats.proportion import proportion_confint

from service.sampling.attributes import evaluate_sample, size_sample
from service.sampling.errors import ComputationTooLarge, InvalidInput, NoFeasiblePlan
from tests.reference import published_values as ref


def rounded_up(value: float, decimals: int) -> float:
    """Round up to ``decimals`` as the printed tables do; the nudge absorbs float noise."""
    scale = 10**decimals
    return math.ceil(value * scale - 1e-9) / scale


@pytest.mark.parametrize(("rates", "expected"), sorted(ref.TABLE_A1_95.items()))
def test_sizes_match_table_a1_at_95_percent(rates, expected):
    # AICPA Audit Sampling guide, table A-1 (see tests/reference/published_values.py)
    tolerable, expected_rate = rates
    plan = size_sample(tolerable, expected_rate, 0.95)
    assert (plan.sample_size, plan.allowed_deviations) == expected


@pytest.mark.parametrize(("rates", "expected"), sorted(ref.TABLE_A2_90.items()))
def test_sizes_match_table_a2_at_90_percent(rates, expected):
    # AICPA Audit Sampling guide, table A-2
    plan = size_sample(*rates, confidence=0.90)
    assert (plan.sample_size, plan.allowed_deviations) == expected


@pytest.mark.parametrize(("population", "size"), sorted(ref.HYPERGEOMETRIC_EXAMPLES.items()))
def test_hypergeometric_textbook_example(population, size):
    plan = size_sample(0.05, 0.0, 0.95, population_size=population)
    assert plan.method == "hypergeometric"
    assert plan.sample_size == size
    assert size_sample(0.05, 0.0, 0.95).sample_size == 59  # binomial, same example


def test_poisson_zero_deviation_plan_uses_the_confidence_factor():
    # Poisson factor 3.00 for 0 deviations at 95%: n = ceil(2.9957 / 0.05) = 60
    plan = size_sample(0.05, 0.0, 0.95, method="poisson")
    assert plan.sample_size == math.ceil(-math.log(0.05) / 0.05) == 60


@pytest.mark.parametrize(("deviations", "factor"), sorted(ref.POISSON_FACTORS_95.items()))
def test_poisson_upper_limit_matches_confidence_factors(deviations, factor):
    n = 1000
    result = evaluate_sample(n, deviations, 0.95, method="poisson")
    assert rounded_up(result.upper_deviation_limit * n, ref.FACTOR_DECIMALS) == factor


@pytest.mark.parametrize(("deviations", "factor"), sorted(ref.POISSON_FACTORS_90.items()))
def test_poisson_factors_at_90_percent(deviations, factor):
    result = evaluate_sample(1000, deviations, 0.90, method="poisson")
    assert rounded_up(result.upper_deviation_limit * 1000, ref.FACTOR_DECIMALS) == factor


@pytest.mark.parametrize(("case", "percent"), sorted(ref.TABLE_A3_95.items()))
def test_upper_limits_match_table_a3(case, percent):
    n, d = case
    result = evaluate_sample(n, d, 0.95)
    assert rounded_up(result.upper_deviation_limit * 100, ref.TABLE_DECIMALS) == percent


@pytest.mark.parametrize(("n", "d"), [(100, 2), (60, 0), (93, 1), (250, 7), (20, 20), (1, 0)])
def test_binomial_limits_match_statsmodels_and_scipy(n, d):
    confidence = 0.95
    result = evaluate_sample(n, d, confidence)
    # statsmodels proportion_confint(method="beta") is Clopper-Pearson; its two-sided
    # interval at alpha = 2(1 - c) has the one-sided upper bound at c as upper end.
    _, upper = proportion_confint(d, n, alpha=2 * (1 - confidence), method="beta")
    assert result.upper_deviation_limit == pytest.approx(upper, rel=1e-10, abs=1e-15)
    low, high = proportion_confint(d, n, alpha=1 - confidence, method="beta")
    assert result.interval.low == pytest.approx(low, rel=1e-10, abs=1e-15)
    assert result.interval.high == pytest.approx(high, rel=1e-10, abs=1e-15)
    # scipy.stats.binomtest gives the same exact interval (it finds the roots
    # numerically, so it agrees to about 1e-9 rather than to the last digit)
    ci = stats.binomtest(d, n).proportion_ci(confidence_level=confidence, method="exact")
    assert result.interval.low == pytest.approx(ci.low, rel=1e-8, abs=1e-15)
    assert result.interval.high == pytest.approx(ci.high, rel=1e-8, abs=1e-15)


def test_plan_meets_its_definition_and_is_the_smallest():
    # Definition: smallest n with P(X <= ceil(e n)) <= 1 - c at the tolerable rate,
    # checked by a direct scan with scipy.stats.binom (reference library).
    tolerable, expected, confidence = 0.04, 0.01, 0.95
    plan = size_sample(tolerable, expected, confidence)
    alpha = 1 - confidence

    def holds(n):
        return stats.binom.cdf(math.ceil(round(expected * n, 9)), n, tolerable) <= alpha

    assert holds(plan.sample_size)
    assert not any(holds(n) for n in range(1, plan.sample_size))


def test_hypergeometric_plan_is_the_smallest_by_direct_scan():
    # Same definition with scipy.stats.hypergeom and ceil(t N) deviant items.
    population, tolerable, expected = 2500, 0.05, 0.01
    plan = size_sample(tolerable, expected, 0.95, population_size=population)
    deviant = math.ceil(tolerable * population)

    def holds(n):
        k = math.ceil(round(expected * n, 9))
        return stats.hypergeom.cdf(k, population, deviant, n) <= 0.05

    assert holds(plan.sample_size)
    assert not any(holds(n) for n in range(1, plan.sample_size))
    assert plan.sample_size <= size_sample(tolerable, expected, 0.95).sample_size


def test_counts_use_the_decimal_the_caller_wrote():
    # 0.07 * 100 is 7.000000000000001 in binary floating point; a naive ceil gives 8.
    plan = size_sample(0.12, 0.07, 0.80)
    assert plan.allowed_deviations == math.ceil(round(0.07 * plan.sample_size, 9))


@pytest.mark.parametrize(
    ("tolerable", "expected", "confidence", "population", "method"),
    [
        (0.05, 0.0, 0.95, None, "binomial"),
        (0.05, 0.01, 0.95, None, "binomial"),
        (0.05, 0.02, 0.90, None, "binomial"),
        (0.05, 0.01, 0.95, 4200, "hypergeometric"),
        (0.08, 0.02, 0.95, 300, "hypergeometric"),
        (0.05, 0.01, 0.95, None, "poisson"),
    ],
)
def test_sizing_and_evaluation_agree(tolerable, expected, confidence, population, method):
    plan = size_sample(tolerable, expected, confidence, population, method)
    ok = evaluate_sample(
        plan.sample_size, plan.allowed_deviations, confidence, tolerable, population, method
    )
    worse = evaluate_sample(
        plan.sample_size, plan.allowed_deviations + 1, confidence, tolerable, population, method
    )
    assert ok.supports_reliance is True
    assert worse.supports_reliance is False
    assert ok.upper_deviation_limit <= tolerable
    assert worse.upper_deviation_limit >= tolerable


def test_achieved_confidence_and_risks_are_exact_tails():
    plan = size_sample(0.05, 0.01, 0.95)
    # scipy.stats.binom as reference: P(X <= 1 | n = 93, p = 0.05) and P(X > 1 | p = 0.01)
    assert plan.risk_of_overreliance == pytest.approx(stats.binom.cdf(1, 93, 0.05), rel=1e-12)
    assert plan.achieved_confidence == pytest.approx(1 - stats.binom.cdf(1, 93, 0.05), rel=1e-12)
    assert plan.risk_of_underreliance == pytest.approx(stats.binom.sf(1, 93, 0.01), rel=1e-12)
    assert size_sample(0.05).risk_of_underreliance == 0.0


def test_hypergeometric_evaluation_bound_is_the_exact_count():
    # Upper bound M_U: the largest M with P(X <= d | N, M, n) > 1 - c (scipy.stats.hypergeom)
    n, d, population = 100, 2, 1000
    result = evaluate_sample(n, d, 0.95, population_size=population)
    m = result.upper_deviation_count
    assert stats.hypergeom.cdf(d, population, m, n) > 0.05
    assert stats.hypergeom.cdf(d, population, m + 1, n) <= 0.05
    assert result.upper_deviation_limit == m / population
    # sampling without replacement gives a tighter limit than the binomial
    assert result.upper_deviation_limit < evaluate_sample(n, d, 0.95).upper_deviation_limit


def test_allowance_is_upper_limit_minus_sample_rate():
    result = evaluate_sample(100, 2, 0.95, population_size=1000)
    assert result.sample_deviation_rate == 0.02
    assert result.allowance_for_sampling_risk == 0.039  # exact difference, one rounding


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"tolerable_rate": 0.0}, "tolerable_rate"),
        ({"tolerable_rate": 1.0}, "tolerable_rate"),
        ({"tolerable_rate": 0.05, "expected_rate": 0.05}, "expected_rate"),
        ({"tolerable_rate": 0.05, "confidence": 1.0}, "confidence"),
        ({"tolerable_rate": 0.05, "population_size": 0}, "population.size"),
        ({"tolerable_rate": 0.05, "method": "normal"}, "method"),
        ({"tolerable_rate": 0.05, "method": "hypergeometric"}, "population.size"),
    ],
)
def test_invalid_sizing_inputs_name_the_field(kwargs, field):
    with pytest.raises(InvalidInput) as info:
        size_sample(**kwargs)
    assert info.value.field == field


def test_refuses_absurd_plans_with_the_reason():
    with pytest.raises(ComputationTooLarge) as info:
        size_sample(0.07, 0.0699)
    assert "too close" in info.value.message


def test_reports_when_no_plan_fits_the_population():
    # 10 items at 5% tolerable hold 1 deviant item; any sample allows 1 deviation.
    with pytest.raises(NoFeasiblePlan):
        size_sample(0.05, 0.01, 0.95, population_size=10)


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"sample_size": 0, "deviations": 0}, "sample_size"),
        ({"sample_size": 10, "deviations": 11}, "deviations"),
        ({"sample_size": 10, "deviations": -1}, "deviations"),
        ({"sample_size": 10, "deviations": 0, "population_size": 5}, "sample_size"),
        ({"sample_size": 10, "deviations": 0, "confidence": 0.0}, "confidence"),
        ({"sample_size": 10, "deviations": 0, "tolerable_rate": 1.5}, "tolerable_rate"),
    ],
)
def test_invalid_evaluation_inputs_name_the_field(kwargs, field):
    with pytest.raises(InvalidInput) as info:
        evaluate_sample(**kwargs)
    assert info.value.field == field


def test_warnings_for_large_sampling_fractions():
    plan = size_sample(0.05, 0.0, 0.95, population_size=80)
    assert any("more than half the population" in w for w in plan.warnings)
    binomial = size_sample(0.05, 0.0, 0.95, population_size=50, method="binomial")
    assert any("exceeds the population" in w for w in binomial.warnings)


def test_results_are_plain_python_numbers():
    plan = size_sample(0.05, 0.01, 0.95, population_size=4200)
    result = evaluate_sample(60, 1, 0.95, 0.05, population_size=4200)
    values = [*vars(plan).values(), *vars(result).values(), *vars(result.interval).values()]
    for value in values:
        if value is not result.interval:
            assert type(value).__module__ == "builtins", value
