"""The curve of a staged plan against enumeration of every stage outcome (scipy.stats)."""

from __future__ import annotations

import itertools

import pytest
from scipy import stats

from service.sampling.errors import InvalidInput
from service.sampling.sequential.curve import FLOOR_PROBABILITY, staged_curve
from service.sampling.sequential.staged import Stage
from tests.unit.sampling.test_staged import (
    accept_probability,
    enumerate_outcomes,
    expected_size,
)

PLAN = [Stage(40, 0, 3), Stage(80, 1, 3), Stage(120, 2, 3)]


@pytest.mark.parametrize(("method", "size"), [("binomial", None), ("hypergeometric", 500)])
def test_curve_points_match_enumeration(method: str, size: int | None) -> None:
    curve = staged_curve(PLAN, size, method, tolerable_rate=0.05, expected_rate=0.01, points=11)
    for point in curve.points[::3]:
        outcomes = enumerate_outcomes(PLAN, method, point.rate, size)
        assert point.acceptance_probability == pytest.approx(
            accept_probability(outcomes), rel=1e-9, abs=1e-14)
        assert point.expected_sample_size == pytest.approx(
            expected_size(PLAN, outcomes), rel=1e-9)
    at_t = enumerate_outcomes(PLAN, method, 0.05, size)
    assert curve.risk_of_overreliance == pytest.approx(accept_probability(at_t), rel=1e-9)
    assert curve.expected_sample_size_at_tolerable_rate == pytest.approx(
        expected_size(PLAN, at_t), rel=1e-9)


def test_curve_falls_from_one_to_the_floor() -> None:
    curve = staged_curve(PLAN, points=41)
    probabilities = [p.acceptance_probability for p in curve.points]
    assert probabilities[0] == 1.0
    assert all(a >= b for a, b in itertools.pairwise(probabilities))
    assert probabilities[-1] == pytest.approx(FLOOR_PROBABILITY, rel=1e-6)
    # At rate 0 nothing deviates: the test stops after the first stage.
    assert curve.points[0].expected_sample_size == 40


def test_a_single_stage_curve_is_the_fixed_plan_curve() -> None:
    curve = staged_curve([Stage(93, 1, 2)], points=21)
    for point in curve.points:
        assert point.acceptance_probability == pytest.approx(
            stats.binom.cdf(1, 93, point.rate), rel=1e-9, abs=1e-15)
        assert point.expected_sample_size == 93


@pytest.mark.parametrize(("kwargs", "field"), [
    ({"points": 1}, "points"),
    ({"points": 10_000}, "points"),
    ({"tolerable_rate": 1.5}, "tolerable_rate"),
    ({"method": "normal"}, "method"),
])
def test_bad_curve_requests_name_the_field(kwargs: dict, field: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        staged_curve(PLAN, **kwargs)
    assert caught.value.field == field
