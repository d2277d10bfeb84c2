"""Confidence sequences: valid at any stopping time, hence wider than the fixed-size limit.

Fixed-size limits from scipy.stats.beta.ppf (Clopper & Pearson 1934); the mixture
boundary recomputed from scipy.special.betaln (Robbins 1970).
"""

from __future__ import annotations

import math
import random

import pytest
from scipy import special, stats

from service.sampling.errors import InvalidInput
from service.sampling.sequential.anytime import (
    PRIOR_A,
    PRIOR_B,
    confidence_sequence,
    upper_with_replacement,
    upper_without_replacement,
)


def _sequences() -> list[list[bool]]:
    rng = random.Random(20260)
    return [[False] * 300, [rng.random() < 0.02 for _ in range(400)],
            [rng.random() < 0.1 for _ in range(200)], [True, False] * 20]


@pytest.mark.parametrize("confidence", [0.9, 0.95, 0.99])
@pytest.mark.parametrize("results", _sequences())
def test_wider_than_clopper_pearson_at_every_n(results: list[bool], confidence: float) -> None:
    cs = confidence_sequence(results, confidence)
    for point in cs.points:
        s, t = point.deviations, point.sample_size
        fixed = 1.0 if s == t else stats.beta.ppf(confidence, s + 1, t - s)
        assert point.fixed_size_upper_deviation_limit == pytest.approx(fixed, rel=1e-9)
        assert point.upper_deviation_limit > fixed or fixed == 1.0


def test_the_boundary_is_where_the_mixture_martingale_reaches_one_over_alpha() -> None:
    for s, t in [(0, 50), (2, 120), (7, 90)]:
        u = upper_with_replacement(s, t, 0.05)
        log_m = (special.betaln(PRIOR_A + s, PRIOR_B + t - s) - special.betaln(PRIOR_A, PRIOR_B)
                 - s * math.log(u) - (t - s) * math.log1p(-u))
        assert log_m == pytest.approx(math.log(20), rel=1e-8)


def test_without_replacement_tends_to_with_replacement_for_huge_populations() -> None:
    for s, t in [(0, 60), (3, 150)]:
        size = 10**12
        finite = upper_without_replacement(s, t, 0.05, size) / size
        assert finite == pytest.approx(upper_with_replacement(s, t, 0.05), rel=1e-6)


def test_without_replacement_is_tighter_and_exact_when_every_item_is_tested() -> None:
    assert upper_without_replacement(0, 100, 0.05, 200) / 200 < upper_with_replacement(
        0, 100, 0.05)
    cs = confidence_sequence([False] * 49 + [True], population_size=50)
    assert cs.upper_deviation_limit == 1 / 50


def test_the_first_item_at_which_the_limit_passes_below_tolerable_is_named() -> None:
    cs = confidence_sequence([False] * 200, tolerable_rate=0.05)
    limits = [p.upper_deviation_limit for p in cs.points]
    assert cs.first_supporting_sample_size is not None
    k = cs.first_supporting_sample_size
    assert limits[k - 1] < 0.05 <= limits[k - 2]
    assert cs.supports_reliance is True
    # A fixed-size plan would need only 59 items (AICPA table A-1, recalled from memory):
    # the price of stopping at will.
    assert k > 59


@pytest.mark.parametrize(("kwargs", "field"), [
    ({"results": []}, "results"),
    ({"results": [False] * 10, "population_size": 5}, "population.size"),
    ({"results": [False], "confidence": 0.2}, "confidence"),
    ({"results": [False] * 10_001}, "results"),
])
def test_bad_input_names_the_field(kwargs: dict, field: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        confidence_sequence(**kwargs)
    assert caught.value.field == field
