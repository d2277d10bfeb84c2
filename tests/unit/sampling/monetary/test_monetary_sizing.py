"""Monetary-unit sample sizes against worked examples and their exact definitions."""

from __future__ import annotations

from decimal import Decimal
from fractions import Fraction
from math import ceil

import pytest
from scipy import stats

from service.sampling.errors import InvalidInput, NoFeasiblePlan
from service.sampling.monetary.amounts import to_decimal
from service.sampling.monetary.sizing import size_monetary_sample

BV, TM = 250_000_000, 12_500_000  # 2,500,000.00 and 125,000.00 in cents


def test_no_expected_misstatement_at_95_percent_gives_60_items() -> None:
    # Worked example recalled from memory: BV 2,500,000, TM 125,000, 95% -> n = 60,
    # interval 41,666.67 (n = ceil(3.00 x BV / TM) with the exact factor 2.9957).
    plan = size_monetary_sample(BV, TM)
    assert plan.sample_size == 60
    assert to_decimal(plan.sampling_interval) == Decimal("41666.67")
    assert plan.sampling_interval == Fraction(BV, 60)


def test_expansion_factor_formula_gives_about_93_items() -> None:
    # Textbook-style worked example recalled from memory: EM 27,722 and expansion factor 1.6
    # (common practice) -> n = BV x 3.00 / (TM - EM x 1.6) = about 93.
    plan = size_monetary_sample(BV, TM, 2_772_200, method="expansion_factor")
    assert plan.sample_size == 93
    assert plan.warnings


@pytest.mark.parametrize(("bv", "tm"), [(BV, TM), (10_000_000, 300_000), (987_654_321, 12_345_678)])
def test_poisson_size_without_expected_misstatement_is_rf0_over_rate(bv: int, tm: int) -> None:
    # scipy.stats.chi2: RF(0) = chi2.ppf(0.95, 2) / 2.
    assert size_monetary_sample(bv, tm).sample_size == ceil(stats.chi2.ppf(0.95, 2) / 2 * bv / tm)


@pytest.mark.parametrize("em", [0, 1_000_000, 2_772_200, 5_000_000])
def test_poisson_size_is_the_smallest_meeting_the_definition(em: int) -> None:
    n = size_monetary_sample(BV, TM, em).sample_size
    t, e = TM / BV, em / BV

    def limit(m: int) -> float:  # scipy.stats.gamma: the continuous Poisson upper limit
        return float(stats.gamma.ppf(0.95, e * m + 1))

    assert limit(n) <= n * t + 1e-9
    assert limit(n - 1) > (n - 1) * t


@pytest.mark.parametrize("em", [0, 2_772_200])
def test_binomial_size_is_the_smallest_meeting_the_definition(em: int) -> None:
    n = size_monetary_sample(BV, TM, em, method="binomial").sample_size
    t, e = TM / BV, em / BV

    def upper(m: int) -> float:  # scipy.stats.beta: Clopper-Pearson with continuous k
        return float(stats.beta.ppf(0.95, e * m + 1, m - e * m))

    assert upper(n) <= t + 1e-12
    assert upper(n - 1) > t


def test_hypergeometric_size_is_the_smallest_meeting_the_definition() -> None:
    bv, tm, em = 5_000_000, 250_000, 50_000
    n = size_monetary_sample(bv, tm, em, method="hypergeometric").sample_size

    def risk(m: int) -> float:  # scipy.stats.hypergeom over the monetary units
        return float(stats.hypergeom.cdf(ceil(em * m / bv), bv, tm, m))

    assert risk(n) <= 0.05
    assert all(risk(m) > 0.05 for m in range(max(1, n - 5), n))


def test_more_expected_misstatement_needs_more_items() -> None:
    sizes = [size_monetary_sample(BV, TM, em).sample_size for em in (0, 1_000_000, 3_000_000)]
    assert sizes == sorted(sizes) and len(set(sizes)) == 3


def test_basic_precision_is_rf0_times_the_interval() -> None:
    plan = size_monetary_sample(BV, TM)
    expected = stats.chi2.ppf(0.95, 2) / 2 * BV / 60
    assert float(plan.basic_precision) == pytest.approx(expected)


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"book_value": -5, "tolerable_misstatement": 1}, "book_value"),
        ({"book_value": BV, "tolerable_misstatement": BV}, "tolerable_misstatement"),
        (
            {"book_value": BV, "tolerable_misstatement": TM, "expected_misstatement": TM},
            "expected_misstatement",
        ),
        ({"book_value": BV, "tolerable_misstatement": TM, "method": "guess"}, "method"),
        (
            {
                "book_value": BV,
                "tolerable_misstatement": TM,
                "confidence": 0.99,
                "method": "expansion_factor",
            },
            "confidence",
        ),
    ],
)
def test_bad_input_names_the_field(kwargs: dict[str, object], field: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        size_monetary_sample(**kwargs)  # type: ignore[arg-type]
    assert caught.value.field == field


@pytest.mark.parametrize("method", ["poisson", "binomial", "hypergeometric"])
def test_an_unreachable_plan_is_refused(method: str) -> None:
    # One cent tolerable in 10^16 currency units needs about 3 x 10^18 units: beyond any cap.
    with pytest.raises(NoFeasiblePlan):
        size_monetary_sample(10**18, 1, method=method)


@pytest.mark.parametrize("method", ["poisson", "binomial", "hypergeometric"])
def test_expected_close_to_tolerable_gives_a_large_minimal_size(method: str) -> None:
    bv, tm, em = 10**9, 10**7, 9 * 10**6
    n = size_monetary_sample(bv, tm, em, method=method).sample_size
    assert n > 1_000
    if method == "poisson":  # scipy.stats.gamma, independently
        assert stats.gamma.ppf(0.95, em / bv * n + 1) <= n * tm / bv + 1e-9
        assert stats.gamma.ppf(0.95, em / bv * (n - 1) + 1) > (n - 1) * tm / bv
