"""Tests for the operating characteristic of a test-of-controls plan.

Curve values are checked against scipy.stats (binom, hypergeom and poisson cdf) called
directly here, and at a few rates against exact rational sums built from math.comb, which
do not share any code with scipy. Risks are checked against the plan's own risks from
size_sample, whose sizes are themselves checked against the AICPA tables in
test_attributes.py.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats

from service.sampling.attributes import size_sample
from service.sampling.curves import (
    DEFAULT_POINTS,
    FLOOR_PROBABILITY,
    HYPERGEOMETRIC_WORK_LIMIT,
    MAX_POINTS,
    OperatingCharacteristic,
    curve_summary,
    operating_characteristic,
)
from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.wording import CAUTION


def _decimal(rate: float) -> Fraction:
    """The decimal a rate was written as (the shortest repr), independently of the core."""
    return Fraction(repr(rate))


def _deviant(rate: float, size: int) -> int:
    """ceil(rate × N) on the decimal, the deviant count of the hypergeometric model."""
    return math.ceil(_decimal(rate) * size)


def _binomial_cdf_exact(k: int, n: int, rate: Fraction) -> Fraction:
    """P(X ≤ k), X ~ Binomial(n, rate), as an exact fraction (sum of C(n, j) p^j q^(n−j))."""
    return sum(
        (math.comb(n, j) * rate**j * (1 - rate) ** (n - j) for j in range(k + 1)), Fraction(0)
    )


def _hypergeometric_cdf_exact(k: int, size: int, deviant: int, n: int) -> Fraction:
    """P(X ≤ k) drawing n of size items without replacement, deviant of them deviations."""
    return Fraction(
        sum(math.comb(deviant, j) * math.comb(size - deviant, n - j) for j in range(k + 1)),
        math.comb(size, n),
    )


def _rates(curve: OperatingCharacteristic) -> list[float]:
    return [point.rate for point in curve.points]


def _probabilities(curve: OperatingCharacteristic) -> list[float]:
    return [point.probability for point in curve.points]


# --- values against scipy.stats and exact sums ---------------------------------------


def test_binomial_curve_is_the_binomial_cdf() -> None:
    curve = operating_characteristic(93, 1, tolerable_rate=0.05, expected_rate=0.01)
    assert curve.method == "binomial"
    for point in curve.points:
        # scipy.stats.binom.cdf(k, n, p): P(at most k deviations in n items at rate p)
        expected = float(stats.binom.cdf(1, 93, point.rate))
        assert point.probability == pytest.approx(expected, rel=1e-12, abs=1e-300)


@pytest.mark.parametrize("rate", [0.0, 0.01, 0.03, 0.05, 0.08])
def test_binomial_curve_matches_exact_sums(rate: float) -> None:
    curve = operating_characteristic(93, 1, points=101, tolerable_rate=0.08)
    by_rate = dict(zip(_rates(curve), _probabilities(curve), strict=True))
    assert rate in by_rate  # 0.08 × 1.25 = 0.1 is the end of the grid, step 0.001
    exact = _binomial_cdf_exact(1, 93, _decimal(rate))  # exact rational sum, math.comb
    assert by_rate[rate] == pytest.approx(float(exact), rel=1e-12)


def test_hypergeometric_curve_is_the_hypergeometric_cdf() -> None:
    curve = operating_characteristic(93, 1, population_size=4200, tolerable_rate=0.05)
    assert curve.method == "hypergeometric"  # the default with a population, as for sizing
    for point in curve.points:
        # scipy.stats.hypergeom.cdf(k, N, M, n) with M = ceil(p × N) deviant items
        expected = float(stats.hypergeom.cdf(1, 4200, _deviant(point.rate, 4200), 93))
        assert point.probability == pytest.approx(expected, rel=1e-12, abs=1e-300)


def test_hypergeometric_curve_matches_exact_sums_on_a_small_population() -> None:
    # 45 items from 100, no deviation allowed: the zero-deviation plan for tolerable 5% at
    # 95% confidence in a population of 100 (tests/reference/published_values.py).
    curve = operating_characteristic(45, 0, population_size=100, points=61)
    for point in curve.points[::6]:
        exact = _hypergeometric_cdf_exact(0, 100, _deviant(point.rate, 100), 45)
        assert point.probability == pytest.approx(float(exact), rel=1e-11, abs=1e-300)


def test_poisson_curve_is_the_poisson_cdf() -> None:
    curve = operating_characteristic(93, 2, method="poisson", tolerable_rate=0.06)
    for point in curve.points:
        # scipy.stats.poisson.cdf(k, n × p)
        expected = float(stats.poisson.cdf(2, 93 * point.rate))
        assert point.probability == pytest.approx(expected, rel=1e-12, abs=1e-300)


# --- shape ------------------------------------------------------------------------------

PLANS = [
    {"sample_size": 93, "allowed_deviations": 1},
    {"sample_size": 59, "allowed_deviations": 0},
    {"sample_size": 93, "allowed_deviations": 1, "population_size": 4200},
    {"sample_size": 45, "allowed_deviations": 0, "population_size": 100, "points": 2001},
    {"sample_size": 150, "allowed_deviations": 3, "method": "poisson"},
    {"sample_size": 1_000_000, "allowed_deviations": 10_000, "points": 2001},
    {"sample_size": 10, "allowed_deviations": 9},
]


@pytest.mark.parametrize("plan", PLANS)
def test_curve_starts_at_one_and_never_rises(plan: dict[str, int]) -> None:
    curve = operating_characteristic(**plan)  # type: ignore[arg-type]
    assert curve.points[0].rate == 0.0
    assert curve.points[0].probability == 1.0
    probabilities = np.array(_probabilities(curve))
    assert np.all(np.diff(probabilities) <= 0.0)
    assert np.all((probabilities >= 0.0) & (probabilities <= 1.0))


@pytest.mark.parametrize("plan", PLANS)
def test_grid_is_even_and_reaches_the_floor(plan: dict[str, int]) -> None:
    curve = operating_characteristic(**plan)  # type: ignore[arg-type]
    rates = np.array(_rates(curve))
    assert len(rates) == plan.get("points", DEFAULT_POINTS)
    steps = np.diff(rates)
    assert np.allclose(steps, steps[0], rtol=1e-9, atol=0.0)
    assert 0.0 < rates[-1] <= 1.0
    # The grid ends where the probability of supporting reliance is at most 0.001.
    assert curve.points[-1].probability <= FLOOR_PROBABILITY


def test_grid_ends_at_a_two_figure_rate() -> None:
    # 59 items, none allowed: (1 − p)^59 = 0.001 at p = 1 − 0.001^(1/59) ≈ 0.1105, so the
    # grid runs to 0.12, the next two-significant-figure decimal.
    assert pytest.approx(0.1105, abs=1e-4) == 1 - 0.001 ** (1 / 59)
    curve = operating_characteristic(59, 0)
    assert curve.points[-1].rate == 0.12
    assert curve.points[1].rate == 0.0012


def test_grid_goes_past_the_tolerable_rate() -> None:
    # The probability falls to 0.001 near 11% here, well before the tolerable rate of 30%.
    curve = operating_characteristic(59, 0, tolerable_rate=0.3, expected_rate=0.1)
    assert curve.points[-1].rate == 0.38  # 1.25 × 0.3 = 0.375, rounded up to two figures
    assert curve.points[-1].rate > curve.tolerable_rate  # type: ignore[operator]


def test_grid_is_capped_at_rate_one() -> None:
    curve = operating_characteristic(10, 10)  # every outcome supports reliance
    assert curve.points[-1].rate == 1.0
    assert set(_probabilities(curve)) == {1.0}
    poisson = operating_characteristic(5, 3, method="poisson")
    # scipy.stats.poisson.cdf(3, 5) = 0.265: the Poisson curve never reaches 0.001
    assert poisson.points[-1].rate == 1.0
    assert poisson.points[-1].probability == pytest.approx(float(stats.poisson.cdf(3, 5)))


def test_points_can_be_chosen() -> None:
    assert len(operating_characteristic(93, 1, points=2).points) == 2
    assert len(operating_characteristic(93, 1, points=MAX_POINTS).points) == MAX_POINTS


def test_hypergeometric_curve_is_a_staircase() -> None:
    # On a grid finer than 1/N the probability only changes where ceil(p × N) changes.
    curve = operating_characteristic(45, 0, population_size=100, points=2001)
    counts = [_deviant(point.rate, 100) for point in curve.points]
    for (count_a, a), (count_b, b) in zip(
        zip(counts, curve.points, strict=True),
        zip(counts[1:], curve.points[1:], strict=True),
        strict=False,
    ):
        if count_a == count_b:
            assert a.probability == b.probability
        else:
            assert b.probability < a.probability
    assert len(set(_probabilities(curve))) == len(set(counts))


# --- risks ------------------------------------------------------------------------------

SIZED = [
    {"tolerable_rate": 0.05, "expected_rate": 0.01},
    {"tolerable_rate": 0.05},
    {"tolerable_rate": 0.05, "expected_rate": 0.01, "population_size": 4200},
    {"tolerable_rate": 0.05, "population_size": 100},
    {"tolerable_rate": 0.06, "expected_rate": 0.01, "method": "poisson"},
    {"tolerable_rate": 0.07, "expected_rate": 0.0125, "confidence": 0.9},
    {"tolerable_rate": 0.05, "expected_rate": 0.02, "population_size": 900, "method": "binomial"},
]


@pytest.mark.parametrize("inputs", SIZED)
def test_risks_are_the_plans_risks(inputs: dict[str, float]) -> None:
    plan = size_sample(**inputs)  # type: ignore[arg-type]
    curve = operating_characteristic(
        plan.sample_size,
        plan.allowed_deviations,
        population_size=plan.population_size,
        method=plan.method,
        tolerable_rate=plan.tolerable_rate,
        expected_rate=plan.expected_rate,
    )
    assert curve.method == plan.method
    assert curve.risk_of_overreliance == plan.risk_of_overreliance
    assert curve.risk_of_underreliance == plan.risk_of_underreliance


def test_risks_are_the_curve_at_the_rates() -> None:
    curve = operating_characteristic(93, 1, points=101, tolerable_rate=0.08, expected_rate=0.01)
    by_rate = dict(zip(_rates(curve), _probabilities(curve), strict=True))
    assert curve.risk_of_overreliance == by_rate[0.08]
    # risk of underreliance = 1 − P(X ≤ k) at the expected rate; scipy.stats.binom.sf
    assert curve.risk_of_underreliance == pytest.approx(1.0 - by_rate[0.01], rel=1e-12)
    assert curve.risk_of_underreliance == pytest.approx(float(stats.binom.sf(1, 93, 0.01)))


def test_risks_are_absent_without_rates() -> None:
    curve = operating_characteristic(93, 1)
    assert curve.tolerable_rate is None and curve.risk_of_overreliance is None
    assert curve.expected_rate is None and curve.risk_of_underreliance is None


def test_expected_rate_zero_has_no_underreliance() -> None:
    curve = operating_characteristic(59, 0, tolerable_rate=0.05, expected_rate=0.0)
    assert curve.risk_of_underreliance == 0.0
    # (0.95)^59 = 0.0485, the zero-deviation plan's risk (AICPA table A-1, 59 items)
    assert curve.risk_of_overreliance == pytest.approx(0.95**59, rel=1e-12)


# --- summary and warnings -----------------------------------------------------------------


def test_summary_states_the_plan_and_ends_with_the_caution() -> None:
    curve = operating_characteristic(93, 1, tolerable_rate=0.05, expected_rate=0.01)
    text = curve_summary(curve)
    assert text.endswith(CAUTION)
    assert "93 items" in text and "at most 1 deviation" in text
    assert "risk of overreliance" in text and "risk of underreliance" in text
    assert "staircase" not in text


def test_hypergeometric_summary_explains_the_staircase() -> None:
    curve = operating_characteristic(93, 1, population_size=4200, population_label="POs Q3")
    text = curve_summary(curve)
    assert "staircase" in text and "ceil(rate × 4,200)" in text
    assert "(POs Q3)" in text
    assert "risk of" not in text


def test_binomial_sample_above_the_population_warns() -> None:
    curve = operating_characteristic(120, 1, population_size=100, method="binomial")
    assert any("exceeds the population" in warning for warning in curve.warnings)
    large = operating_characteristic(30, 1, population_size=100, method="poisson")
    assert any("more than 10%" in warning for warning in large.warnings)
    assert operating_characteristic(30, 1, population_size=100).warnings == ()


# --- bad input ------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("arguments", "field"),
    [
        ({"sample_size": 0, "allowed_deviations": 0}, "sample_size"),
        ({"sample_size": True, "allowed_deviations": 0}, "sample_size"),
        ({"sample_size": 10.0, "allowed_deviations": 0}, "sample_size"),
        ({"sample_size": 10_000_001, "allowed_deviations": 0}, "sample_size"),
        ({"sample_size": 10, "allowed_deviations": 11}, "allowed_deviations"),
        ({"sample_size": 10, "allowed_deviations": -1}, "allowed_deviations"),
        ({"sample_size": 10, "allowed_deviations": 1, "points": 1}, "points"),
        ({"sample_size": 10, "allowed_deviations": 1, "points": 2002}, "points"),
        ({"sample_size": 10, "allowed_deviations": 1, "tolerable_rate": 0.0}, "tolerable_rate"),
        ({"sample_size": 10, "allowed_deviations": 1, "tolerable_rate": 5}, "tolerable_rate"),
        ({"sample_size": 10, "allowed_deviations": 1, "expected_rate": 1.0}, "expected_rate"),
        ({"sample_size": 10, "allowed_deviations": 1, "expected_rate": math.nan},
         "expected_rate"),
        ({"sample_size": 10, "allowed_deviations": 1, "tolerable_rate": 0.05,
          "expected_rate": 0.05}, "expected_rate"),
        ({"sample_size": 10, "allowed_deviations": 1, "method": "normal"}, "method"),
        ({"sample_size": 10, "allowed_deviations": 1, "method": "hypergeometric"},
         "population.size"),
        ({"sample_size": 10, "allowed_deviations": 1, "population_size": 0}, "population.size"),
        ({"sample_size": 101, "allowed_deviations": 1, "population_size": 100}, "sample_size"),
    ],
)
def test_bad_input_names_the_field(arguments: dict[str, object], field: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        operating_characteristic(**arguments)  # type: ignore[arg-type]
    assert caught.value.field == field


def test_hypergeometric_work_limit_names_points_then_population() -> None:
    size = 10**9
    most = HYPERGEOMETRIC_WORK_LIMIT // size
    assert len(operating_characteristic(100, 2, population_size=size, points=most).points) == most
    with pytest.raises(ComputationTooLarge) as caught:
        operating_characteristic(100, 2, population_size=size, points=most + 1)
    assert caught.value.field == "points"
    assert f"at most {most:,} points" in caught.value.message
    with pytest.raises(ComputationTooLarge) as caught:
        operating_characteristic(100, 2, population_size=10**12)
    assert caught.value.field == "population.size"
    assert "binomial" in caught.value.message
    # The binomial model has no such limit: the same plan without the population size.
    assert len(operating_characteristic(100, 2, population_size=10**12, method="binomial")
               .points) == DEFAULT_POINTS
