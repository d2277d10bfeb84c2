"""Reliability factors: upper limits of the number of misstatements per sample.

A reliability factor RF(k) at confidence c is the upper c-limit of the expected number of
fully misstated sampling units in a sample that showed k of them. Multiplied by the
sampling interval it is an upper limit of misstatement in money.

- Poisson: RF(k) = the c-quantile of the gamma distribution of shape k + 1, that is
  ``gammaincinv(k + 1, c)``; equal to half the c-quantile of chi-square with 2(k + 1)
  degrees of freedom. Defined for non-integer k as the continuous extension.
- Binomial: n times the Clopper-Pearson upper limit, ``n * betaincinv(k + 1, n - k, c)``.
- Hypergeometric: the units of a population of N monetary units, the largest number M of
  misstated units such that P(X <= k; N, M, n) > 1 - c, plus one (the exact upper limit).

References
----------
.. [1] C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits
   illustrated in the case of the binomial", Biometrika 26(4), 404-413, 1934.
.. [2] AICPA, Audit Guide *Audit Sampling*, chapter on monetary-unit sampling (tables of
   reliability factors).
"""

from __future__ import annotations

from math import isfinite

from scipy import special, stats

from service.sampling.errors import InvalidInput


def _check_confidence(confidence: float) -> None:
    if not (isfinite(confidence) and 0 < confidence < 1):
        raise InvalidInput("confidence", f"must be strictly between 0 and 1, got {confidence!r}")


def poisson_factor(misstatements: float, confidence: float) -> float:
    """Poisson reliability factor RF(k) = gammaincinv(k + 1, confidence).

    >>> round(poisson_factor(0, 0.95), 4), round(poisson_factor(1, 0.95), 4)
    (2.9957, 4.7439)
    """
    _check_confidence(confidence)
    if not (isfinite(misstatements) and misstatements >= 0):
        raise InvalidInput("misstatements", f"must be at least 0, got {misstatements!r}")
    return float(special.gammaincinv(misstatements + 1, confidence))


def binomial_factor(misstatements: float, sample_size: int, confidence: float) -> float:
    """n times the exact (Clopper-Pearson) upper limit of the rate after k of n.

    Continuous in k through the incomplete beta function; k = n gives n.

    >>> round(binomial_factor(0, 60, 0.95), 4)
    2.9222
    """
    _check_confidence(confidence)
    if not 0 <= misstatements <= sample_size:
        raise InvalidInput(
            "misstatements", f"must be from 0 to the sample size {sample_size}, got {misstatements}"
        )
    if misstatements >= sample_size:
        return float(sample_size)
    upper = special.betaincinv(misstatements + 1, sample_size - misstatements, confidence)
    return float(sample_size * upper)


def hypergeometric_risk(misstatements: int, sample_size: int, units: int, misstated: int) -> float:
    """P(X <= k) for a sample of n of N units of which M are misstated."""
    return float(stats.hypergeom.cdf(misstatements, units, misstated, sample_size))


def hypergeometric_limit(
    misstatements: int, sample_size: int, units: int, confidence: float
) -> int:
    """Exact upper limit of the misstated units M among N after k in a sample of n.

    The smallest M with P(X <= k; N, M, n) <= 1 - confidence (P falls as M grows).

    >>> hypergeometric_limit(0, 60, 1_000_000, 0.95)
    48702
    """
    _check_confidence(confidence)
    alpha = 1 - confidence
    low, high = misstatements, units  # P(X <= k; M = k) = 1 > alpha; P at M = N is 0 or 1
    if hypergeometric_risk(misstatements, sample_size, units, high) > alpha:
        return units
    while high - low > 1:
        middle = (low + high) // 2
        if hypergeometric_risk(misstatements, sample_size, units, middle) <= alpha:
            high = middle
        else:
            low = middle
    return high
