"""Tests for sample sizes that estimate a rate within a margin.

Every expected value is either a published result, a textbook formula evaluated here in
exact arithmetic, or an independent computation with a reference library (scipy.stats,
statsmodels, or exact integer binomial coefficients); the source is named beside each check.
"""

from __future__ import annotations

import dataclasses
import doctest
import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from statsmodels.stats.proportion import proportion_confint

from service.sampling import estimation
from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.estimation import (
    EstimationPlan,
    EstimationRow,
    exact_miss_probability,
    size_for_estimation,
)


def _size(method: str, margin: float, confidence: float, rate: float | None = None,
          population: int | None = None) -> int:
    plan = size_for_estimation(margin, confidence, rate, population, methods=[method])
    return plan.rows[0].sample_size


def _alpha(confidence: float) -> float:
    return float(1 - Fraction(repr(confidence)))


# --------------------------------------------------------------------------- independent references


def _reference_binomial_miss(n: int, p: float, e: float) -> float:
    """P(|X − n p| > n e), X ~ Bin(n, p): scipy.stats.binom.pmf summed over the outcomes
    that miss, chosen by exact rational comparison."""
    rate, margin = Fraction(repr(p)), Fraction(repr(e))
    misses = [x for x in range(n + 1) if abs(x - n * rate) > n * margin]
    return float(np.sum(stats.binom.pmf(misses, n, p))) if misses else 0.0


def _reference_binomial_supremum(n: int, e: float) -> float:
    """sup over p of P(|X − n p| > n e), by brute force with scipy.stats.binom.

    The miss probability is a polynomial in p between the breakpoints p = x/n ± e, so its
    supremum is a one-sided limit at a breakpoint.  Here every breakpoint on both sides is
    evaluated: on each side the hit outcomes are fixed, so the one-sided limit is the
    binomial probability of the outcomes outside them at the breakpoint rate.
    """
    margin = Fraction(repr(e))
    best = 0.0
    for x in range(n + 1):
        for breakpoint in (Fraction(x, n) + margin, Fraction(x, n) - margin):
            if not 0 < breakpoint < 1:
                continue
            for side in (Fraction(1, 10**12), -Fraction(1, 10**12)):
                near = breakpoint + side  # decides which outcomes hit on that side
                misses = [k for k in range(n + 1) if abs(k - n * near) > n * margin]
                value = float(np.sum(stats.binom.pmf(misses, n, float(breakpoint))))
                best = max(best, value)
    return best


def _reference_binomial_supremum_vectorised(n: int, e: float) -> float:
    """The same supremum for large n, with scipy.stats.binom.cdf / sf at every breakpoint
    p = x/n + e (both sides); by the symmetry p ↔ 1 − p these cover p = x/n − e too."""
    margin = Fraction(repr(e))
    width = 2 * n * margin
    x = np.arange(0, math.ceil(n * (1 - margin)))
    p = x / n + e
    above = stats.binom.cdf(x, n, p) + stats.binom.sf(x + math.floor(width), n, p)
    below = stats.binom.cdf(x - 1, n, p) + stats.binom.sf(x + math.ceil(width) - 1, n, p)
    return float(max(above.max(), below.max()))


def _reference_hypergeometric_miss(n: int, big_n: int, m: int, e: float) -> float:
    """P(|X/n − M/N| > e), X ~ Hypergeometric(N, M, n), in exact integer arithmetic from
    binomial coefficients (math.comb), converted to float at the end."""
    margin = Fraction(repr(e))
    total = sum(
        math.comb(m, x) * math.comb(big_n - m, n - x)
        for x in range(max(0, n - (big_n - m)), min(n, m) + 1)
        if abs(Fraction(x, n) - Fraction(m, big_n)) > margin
    )
    return float(Fraction(total, math.comb(big_n, n)))


def _reference_hypergeometric_maximum(n: int, big_n: int, e: float) -> float:
    """max over M of the hypergeometric miss probability, scipy.stats.hypergeom.pmf summed."""
    margin = Fraction(repr(e))
    best = 0.0
    for m in range(big_n + 1):
        misses = [x for x in range(n + 1) if abs(Fraction(x, n) - Fraction(m, big_n)) > margin]
        if misses:
            best = max(best, float(np.sum(stats.hypergeom.pmf(misses, big_n, m, n))))
    return best


# --------------------------------------------------------------------------- closed forms


def test_chebyshev_worst_case_is_exactly_2000() -> None:
    # Chebyshev's inequality (standard result): P(|p̂ − p| ≥ e) ≤ p(1−p)/(n e²) ≤ 1/(4 n e²);
    # 1/(4 · 0.05 · 0.05²) = 2000 exactly.  In floating point that product gives
    # 2000.0000000000002, whose naive ceiling would be 2001.
    assert _size("chebyshev", 0.05, 0.95) == 2000


def test_hoeffding_worst_case_is_738() -> None:
    # Hoeffding (1963), JASA 58:13–30: P(|p̂ − p| ≥ e) ≤ 2 exp(−2 n e²);
    # n ≥ ln(2/0.05)/(2 · 0.05²) = 737.78, so 738.
    assert _size("hoeffding", 0.05, 0.95) == 738


def test_normal_worst_case_is_385() -> None:
    # Cochran, Sampling Techniques (3rd ed. 1977, §4.4), n₀ = z² P Q / d²:
    # 1.959964² · 0.25 / 0.05² = 384.15, the textbook 385 for ±5 % at 95 %.
    assert _size("normal", 0.05, 0.95) == 385


def test_normal_with_finite_population_is_353() -> None:
    # Cochran (1977, §4.4): n = n₀ / (1 + (n₀ − 1)/N) with n₀ = 384.146 unrounded and
    # N = 4200 gives 352.03, rounded up to 353.
    z = stats.norm.ppf(0.975)
    n0 = z * z * 0.25 / 0.05**2
    assert math.ceil(n0 / (1 + (n0 - 1) / 4200)) == 353  # the textbook formula itself
    assert _size("normal", 0.05, 0.95, population=4200) == 353


def test_normal_correction_uses_the_unrounded_size() -> None:
    # Cochran (1977, §4.4) with N = 133: from n₀ = 384.146 the corrected size is 98.99,
    # so 99; rounding n₀ up to 385 first would give 99.04, so 100.
    assert _size("normal", 0.05, 0.95, population=133) == 99


def test_normal_with_anticipated_rate() -> None:
    # Cochran (1977, §4.4) with P = 0.1: 1.959964² · 0.09 / 0.03² = 384.15, so 385.
    assert _size("normal", 0.03, 0.95, rate=0.1) == 385


def test_chebyshev_with_anticipated_rate_and_other_confidence() -> None:
    # Chebyshev's inequality: n ≥ p(1−p)/((1−c) e²) = 0.16/(0.1 · 0.01) = 160 exactly.
    assert _size("chebyshev", 0.1, 0.9, rate=0.2) == 160


@pytest.mark.parametrize(("margin", "confidence", "rate", "population"), [
    (0.05, 0.95, None, 4200),
    (0.03, 0.9, 0.2, 1000),
    (0.1, 0.99, 0.5, 50),
])
def test_chebyshev_finite_population_meets_the_variance_bound(
        margin: float, confidence: float, rate: float | None, population: int) -> None:
    # Without replacement Var(p̂) = P Q / n · (N − n)/(N − 1) (Cochran 1977, ch. 3, the
    # variance of a sample proportion); Chebyshev needs Var ≤ α e².  The size must meet
    # it and the size below must not.
    pq = Fraction(1, 4) if rate is None else Fraction(repr(rate)) * (1 - Fraction(repr(rate)))
    limit = (1 - Fraction(repr(confidence))) * Fraction(repr(margin)) ** 2

    def variance(n: int) -> Fraction:
        return pq / n * Fraction(population - n, population - 1)

    n = _size("chebyshev", margin, confidence, rate, population)
    assert variance(n) <= limit
    assert variance(n - 1) > limit


def test_hoeffding_size_is_not_reduced_for_a_finite_population() -> None:
    # Hoeffding (1963), Theorem 4: sampling without replacement satisfies the same bound,
    # so the same size stays valid; it is only capped at the population size.
    plan = size_for_estimation(0.05, 0.95, population_size=4200, methods=["hoeffding"])
    assert plan.rows[0].sample_size == 738
    assert plan.rows[0].finite_population_correction is False
    small = size_for_estimation(0.05, 0.95, population_size=300, methods=["hoeffding"])
    assert small.rows[0].sample_size == 300


# --------------------------------------------------------------------------- Wilson


def _statsmodels_wilson_half_width(n: int, rate: float, confidence: float) -> float:
    low, high = proportion_confint(rate * n, n, alpha=1 - confidence, method="wilson")
    return float(high - low) / 2.0


@pytest.mark.parametrize(("margin", "confidence", "rate"), [
    (0.05, 0.95, None),
    (0.01, 0.99, None),
    (0.03, 0.9, 0.1),
    (0.1, 0.95, 0.02),
    (0.2, 0.8, 0.7),
])
def test_wilson_against_statsmodels(margin: float, confidence: float,
                                    rate: float | None) -> None:
    # Wilson (1927), JASA 22:209–212, as implemented by
    # statsmodels.stats.proportion.proportion_confint(method="wilson"): the half-width at
    # the returned n is within the margin and at n − 1 it is not.
    n = _size("wilson", margin, confidence, rate)
    planning_rate = 0.5 if rate is None else rate
    assert _statsmodels_wilson_half_width(n, planning_rate, confidence) <= margin
    assert _statsmodels_wilson_half_width(n - 1, planning_rate, confidence) > margin


# --------------------------------------------------------------------------- exact miss probability


def test_exact_miss_probability_small_case_by_hand() -> None:
    # X ~ Bin(10, 1/2), e = 0.2: misses are X ≤ 2 or X ≥ 8, probability
    # 2 · (1 + 10 + 45)/1024 = 112/1024 (binomial coefficients).
    assert exact_miss_probability(10, 0.5, 0.2) == pytest.approx(112 / 1024, rel=1e-14)


def test_boundary_outcome_is_a_hit() -> None:
    # e = 0.3, p = 0.5, n = 10: |8 − 5| = 3 = n e is not a miss; misses are X ≤ 1 or
    # X ≥ 9, probability 2 · 11/1024 (binomial coefficients).
    assert exact_miss_probability(10, 0.5, 0.3) == pytest.approx(22 / 1024, rel=1e-14)


def test_float_rounding_does_not_change_the_count_of_outcomes() -> None:
    # 10 · (0.7 + 0.1) is 7.999999999999999 in floating point, which would wrongly make
    # x = 8 a miss; exactly, |8 − 7| = 1 = n e is a hit.  Reference: scipy.stats.binom,
    # misses X ≤ 5 or X ≥ 9.
    assert 10 * (0.7 + 0.1) < 8  # the floating-point trap is real
    expected = stats.binom.cdf(5, 10, 0.7) + stats.binom.sf(8, 10, 0.7)
    assert exact_miss_probability(10, 0.7, 0.1) == pytest.approx(expected, rel=1e-13)


@pytest.mark.parametrize(("n", "p", "e"), [(37, 0.31, 0.07), (200, 0.05, 0.02),
                                           (1000, 0.5, 0.03), (5, 0.9, 0.45)])
def test_exact_miss_probability_against_scipy(n: int, p: float, e: float) -> None:
    # Reference: scipy.stats.binom.pmf summed over the missing outcomes.
    assert exact_miss_probability(n, p, e) == pytest.approx(
        _reference_binomial_miss(n, p, e), rel=1e-12, abs=1e-300)


@pytest.mark.parametrize(("n", "e"), [(1, 0.3), (7, 0.1), (25, 0.1), (40, 0.25), (60, 0.05)])
def test_worst_case_against_brute_force(n: int, e: float) -> None:
    # Reference: every breakpoint of the miss probability, both sides, by
    # scipy.stats.binom.pmf sums.
    assert exact_miss_probability(n, None, e) == pytest.approx(
        _reference_binomial_supremum(n, e), rel=1e-12)


@pytest.mark.parametrize(("n", "e"), [(3000, 0.02), (5000, 0.02), (20000, 0.01)])
def test_worst_case_large_n_against_scipy(n: int, e: float) -> None:
    # Reference: scipy.stats.binom at all breakpoints (no pruning).
    assert exact_miss_probability(n, None, e) == pytest.approx(
        _reference_binomial_supremum_vectorised(n, e), rel=1e-12)


@given(n=st.integers(1, 60), e=st.sampled_from([0.05, 0.1, 0.2, 0.3]),
       p=st.floats(0.001, 0.999))
@settings(max_examples=60, deadline=None)
def test_worst_case_dominates_every_rate(n: int, e: float, p: float) -> None:
    # The worst case is a supremum over rates, so it is at least the miss probability at
    # any one rate (computed independently with scipy.stats.binom).
    assert exact_miss_probability(n, None, e) >= _reference_binomial_miss(n, p, e) - 1e-13


def test_hypergeometric_miss_against_exact_integers() -> None:
    # N = 20, p = 0.25 → M = 5 deviations; n = 8, e = 0.125.  Reference: exact sums of
    # binomial coefficients C(M, x) C(N − M, n − x) / C(N, n).
    assert exact_miss_probability(8, 0.25, 0.125, 20) == pytest.approx(
        _reference_hypergeometric_miss(8, 20, 5, 0.125), rel=1e-13)


def test_population_deviations_round_up() -> None:
    # Documented rule: M = N p rounded up, as in attribute sampling (10 · 0.25 = 2.5 → 3),
    # and the miss is measured from M/N.  Reference: exact integer sums.
    assert exact_miss_probability(4, 0.25, 0.2, 10) == pytest.approx(
        _reference_hypergeometric_miss(4, 10, 3, 0.2), rel=1e-13)


@pytest.mark.parametrize(("n", "big_n", "m", "e"), [
    (120, 4200, 420, 0.05), (353, 4200, 2100, 0.05), (700, 9000, 77, 0.01),
])
def test_hypergeometric_miss_against_scipy(n: int, big_n: int, m: int, e: float) -> None:
    # Reference: scipy.stats.hypergeom.pmf summed over the missing outcomes.  The rate is
    # the decimal m / N prints as; the documented rule M = ceil(N p) on that decimal
    # (0.008555555555555556 · 9000 = 77.000000000000004 → 78).
    p = m / big_n
    m = math.ceil(big_n * Fraction(repr(p)))
    margin = Fraction(repr(e))
    misses = [x for x in range(n + 1) if abs(Fraction(x, n) - Fraction(m, big_n)) > margin]
    expected = float(np.sum(stats.hypergeom.pmf(misses, big_n, m, n)))
    assert exact_miss_probability(n, p, e, big_n) == pytest.approx(expected, rel=1e-11)


def test_hypergeometric_miss_large_population_against_exact_integers() -> None:
    # N = 1,000,000, M = 123,456, n = 600, e = 0.01.  Reference: exact integer sums of
    # binomial coefficients (at this N scipy.stats.hypergeom agrees only to about 1e-10).
    assert exact_miss_probability(600, 0.123456, 0.01, 1_000_000) == pytest.approx(
        _reference_hypergeometric_miss(600, 1_000_000, 123_456, 0.01), rel=1e-13)


@pytest.mark.parametrize(("n", "big_n", "e"), [(1, 1, 0.1), (3, 7, 0.2), (15, 40, 0.1),
                                               (30, 61, 0.05), (90, 400, 0.1)])
def test_hypergeometric_worst_case_against_every_population(n: int, big_n: int, e: float) -> None:
    # Reference: scipy.stats.hypergeom.pmf sums for every M = 0 … N.
    assert exact_miss_probability(n, None, e, big_n) == pytest.approx(
        _reference_hypergeometric_maximum(n, big_n, e), rel=1e-11, abs=1e-300)


def test_census_never_misses() -> None:
    # n = N: the sample rate is the population rate.
    assert exact_miss_probability(50, 0.3, 0.01, 50) == 0.0
    assert exact_miss_probability(50, None, 0.01, 50) == 0.0


# --------------------------------------------------------------------------- exact sizing


@pytest.mark.parametrize(("margin", "confidence", "rate"), [
    (0.05, 0.95, 0.1),
    (0.03, 0.9, 0.5),
    (0.1, 0.99, 0.3),
    (0.02, 0.95, 0.04),
    (0.1, 0.8, 0.85),
])
def test_exact_size_with_rate_against_scipy(margin: float, confidence: float,
                                            rate: float) -> None:
    # Reference: scipy.stats.binom.pmf sums.  Documented rule: the plain smallest n, so the
    # condition holds at n and fails at n − 1.
    alpha = _alpha(confidence)
    plan = size_for_estimation(margin, confidence, rate, methods=["exact"])
    row = plan.rows[0]
    n = row.sample_size
    assert n > 1
    assert _reference_binomial_miss(n, rate, margin) <= alpha
    assert _reference_binomial_miss(n - 1, rate, margin) > alpha
    assert row.miss_probability == pytest.approx(_reference_binomial_miss(n, rate, margin),
                                                 rel=1e-12)


@pytest.mark.parametrize(("margin", "confidence"), [(0.1, 0.9), (0.15, 0.95), (0.25, 0.8)])
def test_exact_worst_case_size_against_brute_force(margin: float, confidence: float) -> None:
    # Reference: brute-force supremum over rates (scipy.stats.binom.pmf sums); plain
    # smallest n: holds at n, fails at n − 1.
    alpha = _alpha(confidence)
    n = _size("exact", margin, confidence)
    assert _reference_binomial_supremum(n, margin) <= alpha
    assert _reference_binomial_supremum(n - 1, margin) > alpha


@pytest.mark.parametrize(("margin", "confidence"), [(0.25, 0.8), (0.3, 0.9)])
def test_exact_worst_case_size_holds_for_good(margin: float, confidence: float) -> None:
    # Reference: brute-force supremum over rates (scipy.stats.binom.pmf sums) at every size
    # from the answer to the Hoeffding size, beyond which Hoeffding's inequality holds.
    alpha = _alpha(confidence)
    plan = size_for_estimation(margin, confidence, methods=["exact", "hoeffding"])
    n, last = plan.rows[0].sample_size, plan.rows[1].sample_size
    assert all(_reference_binomial_supremum(size, margin) <= alpha
               for size in range(n, last + 1))


def test_exact_worst_case_size_one_percent_at_99() -> None:
    # Reference: scipy.stats.binom at every breakpoint, at n and n − 1.
    n = _size("exact", 0.01, 0.99)
    assert _reference_binomial_supremum_vectorised(n, 0.01) <= 0.01
    assert _reference_binomial_supremum_vectorised(n - 1, 0.01) > 0.01


@pytest.mark.parametrize(("margin", "confidence", "rate", "population"), [
    (0.2, 0.9, 0.5, 12),
    (0.1, 0.8, 0.3, 40),
    (0.25, 0.95, None, 20),
    (0.1, 0.9, None, 33),
])
def test_exact_size_holds_from_the_answer_on(margin: float, confidence: float,
                                             rate: float | None, population: int | None) -> None:
    # The documented lattice rule: every size from the answer to the census meets the
    # condition and the size below it does not, checked with exact integer sums.
    alpha = _alpha(confidence)
    n = _size("exact", margin, confidence, rate, population)
    assert population is not None

    def reference(size: int) -> float:
        if rate is None:
            return _reference_hypergeometric_maximum(size, population, margin)
        # documented rule: M = N p rounded up, kept within 1 … N − 1
        m = min(max(math.ceil(population * Fraction(repr(rate))), 1), population - 1)
        return _reference_hypergeometric_miss(size, population, m, margin)

    assert all(reference(size) <= alpha for size in range(n, population + 1))
    assert reference(n - 1) > alpha


def test_exact_with_population_against_scipy() -> None:
    # N = 4200, p = 0.1 (M = 420), e = 0.05, 95 %: scipy.stats.hypergeom at n and n − 1.
    n = _size("exact", 0.05, 0.95, 0.1, 4200)
    margin = Fraction(1, 20)

    def reference(size: int) -> float:
        misses = [x for x in range(size + 1) if abs(Fraction(x, size) - Fraction(1, 10)) > margin]
        return float(np.sum(stats.hypergeom.pmf(misses, 4200, 420, size)))

    assert reference(n) <= 0.05
    assert reference(n - 1) > 0.05


def test_exact_worst_case_with_population_against_scipy() -> None:
    # N = 500, e = 0.1, 90 %: scipy.stats.hypergeom cdf and sf over every M = 0 … N.
    n = _size("exact", 0.1, 0.9, None, 500)

    def reference(size: int) -> float:
        m = np.arange(0, 501)
        low = np.ceil(size * m / 500 - size * 0.1 - 1e-9)  # exact for these round numbers
        high = np.floor(size * m / 500 + size * 0.1 + 1e-9)
        values = stats.hypergeom.cdf(low - 1, 500, m, size) + stats.hypergeom.sf(high, 500, m, size)
        return float(values.max())

    assert reference(n) <= 0.1
    assert reference(n - 1) > 0.1


# --------------------------------------------------------------------------- bounds and ordering


@given(n=st.integers(1, 3000), p=st.floats(0.0005, 0.9995), e=st.floats(0.001, 0.499))
@settings(max_examples=200, deadline=None)
def test_exact_miss_never_exceeds_chebyshev_or_hoeffding(n: int, p: float, e: float) -> None:
    # Chebyshev's inequality: P(|p̂ − p| ≥ e) ≤ p(1−p)/(n e²);
    # Hoeffding (1963), Theorem 1 on both tails: ≤ 2 exp(−2 n e²).
    miss = exact_miss_probability(n, p, e)
    assert miss <= p * (1 - p) / (n * e * e) + 1e-12
    assert miss <= 2 * math.exp(-2 * n * e * e) + 1e-12


@given(n=st.integers(1, 2000), e=st.floats(0.005, 0.45))
@settings(max_examples=40, deadline=None)
def test_worst_case_miss_never_exceeds_chebyshev_or_hoeffding(n: int, e: float) -> None:
    # The same bounds hold for every rate, hence for the supremum (p(1−p) ≤ 1/4).
    miss = exact_miss_probability(n, None, e)
    assert miss <= 1 / (4 * n * e * e) + 1e-12
    assert miss <= 2 * math.exp(-2 * n * e * e) + 1e-12


@given(big_n=st.integers(2, 400), share=st.floats(0.01, 0.99), data=st.data(),
       e=st.floats(0.01, 0.45))
@settings(max_examples=60, deadline=None)
def test_hypergeometric_miss_never_exceeds_its_bounds(big_n: int, share: float,
                                                      data: st.DataObject, e: float) -> None:
    # Hoeffding (1963), Theorem 4: sampling without replacement obeys 2 exp(−2 n e²);
    # Chebyshev with the variance ρ(1−ρ)/n · (N−n)/(N−1) of the sample rate without
    # replacement (Cochran 1977, ch. 3).
    m = min(max(round(share * big_n), 1), big_n - 1)
    n = data.draw(st.integers(1, big_n))
    # The population holds ceil(N p) deviant items, p read as the decimal it is written as:
    # the double nearest 1/37 is a little above it, so N p rounds up to 2 there. The bounds
    # hold for the population's own rate M/N.
    deviant = min(max(math.ceil(big_n * Fraction(repr(m / big_n))), 1), big_n - 1)
    rho = deviant / big_n
    miss = exact_miss_probability(n, m / big_n, e, big_n)
    variance = rho * (1 - rho) / n * (big_n - n) / (big_n - 1)
    assert miss <= variance / (e * e) + 1e-12
    assert miss <= 2 * math.exp(-2 * n * e * e) + 1e-12


@pytest.mark.parametrize(("margin", "confidence", "population"), [
    (0.05, 0.95, None), (0.1, 0.9, None), (0.02, 0.99, None), (0.3, 0.8, None),
    (0.05, 0.95, 4200), (0.1, 0.9, 250),
])
def test_worst_case_ordering(margin: float, confidence: float, population: int | None) -> None:
    # The distribution-free sizes meet the exact condition, so the plain smallest exact
    # size cannot exceed them; and at their sizes the exact miss probability is ≤ α.
    plan = size_for_estimation(margin, confidence, population_size=population)
    rows = {row.method: row for row in plan.rows}
    assert rows["exact"].sample_size <= rows["chebyshev"].sample_size
    assert rows["exact"].sample_size <= rows["hoeffding"].sample_size
    for name in ("exact", "chebyshev", "hoeffding"):
        miss = rows[name].miss_probability
        assert miss is not None
        assert miss <= _alpha(confidence)


@pytest.mark.parametrize("method", estimation.METHODS)
@pytest.mark.parametrize("rate", [None, 0.2])
def test_sizes_are_monotone(method: str, rate: float | None) -> None:
    # Narrower margins and higher confidence never ask for fewer items.
    margins = [0.3, 0.2, 0.1, 0.07, 0.05, 0.04]
    by_margin = [_size(method, margin, 0.95, rate) for margin in margins]
    assert by_margin == sorted(by_margin)
    confidences = [0.5, 0.8, 0.9, 0.95, 0.99]
    by_confidence = [_size(method, 0.05, confidence, rate) for confidence in confidences]
    assert by_confidence == sorted(by_confidence)


@given(e=st.floats(0.02, 0.45), c=st.floats(0.5, 0.995), rate=st.none() | st.floats(0.01, 0.99))
@settings(max_examples=25, deadline=None)
def test_exact_size_is_monotone_in_the_margin(e: float, c: float, rate: float | None) -> None:
    # The miss event shrinks as the margin widens, so the plain smallest size cannot grow.
    assert _size("exact", min(e * 1.25, 0.49), c, rate) <= _size("exact", e, c, rate)


# --------------------------------------------------------------------------- results


def test_plan_shape_and_plain_types() -> None:
    plan = size_for_estimation(0.05, 0.95)
    assert isinstance(plan, EstimationPlan)
    assert [row.method for row in plan.rows] == list(estimation.METHODS)
    for row in plan.rows:
        assert isinstance(row, EstimationRow)
        assert type(row.sample_size) is int
        assert row.miss_probability is None or type(row.miss_probability) is float
        assert row.ratio_to_exact is None or type(row.ratio_to_exact) is float
        assert row.finite_population_correction is False
    with pytest.raises(dataclasses.FrozenInstanceError):
        plan.rows[0].sample_size = 1  # type: ignore[misc]
    exact = plan.rows[0].sample_size
    assert all(row.ratio_to_exact == row.sample_size / exact for row in plan.rows)


def test_recommended_is_the_smallest_guaranteed_size() -> None:
    plan = size_for_estimation(0.05, 0.95)
    guaranteed = [row for row in plan.rows
                  if row.guarantee in ("exact", "distribution_free_bound")]
    smallest = min(row.sample_size for row in guaranteed)
    chosen = next(row for row in plan.rows if row.method == plan.recommended)
    assert chosen.guarantee in ("exact", "distribution_free_bound")
    assert chosen.sample_size == smallest
    only_approximate = size_for_estimation(0.05, 0.95, methods=["normal", "wilson"])
    sizes = {row.method: row.sample_size for row in only_approximate.rows}
    assert only_approximate.recommended == min(sizes, key=lambda name: sizes[name])
    assert all(row.ratio_to_exact is None for row in only_approximate.rows)


def test_finite_population_flags_and_cap() -> None:
    plan = size_for_estimation(0.02, 0.95, population_size=500)
    flags = {row.method: row.finite_population_correction for row in plan.rows}
    assert flags == {"exact": True, "wilson": False, "normal": True, "chebyshev": True,
                     "hoeffding": False}
    assert all(row.sample_size <= 500 for row in plan.rows)
    assert plan.population_size == 500


def test_methods_order_and_repeats() -> None:
    plan = size_for_estimation(0.05, 0.95, methods=["hoeffding", "normal", "hoeffding"])
    assert [row.method for row in plan.rows] == ["hoeffding", "normal"]


def test_module_examples() -> None:
    result = doctest.testmod(estimation)
    assert result.attempted > 0
    assert result.failed == 0


# --------------------------------------------------------------------------- bad input


@pytest.mark.parametrize(("kwargs", "field", "shown"), [
    ({"margin": 0}, "margin", "0"),
    ({"margin": 0.5}, "margin", "0.5"),
    ({"margin": -0.1}, "margin", "-0.1"),
    ({"margin": float("nan")}, "margin", "nan"),
    ({"confidence": 0}, "confidence", "0"),
    ({"confidence": 1}, "confidence", "1"),
    ({"anticipated_rate": 0}, "anticipated_rate", "0"),
    ({"anticipated_rate": 1}, "anticipated_rate", "1"),
    ({"population_size": 0}, "population.size", "0"),
    ({"population_size": -5}, "population.size", "-5"),
    ({"population_size": 10.5}, "population.size", "10.5"),
    ({"methods": []}, "methods", "none"),
    ({"methods": ["exact", "bootstrap"]}, "methods", "bootstrap"),
])
def test_bad_input_names_the_field(kwargs: dict[str, object], field: str, shown: str) -> None:
    arguments: dict[str, object] = {"margin": 0.05, "confidence": 0.95}
    arguments.update(kwargs)
    with pytest.raises(InvalidInput) as caught:
        size_for_estimation(**arguments)  # type: ignore[arg-type]
    assert caught.value.field == field
    assert shown in caught.value.message


def test_bound_is_named_in_the_message() -> None:
    with pytest.raises(InvalidInput, match=r"less than 0\.5"):
        size_for_estimation(0.5)
    with pytest.raises(InvalidInput, match="greater than 0"):
        size_for_estimation(0.05, confidence=0.0)


def test_sample_size_cap() -> None:
    with pytest.raises(ComputationTooLarge) as caught:
        size_for_estimation(0.01, 0.99, methods=["chebyshev"], max_sample_size=100_000)
    assert caught.value.field == "margin"
    assert "250,000" in caught.value.message
    with pytest.raises(ComputationTooLarge):
        size_for_estimation(0.05, 0.95, methods=["exact"], max_sample_size=300)
    assert _size("exact", 0.05, 0.95) > 300


def test_exact_miss_probability_rejects_bad_sizes() -> None:
    with pytest.raises(InvalidInput) as caught:
        exact_miss_probability(0, 0.5, 0.1)
    assert caught.value.field == "sample_size"
    with pytest.raises(InvalidInput) as caught:
        exact_miss_probability(11, 0.5, 0.1, 10)
    assert caught.value.field == "sample_size"
    with pytest.raises(InvalidInput) as caught:
        exact_miss_probability(10, 0.5, 0.6)
    assert caught.value.field == "margin"


@pytest.mark.parametrize("confidence", [0.5, 0.9, 0.99])
@pytest.mark.parametrize("rate", [0.05, None])
def test_a_population_of_one_item_needs_that_item_by_every_method(
    confidence: float, rate: float | None
) -> None:
    # Sampling the one item gives the population's rate exactly, so one item is enough
    # (Cochran's correction n0 / (1 + (n0 - 1)/N) is 1 at N = 1 for any n0). The Chebyshev
    # and exact forms divided 0 by 0 here (found by the contract fuzzer).
    plan = size_for_estimation(
        margin=0.01, anticipated_rate=rate, confidence=confidence, population_size=1
    )
    assert [(row.method, row.sample_size) for row in plan.rows] == [
        (method, 1) for method in ("exact", "wilson", "normal", "chebyshev", "hoeffding")
    ]
