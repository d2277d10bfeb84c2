"""Tests for the hypergeometric probabilities and the attribute plans that use them.

Every expected value comes from an independent source named beside the check:
scipy.stats (hypergeom, binom, beta) where it is accurate, exact rational arithmetic
(math.comb with fractions.Fraction) elsewhere, and published sample sizes for the plans.
"""

from __future__ import annotations

import doctest
import math
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats

from service.sampling import hypergeometric
from service.sampling.attributes import evaluate_sample, size_sample
from service.sampling.hypergeometric import cdf, pmf, sf

# --------------------------------------------------------------------------- exact references


def _exact_pmf(x: int, total: int, marked: int, drawn: int) -> Fraction:
    """C(M, x) C(N − M, n − x) / C(N, n), with math.comb in exact integers."""
    if not max(0, drawn - (total - marked)) <= x <= min(drawn, marked):
        return Fraction(0)
    return Fraction(math.comb(marked, x) * math.comb(total - marked, drawn - x),
                    math.comb(total, drawn))


def _exact_cdf(k: int, total: int, marked: int, drawn: int) -> Fraction:
    """P(X ≤ k) as the exact sum of math.comb products over the shorter side of k
    (the other side through Vandermonde's identity, Σ C(M, x) C(N − M, n − x) = C(N, n))."""
    low, high = max(0, drawn - (total - marked)), min(drawn, marked)
    if k < low:
        return Fraction(0)
    if k >= high:
        return Fraction(1)

    def counts(first: int, last: int) -> int:
        return sum(math.comb(marked, x) * math.comb(total - marked, drawn - x)
                   for x in range(first, last + 1))

    whole = math.comb(total, drawn)
    if k - low <= high - k:
        return Fraction(counts(low, k), whole)
    return 1 - Fraction(counts(k + 1, high), whole)


def _exact_cumulative(total: int, marked: int, drawn: int) -> tuple[int, list[int], int]:
    """(lowest outcome, cumulative counts C(M, x) C(N − M, n − x) summed up to each x, C(N, n)).

    For long supports the products are stepped in exact integers by the ratio of
    consecutive binomial coefficients, from the math.comb value at the lowest outcome;
    the last product and the total are checked against math.comb (Vandermonde's
    identity), so any slip in the stepping fails the test.
    """
    low, high = max(0, drawn - (total - marked)), min(drawn, marked)
    rest = total - marked - drawn
    count = math.comb(marked, low) * math.comb(total - marked, drawn - low)
    running, cumulative = count, [count]
    for x in range(low, high):
        count = count * (marked - x) * (drawn - x) // ((x + 1) * (rest + x + 1))
        running += count
        cumulative.append(running)
    assert count == math.comb(marked, high) * math.comb(total - marked, drawn - high)
    assert running == math.comb(total, drawn)
    return low, cumulative, running


def _close(got: float, want: Fraction, rtol: float) -> bool:
    expected = float(want)
    return abs(got - expected) <= rtol * abs(expected)


# --------------------------------------------------------------------------- against scipy


_MODERATE = [1, 2, 3, 10, 57, 100, 1000, 4200, 65_537, 100_003]


def _grid() -> list[tuple[int, int, int]]:
    cases = set()
    for total in _MODERATE:
        for drawn in {0, 1, 2, 59, 5000, total // 3, total // 2, total - 1, total}:
            for marked in {0, 1, 2, total // 7, total // 2, total - 1, total}:
                if 0 <= drawn <= total and 0 <= marked <= total:
                    cases.add((total, marked, drawn))
    return sorted(cases)


@pytest.mark.parametrize(("total", "marked", "drawn"), _grid())
def test_matches_scipy_on_moderate_populations(total: int, marked: int, drawn: int) -> None:
    # Reference: scipy.stats.hypergeom (its own error reaches about 3e-10 at N = 10^6 by the
    # exact checks below, so the grid stops at N ≈ 10^5, where it agrees with exact values).
    low, high = max(0, drawn - (total - marked)), min(drawn, marked)
    mean = drawn * marked / total
    spread = math.sqrt(mean * (1 - marked / total) * (total - drawn) / max(total - 1, 1))
    if high - low <= 400:
        k = np.arange(low - 1, high + 2, dtype=np.int64)
    else:  # every outcome within 6 standard deviations of the mean, and both ends
        near = np.arange(math.floor(mean - 6 * spread), math.ceil(mean + 6 * spread) + 1)
        ends = np.array([low - 1, low, low + 1, low + 2, high - 2, high - 1, high, high + 1])
        k = np.unique(np.concatenate([near, ends, np.linspace(low, high, 101).round()]))
        k = k.astype(np.int64)
    for ours, reference in ((pmf, stats.hypergeom.pmf), (cdf, stats.hypergeom.cdf),
                            (sf, stats.hypergeom.sf)):
        got = np.asarray(ours(k, total, marked, drawn))
        want = reference(k, total, marked, drawn)
        normal = want > 1e-280
        np.testing.assert_allclose(got[normal], want[normal], rtol=1e-10, atol=0)
        assert np.all(got[~normal] <= 1e-270)
    # integer arguments take a separate path: check it where the tails are longest
    for point in {math.floor(mean) + d for d in (-1, 0, 1)} | {
        round(mean - 3 * spread), round(mean + 3 * spread)
    }:
        for ours, reference in ((cdf, stats.hypergeom.cdf), (sf, stats.hypergeom.sf)):
            value = ours(point, total, marked, drawn)
            assert isinstance(value, float)
            want = float(reference(point, total, marked, drawn))
            if want > 1e-280:
                assert value == pytest.approx(want, rel=1e-10, abs=0)


# --------------------------------------------------------------------------- exact, huge N


_HUGE = [
    (10**12, 5 * 10**10, 59),
    (10**12, 5 * 10**10, 1000),
    (10**12, 10**10, 1000),
    (10**12, 1, 59),
    (10**12, 3, 1000),
    (10**12, 10**12 - 7, 59),
    (10**12, 5 * 10**11, 59),
    (10**11 + 7, 10**9 + 1, 1000),
]


@pytest.mark.parametrize(("total", "marked", "drawn"), _HUGE)
def test_exact_at_huge_populations(total: int, marked: int, drawn: int) -> None:
    # Reference: exact sums of math.comb products as fractions.Fraction.
    low, high = max(0, drawn - (total - marked)), min(drawn, marked)
    mean = drawn * marked / total
    points = {low, low + 1, low + 2, low + 5, math.floor(mean), math.floor(mean) + 1,
              high - 1, high}
    for k in sorted(p for p in points if low <= p <= high):
        lower = _exact_cdf(k, total, marked, drawn)
        probability = _exact_pmf(k, total, marked, drawn)
        for value, want in ((cdf(k, total, marked, drawn), lower),
                            (sf(k, total, marked, drawn), 1 - lower),
                            (pmf(k, total, marked, drawn), probability)):
            if want > Fraction(1, 10**300):
                assert _close(value, want, 1e-12), (k, value, float(want))
            else:
                assert value <= 1e-290
        as_array = np.array([k], dtype=np.int64)
        assert _close(float(cdf(as_array, total, marked, drawn)[0]), lower, 1e-12)
        if 1 - lower > Fraction(1, 10**300):
            assert _close(float(sf(as_array, total, marked, drawn)[0]), 1 - lower, 1e-12)


def test_zero_deviation_risk_at_a_trillion_items() -> None:
    # Reference: C(N − M, 59) / C(N, 59) in exact integers (math.comb, Fraction); the
    # same value scipy.stats.hypergeom.cdf misses in the fifth digit at this size.
    total, marked = 10**12, 5 * 10**10
    want = Fraction(math.comb(total - marked, 59), math.comb(total, 59))
    assert _close(cdf(0, total, marked, 59), want, 1e-13)
    assert _close(pmf(0, total, marked, 59), want, 1e-13)


@pytest.mark.parametrize(("total", "marked", "drawn"), [
    (10**6, 5 * 10**5, 4000),  # standard deviation 31: tails of several hundred terms
    (10**6, 10**4, 4000),
    (10**12, 5 * 10**11, 3000),
    (10**12, 2 * 10**10, 3000),
])
def test_exact_long_tails(total: int, marked: int, drawn: int) -> None:
    # Reference: exact cumulative sums of the math.comb products (see _exact_cumulative).
    low, cumulative, whole = _exact_cumulative(total, marked, drawn)
    mean = drawn * marked / total
    spread = math.sqrt(mean * (1 - marked / total) * (total - drawn) / (total - 1))
    high = min(drawn, marked)
    candidates = {round(mean + d * spread) for d in (-12, -6, -3, -1, 0, 1, 3, 6, 12)}
    points = sorted(p for p in candidates | {math.floor(mean)} if low <= p < high)
    k = np.array(points, dtype=np.int64)
    lower = [Fraction(cumulative[p - low], whole) for p in points]
    upper = [1 - value for value in lower]
    below, above = cdf(k, total, marked, drawn), sf(k, total, marked, drawn)
    for i, point in enumerate(points):
        for got in (float(below[i]), cdf(point, total, marked, drawn)):
            assert _close(got, lower[i], 1e-12), (point, got, float(lower[i]))
        for got in (float(above[i]), sf(point, total, marked, drawn)):
            assert _close(got, upper[i], 1e-12), (point, got, float(upper[i]))


def test_exact_with_ten_million_drawn() -> None:
    # Reference: math.comb with Fraction; N − n = 20 keeps every coefficient small
    # (C(N, n) = C(N, 20)), so the exact values are cheap although n = 10^7.
    total, marked, drawn = 10**7 + 20, 10**6, 10**7
    low, high = max(0, drawn - (total - marked)), min(drawn, marked)
    k = np.arange(low, high + 1, dtype=np.int64)
    want_pmf = [_exact_pmf(int(x), total, marked, drawn) for x in k]
    lower = [sum(want_pmf[: i + 1], Fraction(0)) for i in range(len(want_pmf))]
    got_pmf, got_cdf = pmf(k, total, marked, drawn), cdf(k, total, marked, drawn)
    got_sf = sf(k, total, marked, drawn)
    for i in range(len(k)):
        assert _close(float(got_pmf[i]), want_pmf[i], 1e-12)
        assert _close(float(got_cdf[i]), lower[i], 1e-12)
        if i < len(k) - 1:
            assert _close(float(got_sf[i]), 1 - lower[i], 1e-12)


def test_ten_million_drawn_from_a_trillion() -> None:
    # No exact reference is practical here (C(10^12, 10^7) has 10^8 digits): the tail,
    # summed by the recurrence from one saddle-point probability, is compared with the
    # probabilities evaluated one by one by the saddle-point formula and added with
    # math.fsum (two independent computations of the same sum).
    total, drawn = 10**12, 10**7
    for marked in (5 * 10**11, 5 * 10**10):
        mean = drawn * marked / total
        spread = math.sqrt(mean * (1 - marked / total))
        outcomes = np.arange(int(mean - 40 * spread), int(mean + 40 * spread), dtype=np.int64)
        probabilities = np.asarray(pmf(outcomes, total, marked, drawn))
        for k in (int(mean - 5 * spread), int(mean) - 1, int(mean + 3 * spread)):
            direct = math.fsum(probabilities[outcomes <= k].tolist())
            assert cdf(k, total, marked, drawn) == pytest.approx(direct, rel=1e-13)
            beyond = math.fsum(probabilities[outcomes > k].tolist())
            assert sf(k, total, marked, drawn) == pytest.approx(beyond, rel=1e-13)


# --------------------------------------------------------------------------- edges and shapes


@pytest.mark.parametrize(("total", "marked", "drawn"), [
    (1, 0, 0), (1, 0, 1), (1, 1, 0), (1, 1, 1),
    (10**12, 0, 59), (10**12, 10**12, 59), (10**12, 5 * 10**10, 0),
    (10**12, 5 * 10**10, 10**12), (4200, 210, 4200), (10, 3, 9), (10, 8, 5),
])
def test_edges_are_exact(total: int, marked: int, drawn: int) -> None:
    # Reference: the support max(0, n − (N − M)) … min(n, M) (Johnson, Kemp & Kotz 2005, §6.1)
    low, high = max(0, drawn - (total - marked)), min(drawn, marked)
    for k in (low - 2, low - 1):
        assert cdf(k, total, marked, drawn) == 0.0
        assert sf(k, total, marked, drawn) == 1.0
        assert pmf(k, total, marked, drawn) == 0.0
    for k in (high, high + 1, high + 10**6):
        assert cdf(k, total, marked, drawn) == 1.0
        assert sf(k, total, marked, drawn) == 0.0
    assert pmf(high + 1, total, marked, drawn) == 0.0
    if low == high:  # a single possible outcome
        assert pmf(low, total, marked, drawn) == 1.0
    ks = np.arange(low - 2, high + 3, dtype=np.int64)
    below = np.asarray(cdf(ks, total, marked, drawn))
    above = np.asarray(sf(ks, total, marked, drawn))
    assert np.all(below[ks < low] == 0.0) and np.all(below[ks >= high] == 1.0)
    assert np.all(above[ks < low] == 1.0) and np.all(above[ks >= high] == 0.0)


def test_small_population_by_enumeration() -> None:
    # Reference: exact probabilities from math.comb for every k, M, n of a population of 9.
    total = 9
    for marked in range(total + 1):
        for drawn in range(total + 1):
            for k in range(-1, total + 1):
                want = _exact_pmf(k, total, marked, drawn)
                if want == 0:
                    assert pmf(k, total, marked, drawn) == 0.0
                else:
                    assert _close(pmf(k, total, marked, drawn), want, 1e-14)
                lower = _exact_cdf(k, total, marked, drawn)
                assert abs(cdf(k, total, marked, drawn) - float(lower)) <= 1e-15
                assert abs(sf(k, total, marked, drawn) - float(1 - lower)) <= 1e-15


def test_outside_the_domain_gives_nan() -> None:
    for args in ((0, 0, 0), (10, 11, 3), (10, -1, 3), (10, 3, 11), (10, 3, -1), (2**53, 1, 1)):
        for function in (pmf, cdf, sf):
            assert math.isnan(function(0, *args))
    values = cdf(np.array([0, 0]), np.array([10, 10]), np.array([3, 11]), 2)
    assert not math.isnan(values[0]) and math.isnan(values[1])


def test_broadcasting_and_result_types() -> None:
    # Reference: the same functions called on integer arguments one element at a time.
    k = np.array([[0], [1], [3]], dtype=np.int64)
    marked = np.array([0, 50, 500, 5000], dtype=np.int64)
    for function in (pmf, cdf, sf):
        result = function(k, 10**4, marked, 120)
        assert isinstance(result, np.ndarray)
        assert result.shape == (3, 4) and result.dtype == np.float64
        for i in range(3):
            for j in range(4):
                one = function(int(k[i, 0]), 10**4, int(marked[j]), 120)
                assert isinstance(one, float)
                assert result[i, j] == pytest.approx(one, rel=1e-13, abs=1e-300)
    assert isinstance(cdf(np.int64(2), np.int64(100), np.int64(5), np.int64(10)), float)
    assert np.asarray(cdf(np.array(2), 100, 5, 10)).shape == ()
    assert cdf(np.zeros((0,), dtype=np.int64), 100, 5, 10).shape == (0,)


def test_doctests() -> None:
    assert doctest.testmod(hypergeometric).failed == 0


# --------------------------------------------------------------------------- the plans


def test_discovery_plan_for_a_trillion_items() -> None:
    # Reference: AICPA Audit Sampling guide, table A-1 (5% risk, 5% tolerable, 0 expected):
    # 59 items, the binomial value the hypergeometric model reaches for very large N.
    plan = size_sample(0.05, 0.0, 0.95, population_size=10**12)
    assert (plan.method, plan.sample_size, plan.allowed_deviations) == ("hypergeometric", 59, 0)
    # Reference: C(N − M, 59) / C(N, 59), M = 5·10^10, by math.comb and Fraction.
    exact = Fraction(math.comb(10**12 - 5 * 10**10, 59), math.comb(10**12, 59))
    assert _close(plan.risk_of_overreliance, exact, 1e-12)


def test_one_deviation_plan_for_a_trillion_items() -> None:
    # Reference: AICPA Audit Sampling guide, table A-1 (5% tolerable, 1% expected): 93 (1).
    plan = size_sample(0.05, 0.01, 0.95, population_size=10**12)
    assert (plan.sample_size, plan.allowed_deviations) == (93, 1)


@pytest.mark.parametrize(("tolerable", "expected"), [
    (0.05, 0.0), (0.05, 0.01), (0.1, 0.02), (0.03, 0.005), (0.02, 0.0), (0.06, 0.02),
])
def test_trillion_item_plans_equal_binomial_plans(tolerable: float, expected: float) -> None:
    # Reference: the binomial plan, computed from scipy.stats.binom; a sampling fraction
    # below 10^-9 cannot move these sample sizes.
    big = size_sample(tolerable, expected, 0.95, population_size=10**12)
    binomial = size_sample(tolerable, expected, 0.95, method="binomial")
    assert (big.sample_size, big.allowed_deviations) == (
        binomial.sample_size, binomial.allowed_deviations)
    assert big.risk_of_overreliance == pytest.approx(binomial.risk_of_overreliance, rel=1e-6)


@pytest.mark.parametrize(("population", "size"), [(100, 45), (600, 56)])
def test_small_population_discovery_plans(population: int, size: int) -> None:
    # Reference: the textbook hypergeometric example (5% tolerable rate, 95% confidence:
    # 45 items from 100, 56 from 600), and the defining condition in exact arithmetic.
    plan = size_sample(0.05, 0.0, 0.95, population_size=population)
    assert (plan.sample_size, plan.allowed_deviations) == (size, 0)
    marked = math.ceil(population * Fraction(5, 100))
    assert _exact_cdf(0, population, marked, size) <= Fraction(5, 100)
    assert _exact_cdf(0, population, marked, size - 1) > Fraction(5, 100)


def test_evaluation_at_a_trillion_items_is_near_clopper_pearson() -> None:
    # Reference: the binomial (Clopper–Pearson) bound scipy.stats.beta.ppf(0.95, 4, 10^6 − 3);
    # drawing 10^6 of 10^12 items moves it by about the sampling fraction, 10^-6, relative,
    # and the count of deviant items is a whole number (a step of 10^-12 in the rate).
    total = 10**12
    result = evaluate_sample(10**6, 3, 0.95, population_size=total)
    binomial = float(stats.beta.ppf(0.95, 4, 10**6 - 3))
    assert result.upper_deviation_count is not None
    assert abs(result.upper_deviation_limit - binomial) <= 1e-6 * binomial + 2 / total


def test_evaluation_counts_by_exact_scan() -> None:
    # Reference: every deviant count M of a population of 1000 scanned with exact
    # probabilities (math.comb, Fraction): the upper count is the largest M with
    # P(X ≤ d) > 1 − confidence, the lower count the smallest M with P(X ≥ d) > α/2.
    total, drawn, found = 1000, 100, 2
    result = evaluate_sample(drawn, found, 0.95, population_size=total)
    upper = max(m for m in range(total + 1)
                if _exact_cdf(found, total, m, drawn) > Fraction(5, 100))
    low = min(m for m in range(total + 1)
              if 1 - _exact_cdf(found - 1, total, m, drawn) > Fraction(25, 1000))
    high = max(m for m in range(total + 1)
               if _exact_cdf(found, total, m, drawn) > Fraction(25, 1000))
    assert result.upper_deviation_count == upper
    assert result.interval.low == low / total
    assert result.interval.high == high / total
