"""Properties of the core that hold for every input, checked on generated inputs.

Each property uses a modest, derandomised number of examples so the file stays quick.
"""

from __future__ import annotations

import math

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.sampling.attributes import evaluate_sample, size_sample
from service.sampling.errors import SamplingError
from service.sampling.selection import NumberedPopulation, select

FEW = settings(max_examples=40, derandomize=True, deadline=None, database=None,
               suppress_health_check=[HealthCheck.too_slow])

tolerable = st.sampled_from([0.01, 0.02, 0.03, 0.05, 0.07, 0.1, 0.15, 0.2])
confidence = st.sampled_from([0.5, 0.8, 0.9, 0.95, 0.99])


def _size(*args: object, **kwargs: object) -> int | None:
    try:
        return size_sample(*args, **kwargs).sample_size  # type: ignore[arg-type]
    except SamplingError:
        return None


@FEW
@given(tolerable, tolerable, confidence)
def test_size_does_not_fall_as_the_tolerable_rate_falls(t1: float, t2: float, c: float) -> None:
    low, high = sorted((t1, t2))
    assert _size(low, 0.0, c) >= _size(high, 0.0, c)  # type: ignore[operator]


@FEW
@given(tolerable, confidence, confidence)
def test_size_does_not_fall_as_confidence_rises(t: float, c1: float, c2: float) -> None:
    low, high = sorted((c1, c2))
    assert _size(t, 0.0, high) >= _size(t, 0.0, low)  # type: ignore[operator]


@FEW
@given(st.sampled_from([0.05, 0.1]), st.integers(0, 4), st.integers(0, 4))
def test_size_does_not_fall_as_the_expected_rate_rises(t: float, a: int, b: int) -> None:
    e1, e2 = sorted((a * t / 10, b * t / 10))
    s1, s2 = _size(t, e1, 0.95), _size(t, e2, 0.95)
    if s1 is not None and s2 is not None:
        assert s2 >= s1


@FEW
@given(tolerable, confidence, st.integers(20, 100_000))
def test_hypergeometric_size_is_at_most_the_binomial_size(t: float, c: float, n: int) -> None:
    binomial = _size(t, 0.0, c, method="binomial")
    finite = _size(t, 0.0, c, population_size=n, method="hypergeometric")
    if finite is not None:
        assert binomial is not None and finite <= binomial


@FEW
@given(tolerable, confidence)
def test_hypergeometric_size_approaches_binomial_for_large_populations(t: float, c: float
                                                                       ) -> None:
    binomial = _size(t, 0.0, c, method="binomial")
    finite = _size(t, 0.0, c, population_size=10**9, method="hypergeometric")
    assert binomial is not None and finite is not None
    assert binomial - 1 <= finite <= binomial


@FEW
@given(tolerable, confidence)
def test_evaluating_a_planned_sample_supports_reliance(t: float, c: float) -> None:
    plan = size_sample(t, 0.0, c, method="binomial")
    result = evaluate_sample(plan.sample_size, plan.allowed_deviations, c, t, method="binomial")
    assert result.upper_deviation_limit <= t
    assert result.supports_reliance is True


@FEW
@given(st.integers(1, 2000), st.data())
def test_upper_limit_lies_between_the_sample_rate_and_one(n: int, data: st.DataObject) -> None:
    k = data.draw(st.integers(0, n))
    limit = evaluate_sample(n, k, 0.95, method="binomial").upper_deviation_limit
    assert k / n <= limit <= 1.0


@FEW
@given(st.integers(1, 500), st.sampled_from([0.0, 0.1, 0.25]))
def test_upper_limit_falls_as_the_sample_grows_at_a_fixed_rate(n: int, rate: float) -> None:
    small = evaluate_sample(10 * n, round(10 * n * rate), 0.95, method="binomial")
    large = evaluate_sample(20 * n, round(20 * n * rate), 0.95, method="binomial")
    assert large.upper_deviation_limit <= small.upper_deviation_limit


@FEW
@given(st.integers(1, 10**12), st.data())
def test_selection_is_distinct_and_inside_the_population(size: int, data: st.DataObject
                                                          ) -> None:
    n = data.draw(st.integers(1, min(size, 200)))
    items = select(NumberedPopulation(size), n, seed="properties").items
    assert len(items) == n == len(set(items))
    assert all(1 <= item <= size for item in items)  # type: ignore[operator]


def test_edge_values_are_finite_and_sane() -> None:
    for t in (0.0001, 0.9999):
        for c in (0.5, 0.999999):
            plan = size_sample(t, 0.0, c, method="binomial")
            assert plan.sample_size >= 1
            assert 0.0 <= plan.risk_of_overreliance <= 1 - c + 1e-12
    for population in (1, 10**12):
        result = evaluate_sample(1, 0, 0.95, population_size=population, method="hypergeometric")
        assert math.isfinite(result.upper_deviation_limit)
        assert 0.0 <= result.upper_deviation_limit <= 1.0
