"""Reliability factors against audit-practice tables and scipy.stats."""

from __future__ import annotations

import math

import pytest
from scipy import stats

from service.sampling.monetary.factors import (
    binomial_factor,
    hypergeometric_limit,
    poisson_factor,
)

# Poisson reliability factors of audit practice for 0, 1, 2, ... misstatements (recalled
# from memory; they are half the chi-square quantiles with 2(k + 1) degrees of freedom).
PRACTICE_95 = [3.00, 4.75, 6.30, 7.76, 9.16, 10.52]
PRACTICE_90 = [2.31, 3.89, 5.33, 6.69, 8.00]


@pytest.mark.parametrize(("confidence", "table"), [(0.95, PRACTICE_95), (0.90, PRACTICE_90)])
def test_poisson_factors_match_the_printed_table(confidence: float, table: list[float]) -> None:
    # The printed factors are rounded up to two decimals (conservative, so a limit computed
    # from the table is never below the exact one): 2.9957 is printed 3.00, 2.3026 as 2.31.
    for k, printed in enumerate(table):
        exact = poisson_factor(k, confidence)
        assert math.ceil(exact * 100) / 100 == pytest.approx(printed, abs=1e-9)
        assert printed - 0.01 < exact <= printed


@pytest.mark.parametrize("confidence", [0.8, 0.9, 0.95, 0.99])
@pytest.mark.parametrize("k", range(8))
def test_poisson_factor_is_half_the_chi_square_quantile(confidence: float, k: int) -> None:
    # scipy.stats.chi2: the Poisson upper limit after k events is chi2.ppf(c, 2(k + 1)) / 2.
    expected = stats.chi2.ppf(confidence, 2 * (k + 1)) / 2
    assert poisson_factor(k, confidence) == pytest.approx(expected, rel=1e-10)


@pytest.mark.parametrize(("k", "n"), [(0, 60), (1, 60), (3, 100), (10, 93)])
def test_binomial_factor_is_n_times_the_clopper_pearson_limit(k: int, n: int) -> None:
    # Clopper & Pearson (1934): upper limit = beta.ppf(c, k + 1, n - k) (scipy.stats.beta).
    assert binomial_factor(k, n, 0.95) == pytest.approx(n * stats.beta.ppf(0.95, k + 1, n - k))


def test_binomial_factor_is_below_the_poisson_factor() -> None:
    # Binomial limits are tighter than their Poisson approximation (textbook property).
    assert all(binomial_factor(k, 80, 0.95) < poisson_factor(k, 0.95) for k in range(6))


@pytest.mark.parametrize(("k", "n", "units"), [(0, 20, 500), (2, 30, 800), (1, 60, 2_000)])
def test_hypergeometric_limit_is_the_smallest_rejected_count(k: int, n: int, units: int) -> None:
    # Definition checked by brute force with scipy.stats.hypergeom.
    rejected = [m for m in range(units + 1) if stats.hypergeom.cdf(k, units, m, n) <= 0.05]
    assert hypergeometric_limit(k, n, units, 0.95) == min(rejected)


def test_bad_confidence_is_refused() -> None:
    with pytest.raises(ValueError, match="confidence"):
        poisson_factor(0, 1.0)
