"""Interval ends in a population of 10^12 items, at the exact level.

At these sizes a relative error of 10^-10 in the risk moves an end by one count. The
expected ends are checked here on both sides with fractions (math.comb sums, see
``reference.py``): the end qualifies and its neighbour outside does not.
"""

from __future__ import annotations

from fractions import Fraction

from service.sampling.attributes import evaluate_sample
from tests.unit.sampling.ties import reference as ref

N = 10**12


def test_low_end_of_59_of_59_at_99_9999_percent():
    # Smallest M with P(X ≥ 59 | M) > (1 − 0.999999) / 2: P(X ≥ 59) = P(X = 59), n = 59.
    half_risk = (1 - Fraction("0.999999")) / 2
    low = 781_993_028_697
    assert 1 - ref.hypergeometric_lower(58, N, low, 59) > half_risk
    assert 1 - ref.hypergeometric_lower(58, N, low - 1, 59) <= half_risk
    result = evaluate_sample(59, 59, 0.999999, population_size=N)
    assert result.interval.low == low / N


def test_high_end_of_7_of_93_at_99_999_percent():
    # Largest M with P(X ≤ 7 | M) > (1 − 0.99999) / 2.
    half_risk = (1 - Fraction("0.99999")) / 2
    high = 261_115_940_066
    assert ref.hypergeometric_lower(7, N, high, 93) > half_risk
    assert ref.hypergeometric_lower(7, N, high + 1, 93) <= half_risk
    result = evaluate_sample(93, 7, 0.99999, population_size=N)
    assert result.interval.high == high / N


def test_clopper_pearson_upper_bound_with_no_deviation_at_a_risk_of_one_in_a_million():
    # With d = 0 the Clopper–Pearson upper bound is 1 − α^(1/n) (Clopper & Pearson 1934);
    # computed here with Python's decimal module at 50 digits, α = 1 − 0.999999 exactly.
    from decimal import Decimal, localcontext

    with localcontext() as context:
        context.prec = 50
        want = 1 - (Decimal(1) - Decimal("0.999999")) ** (Decimal(1) / Decimal(59))
    result = evaluate_sample(59, 0, 0.999999, method="binomial")
    assert abs(Decimal(result.upper_deviation_limit) - want) <= Decimal("1e-14") * want
