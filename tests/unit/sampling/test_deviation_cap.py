"""The cap of 10,000 allowed deviations holds exactly, and the refusal names the plan.

Plans are checked with scipy.stats.binom (the reference library) at the answer and at
the size below it; the counts k = ceil(e × n) with fractions.
"""

from __future__ import annotations

import math
from fractions import Fraction

import pytest
from scipy import stats

from service.sampling.attributes import MAX_ALLOWED_DEVIATIONS, size_sample
from service.sampling.errors import ComputationTooLarge


def meets(n: int, expected: str, tolerable: float, risk: float) -> bool:
    k = math.ceil(Fraction(expected) * n)
    return bool(stats.binom.cdf(k, n, tolerable) <= risk)


def test_a_plan_over_the_cap_is_refused_naming_the_plan_it_would_need():
    # 21,054 items allowing ceil(0.4943 × 21,054) = 10,407 deviations meet 95% at 50%,
    # 21,053 items do not (scipy.stats.binom); 10,407 is over the cap.
    assert math.ceil(Fraction("0.4943") * 21054) == 10407
    assert meets(21054, "0.4943", 0.5, 0.05) and not meets(21053, "0.4943", 0.5, 0.05)
    with pytest.raises(ComputationTooLarge) as caught:
        size_sample(0.5, 0.4943, 0.95)
    assert caught.value.field == "expected_rate"
    assert "21,054 items allowing 10,407 deviations" in str(caught.value)
    assert f"{MAX_ALLOWED_DEVIATIONS:,}" in str(caught.value)


def test_a_plan_just_under_the_cap_is_answered():
    plan = size_sample(0.5, 0.494, 0.95)
    n, k = plan.sample_size, plan.allowed_deviations
    assert k <= MAX_ALLOWED_DEVIATIONS
    assert k == math.ceil(Fraction("0.494") * n)
    assert meets(n, "0.494", 0.5, 0.05) and not meets(n - 1, "0.494", 0.5, 0.05)
