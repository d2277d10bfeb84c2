"""Estimation sizes at ties, at the census and where the miss probability is not monotone.

Expected answers are derived in the tests with ``fractions.Fraction`` (the binomial
and hypergeometric sums written out term by term) or with scipy.stats where the sizes
run to thousands; each check names its source.
"""

from __future__ import annotations

import math
from fractions import Fraction

import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy import stats

from service.sampling.estimation import size_for_estimation
from tests.unit.sampling.ties import reference as ref
from tests.unit.sampling.ties.reference import usable_risk


def binomial_miss(n: int, p: Fraction, e: Fraction) -> Fraction:
    """P(|X/n − p| > e), X ~ Bin(n, p), as a fraction (the README's definition)."""
    return sum((math.comb(n, x) * p**x * (1 - p) ** (n - x)
                for x in range(n + 1) if abs(Fraction(x, n) - p) > e), Fraction(0))


def hypergeometric_miss(n: int, population: int, marked: int, e: Fraction) -> Fraction:
    centre = Fraction(marked, population)
    favourable = sum(math.comb(marked, x) * math.comb(population - marked, n - x)
                     for x in range(n + 1) if abs(Fraction(x, n) - centre) > e)
    return Fraction(favourable, math.comb(population, n))


def scipy_binomial_miss(n: int, p: float, e: Fraction) -> float:
    """The same miss from scipy.stats.binom, the hit outcomes counted exactly."""
    rate = Fraction(repr(p))
    low = math.ceil(n * (rate - e))
    high = math.floor(n * (rate + e))
    return float(stats.binom.cdf(low - 1, n, p) + stats.binom.sf(high, n, p))


def stable_answer(misses: list[Fraction] | list[float], alpha: Fraction | float) -> int:
    """Smallest n with every size from n to the end of the list meeting the condition."""
    answer = len(misses) + 1
    for n in range(len(misses), 0, -1):
        if misses[n - 1] > alpha:
            break
        answer = n
    return answer


def test_one_item_at_99_percent_misses_with_probability_exactly_one_percent_yet_is_no_plan():
    # Fractions: one item at p = 0.99 misses 0.99 ± 0.02 only when it conforms: 1/100,
    # exactly the risk; two items miss unless both deviate: 1 − 0.99² = 0.0199 > 0.01.
    p, e, alpha = Fraction("0.99"), Fraction("0.02"), Fraction("0.01")
    assert binomial_miss(1, p, e) == alpha
    assert binomial_miss(2, p, e) > alpha
    # scipy.stats.binom at every size up to the Chebyshev size p(1 − p)/(α e²) = 2475,
    # where the condition holds for good; fractions at the two sizes that decide.
    misses = [scipy_binomial_miss(n, 0.99, e) for n in range(1, 2476)]
    want = stable_answer(misses, 0.01)
    assert binomial_miss(want, p, e) <= alpha < binomial_miss(want - 1, p, e)
    plan = size_for_estimation(0.02, 0.99, 0.99, methods=["exact", "chebyshev"])
    rows = {row.method: row for row in plan.rows}
    assert rows["chebyshev"].sample_size == 2475
    assert rows["exact"].sample_size == want
    assert rows["exact"].miss_probability == pytest.approx(float(binomial_miss(want, p, e)),
                                                           rel=1e-12)


def test_the_answer_at_99_5_percent_is_not_the_first_size_that_passes():
    # Fractions: at p = 0.995 sizes 1 and 2 pass (0.005 and 1 − 0.995² = 0.009975) and
    # size 3 fails (1 − 0.995³ ≈ 0.0149); the answer lies beyond every such failure.
    p, e, alpha = Fraction("0.995"), Fraction("0.02"), Fraction("0.01")
    assert binomial_miss(1, p, e) <= alpha and binomial_miss(2, p, e) <= alpha
    assert binomial_miss(3, p, e) > alpha
    # scipy.stats.binom up to the Chebyshev size 0.995 · 0.005 / (0.01 · 0.0004) → 1244.
    misses = [scipy_binomial_miss(n, 0.995, e) for n in range(1, 1245)]
    want = stable_answer(misses, 0.01)
    assert want > 3
    assert binomial_miss(want, p, e) <= alpha < binomial_miss(want - 1, p, e)
    assert size_for_estimation(0.02, 0.99, 0.995, methods=["exact"]).rows[0].sample_size == want


def test_ten_items_at_one_percent_need_the_census():
    # M = ceil(10 · 0.01) = 1 deviation in 10 items; the sample rate of 9 items is 0 or
    # 1/9, 0.1 away from 1/10 > 0.05 when the deviant item is left out: P = 1/10 > 0.05.
    assert hypergeometric_miss(9, 10, 1, Fraction("0.05")) == Fraction(1, 10)
    assert hypergeometric_miss(10, 10, 1, Fraction("0.05")) == 0
    plan = size_for_estimation(0.05, 0.95, 0.01, 10)
    rows = {row.method: row for row in plan.rows}
    assert rows["exact"].sample_size == 10
    for name in ("chebyshev", "hoeffding"):
        assert rows[name].sample_size == 10
        assert rows[name].miss_probability == 0.0


def test_anticipated_count_is_rounded_up_as_in_attribute_sampling():
    # N = 10, p = 0.21: ceil(2.1) = 3 deviations (nearest rounding would give 2).  A sample
    # of 5 misses 3/10 ± 0.1 unless it holds 1 or 2 deviations (rates 0.2 and 0.4 are
    # exactly 0.1 away, not farther): fractions.
    want = hypergeometric_miss(5, 10, 3, Fraction("0.1"))
    assert want != hypergeometric_miss(5, 10, 2, Fraction("0.1"))
    from service.sampling.estimation import exact_miss_probability
    assert exact_miss_probability(5, 0.21, 0.1, 10) == pytest.approx(float(want), rel=1e-12)


FEW = settings(max_examples=40, derandomize=True, deadline=None, database=None,
               suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])


@FEW
@given(p=st.sampled_from(["0.1", "0.2", "0.25", "0.3", "0.5", "0.6", "0.75", "0.8", "0.9"]),
       e=st.sampled_from(["0.1", "0.15", "0.2", "0.25", "0.3"]),
       size=st.integers(1, 6))
def test_exact_sizes_at_a_rate_meet_the_rational_definition(p, e, size):
    # Confidence chosen so that the miss at ``size`` is exactly the risk (a tie).
    rate, margin = Fraction(p), Fraction(e)
    alpha = binomial_miss(size, rate, margin)
    assume(Fraction(1, 10**6) <= alpha <= Fraction(1, 2))
    confidence = usable_risk(alpha)
    assume(confidence is not None)
    chebyshev = math.ceil(rate * (1 - rate) / (alpha * margin**2))
    assume(chebyshev <= 200)
    want = stable_answer([binomial_miss(n, rate, margin) for n in range(1, chebyshev + 1)],
                         alpha)
    row = size_for_estimation(float(margin), confidence, float(rate), methods=["exact"]).rows[0]
    assert row.sample_size == want
    exact = binomial_miss(want, rate, margin)
    if exact == alpha:  # at the tie the miss is reported exactly, rounded once
        assert row.miss_probability == float(alpha)
    assert row.miss_probability == pytest.approx(float(exact), rel=1e-12)


def test_distribution_free_rows_never_report_a_miss_above_the_risk_in_small_populations():
    # Fractions: the exact hypergeometric miss at each row's size, for every population of
    # 2 to 30 items and a few anticipated rates.
    for population in range(2, 31):
        for p in ("0.01", "0.1", "0.3", "0.5"):
            plan = size_for_estimation(0.05, 0.95, float(p), population,
                                       methods=["chebyshev", "hoeffding"])
            marked = min(max(ref.deviant(Fraction(p), population), 1), population - 1)
            for row in plan.rows:
                miss = hypergeometric_miss(row.sample_size, population, marked,
                                           Fraction("0.05"))
                assert miss <= Fraction("0.05"), (population, p, row)


@pytest.mark.parametrize(("margin", "confidence"), [("0.05", "0.95"), ("0.1", "0.9"),
                                                    ("0.2", "0.8")])
def test_exact_sizes_in_small_populations_meet_the_rational_definition(margin, confidence):
    # Fractions: for every population of 2 to 30 items, the smallest n from which every
    # sample up to the census (n = N, no miss) keeps the miss within 1 − confidence.
    e, alpha = Fraction(margin), 1 - Fraction(confidence)
    for population in range(2, 31):
        for p in ("0.01", "0.1", "0.3", "0.5", "0.75"):
            marked = min(max(ref.deviant(Fraction(p), population), 1), population - 1)
            misses = [hypergeometric_miss(n, population, marked, e)
                      for n in range(1, population + 1)]
            want = stable_answer(misses, alpha)
            plan = size_for_estimation(float(margin), float(confidence), float(p), population,
                                       methods=["exact"])
            assert plan.rows[0].sample_size == want, (population, p)
