"""Several attributes on one sample, checked against scipy.stats and single-attribute plans.

Each attribute's risk at the common size is recomputed with scipy.stats.binom and
scipy.stats.hypergeom (general-purpose reference implementations), and the common size
against a plain scan over n with scipy.stats.
"""

from __future__ import annotations

import math

import pytest
from scipy import stats

from service.sampling.attributes import evaluate_sample, size_sample
from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.plans.multiple import (
    AttributeFindings,
    AttributeRates,
    evaluate_several,
    size_several,
)


def _scan_common_size(rates: list[tuple[float, float]], confidence: float, start: int) -> int:
    """Smallest n ≥ start with binom.cdf(ceil(e n), n, t) ≤ 1 − confidence for every attribute."""
    n = start
    while True:
        if all(
            stats.binom.cdf(math.ceil(round(e * n, 9)), n, t) <= 1 - confidence for t, e in rates
        ):
            return n
        n += 1


@pytest.mark.parametrize(
    "rates",
    [
        [(0.05, 0.0), (0.05, 0.01)],
        [(0.05, 0.01), (0.03, 0.0)],
        [(0.10, 0.02), (0.05, 0.0), (0.07, 0.01)],
        [(0.06, 0.02), (0.05, 0.01)],
    ],
)
def test_common_size_is_the_scan_over_n_with_scipy_binom(rates: list[tuple[float, float]]) -> None:
    attributes = [AttributeRates(f"a{i}", t, e) for i, (t, e) in enumerate(rates)]
    plan = size_several(attributes, 0.95)
    singles = [size_sample(t, e, 0.95).sample_size for t, e in rates]
    assert plan.sample_size == _scan_common_size(rates, 0.95, max(singles))
    assert plan.governing_attribute == f"a{singles.index(max(singles))}"
    for attribute, (t, e), single in zip(plan.attributes, rates, singles, strict=True):
        k = math.ceil(round(e * plan.sample_size, 9))
        assert attribute.own_sample_size == single
        assert attribute.allowed_deviations == k
        risk = stats.binom.cdf(k, plan.sample_size, t)
        assert attribute.risk_of_overreliance == pytest.approx(risk, rel=1e-9)
        assert attribute.achieved_confidence == pytest.approx(1 - risk, rel=1e-9)
        under = stats.binom.sf(k, plan.sample_size, e) if e else 0.0
        assert attribute.risk_of_underreliance == pytest.approx(under, rel=1e-9, abs=1e-15)


def test_same_answer_as_the_single_attribute_plan_for_one_attribute() -> None:
    single = size_sample(0.05, 0.01, 0.95, 4200)
    plan = size_several([AttributeRates("approval", 0.05, 0.01)], 0.95, 4200)
    assert plan.sample_size == single.sample_size
    assert plan.method == "hypergeometric"
    (only,) = plan.attributes
    assert only.allowed_deviations == single.allowed_deviations
    assert only.risk_of_overreliance == single.risk_of_overreliance
    assert only.tolerable_deviant_items == 210


def test_larger_common_size_when_the_largest_single_size_loses_confidence() -> None:
    # t = 5%, e = 1%: 101 items allow ceil(1.01) = 2 deviations, and
    # scipy.stats.binom.cdf(2, 101, 0.05) ≈ 0.12 > 0.05; a zero-deviation attribute at 3%
    # needs 99 items alone (0.97^99 ≈ 0.0490, 0.97^98 ≈ 0.0506).
    assert stats.binom.cdf(2, 101, 0.05) > 0.05
    plan = size_several(
        [AttributeRates("match", 0.05, 0.01), AttributeRates("approval", 0.029, 0.0)], 0.95
    )
    assert plan.attributes[1].own_sample_size > 100
    assert plan.sample_size > plan.attributes[1].own_sample_size
    assert any("smallest larger size" in w for w in plan.warnings)
    for attribute in plan.attributes:
        assert attribute.risk_of_overreliance <= 0.05


def test_finite_population_risks_against_scipy_hypergeom() -> None:
    plan = size_several(
        [AttributeRates("approval", 0.05, 0.0), AttributeRates("amount", 0.08, 0.02)], 0.90, 600
    )
    for attribute in plan.attributes:
        deviant = math.ceil(round(attribute.tolerable_rate * 600, 9))
        risk = stats.hypergeom.cdf(attribute.allowed_deviations, 600, deviant, plan.sample_size)
        assert attribute.risk_of_overreliance == pytest.approx(risk, rel=1e-9)
        assert risk <= 0.10


@pytest.mark.parametrize(
    ("names", "field"),
    [([], "attributes"), (["a", "a"], "attributes[1].name"), ([" "], "attributes[0].name")],
)
def test_bad_names(names: list[str], field: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        size_several([AttributeRates(n, 0.05) for n in names])
    assert caught.value.field == field


def test_an_attribute_rate_error_names_the_attribute() -> None:
    with pytest.raises(InvalidInput) as caught:
        size_several([AttributeRates("a", 0.05), AttributeRates("b", 0.05, 0.06)])
    assert caught.value.field == "attributes[1].expected_rate"


def test_evaluation_of_each_attribute_is_the_single_evaluation() -> None:
    result = evaluate_several(
        120,
        [AttributeFindings("approval", 0, 0.05), AttributeFindings("amount", 4, 0.05)],
        0.95,
    )
    for item, d in zip(result.attributes, (0, 4), strict=True):
        assert item.evaluation == evaluate_sample(120, d, 0.95, 0.05)
        # Clopper–Pearson upper limit: the beta quantile (scipy.stats.beta)
        assert item.evaluation.upper_deviation_limit == pytest.approx(
            stats.beta.ppf(0.95, d + 1, 120 - d), rel=1e-9
        )
    # 0 in 120 at 5%: 0.95^120 ≈ 0.0021 supports; 4 in 120: binom.cdf(4, 120, .05) ≈ 0.28
    assert stats.binom.cdf(4, 120, 0.05) > 0.05
    assert result.attributes_not_supporting == ("amount",)
    assert result.supports_reliance is False


def test_evaluation_errors_name_the_attribute() -> None:
    with pytest.raises(InvalidInput) as caught:
        evaluate_several(10, [AttributeFindings("a", 0, 0.05), AttributeFindings("b", 11, 0.05)])
    assert caught.value.field == "attributes[1].deviations"


def test_an_attribute_too_large_to_plan_is_named() -> None:
    with pytest.raises(ComputationTooLarge) as caught:
        size_several([AttributeRates("a", 0.05), AttributeRates("b", 0.05, 0.0499)])
    assert caught.value.field == "attributes[1].expected_rate"
