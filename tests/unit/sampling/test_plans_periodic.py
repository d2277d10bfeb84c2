"""Periodic controls, checked against scipy.stats.hypergeom and by hand.

scipy.stats.hypergeom is the general-purpose reference for sampling occurrences without
replacement. The frequency table is common practice (conventions, no published source):
the tests check that the answer uses the table it is given, not the table's values.
"""

from __future__ import annotations

import math

import pytest
from scipy import stats

from service.sampling.attributes import size_sample
from service.sampling.errors import InvalidInput
from service.sampling.plans.periodic import (
    DEFAULT_CONVENTIONS,
    FREQUENCIES,
    FrequencyConvention,
    plan_periodic,
)


def _upper_count_if_none(n: int, size: int, confidence: float) -> int:
    """Largest deviant count M with P(X = 0 | N, M, n) > 1 − confidence, by a plain scan."""
    return max(m for m in range(size + 1) if stats.hypergeom.pmf(0, size, m, n) > 1 - confidence)


@pytest.mark.parametrize("frequency", FREQUENCIES)
def test_each_size_against_scipy_hypergeom(frequency: str) -> None:
    plan = plan_periodic(frequency, 0.10, 0.95)
    size = DEFAULT_CONVENTIONS[frequency].occurrences
    assert plan.occurrences == size and plan.occurrences_basis == "convention"
    assert plan.tolerable_deviant_items == math.ceil(round(0.10 * size, 9))
    assert plan.statistical_plan.sample_size == size_sample(0.10, 0.0, 0.95, size).sample_size
    for meaning in plan.sizes:
        n = meaning.sample_size
        for m, value in zip(
            (1, 2, 3),
            (
                meaning.confidence_against_1_deviant,
                meaning.confidence_against_2_deviant,
                meaning.confidence_against_3_deviant,
            ),
            strict=True,
        ):
            if m > size:
                assert value is None
            else:
                assert value == pytest.approx(1 - stats.hypergeom.pmf(0, size, m, n), abs=1e-12)
        if n < size:
            assert meaning.upper_deviation_count_if_none_found == _upper_count_if_none(
                n, size, 0.95
            )
        else:
            assert meaning.upper_deviation_count_if_none_found == 0
        tolerable = plan.tolerable_deviant_items
        miss = stats.hypergeom.pmf(0, size, tolerable, n)
        assert meaning.achieved_confidence_at_tolerable == pytest.approx(1 - miss, abs=1e-12)
        assert meaning.supports_reliance_if_none_found == (miss <= 0.05 + 1e-15)


def test_two_of_twelve_by_hand() -> None:
    # Two of 12 months, one deviant month: P(miss) = C(11, 2) / C(12, 2) = 55/66 = 10/12,
    # so the sample finds it with probability 2/12.
    plan = plan_periodic("monthly", 0.10)
    two = next(m for m in plan.sizes if m.sample_size == 2)
    assert two.confidence_against_1_deviant == pytest.approx(2 / 12, rel=1e-12)
    assert two.supports_reliance_if_none_found is False
    assert any("does not reach" in w for w in plan.warnings)


def test_occurrences_and_range_given() -> None:
    plan = plan_periodic(
        "weekly", 0.05, 0.90, occurrences=48, common_practice_low=10, common_practice_high=10
    )
    assert plan.occurrences == 48 and plan.occurrences_basis == "given"
    assert plan.common_practice_basis == "given"
    assert plan.sizes[0].sample_size == 10
    assert plan.statistical_plan.population_size == 48


def test_the_table_is_configurable() -> None:
    table = {"monthly": FrequencyConvention(occurrences=13, low=3, high=4)}
    plan = plan_periodic("monthly", 0.10, conventions=table)
    assert (plan.occurrences, plan.common_practice_low, plan.common_practice_high) == (13, 3, 4)


def test_sizes_above_the_occurrences_are_capped() -> None:
    plan = plan_periodic("daily", 0.10, occurrences=30)
    assert max(m.sample_size for m in plan.sizes) <= 30
    assert any("capped" in w for w in plan.warnings)


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"frequency": "hourly"}, "frequency"),
        ({"frequency": "monthly", "occurrences": 0}, "occurrences"),
        (
            {"frequency": "monthly", "common_practice_low": 5, "common_practice_high": 2},
            "common_practice.high",
        ),
    ],
)
def test_bad_input_names_the_field(kwargs: dict, field: str) -> None:  # type: ignore[type-arg]
    with pytest.raises(InvalidInput) as caught:
        plan_periodic(tolerable_rate=0.1, **kwargs)
    assert caught.value.field == field
