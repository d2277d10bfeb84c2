"""The Poisson lower tail against a rational risk, decided by interval arithmetic.

For ``Y ~ Poisson(λ)`` with a rational mean ``λ = a / b > 0``,

    P(Y ≤ k) = e^(−λ) S_k,   S_k = Σ_{i=0..k} λ^i / i!,

so ``P(Y ≤ k) ≤ α`` exactly when ``S_k ≤ α e^λ``. Both sides are bracketed in
fixed-point integers scaled by ``2^P``: each term ``λ^i / i!`` is carried as a pair
rounded down and up, ``e^λ`` is the sum of the terms up to ``i`` plus the bound
``t_(i+1) / (1 − λ / (i + 2)) ≤ 2 t_(i+1)`` on the rest once ``i + 2 ≥ 2λ`` (a
geometric bound on the exponential series). If the brackets do not separate the
two sides, ``P`` is doubled and the work redone. ``e^λ`` is irrational for rational
``λ ≠ 0`` (Lambert, Hermite), so the two sides are never equal and the refinement
ends; it is nonetheless capped at :data:`MAX_PRECISION` bits.
"""

from __future__ import annotations

from fractions import Fraction

#: Largest mean the interval method is run for; above it the double decides.
MAX_MEAN = 10_000
START_PRECISION = 64
MAX_PRECISION = 8192


def _brackets(k: int, mean: Fraction, precision: int) -> tuple[int, int, int, int]:
    """Fixed-point brackets ``(S_lo, S_hi, E_lo, E_hi)`` of ``S_k`` and ``e^λ``."""
    a, b = mean.numerator, mean.denominator
    lo = hi = 1 << precision
    s_lo = s_hi = e_lo = e_hi = 0
    i = 0
    while True:
        if i <= k:
            s_lo += lo
            s_hi += hi
        e_lo += lo
        e_hi += hi
        lo = lo * a // (b * (i + 1))
        hi = -((-hi * a) // (b * (i + 1)))
        i += 1
        if (i + 1) * b >= 2 * a and i > k and hi <= 1:
            e_hi += 2 * hi
            return s_lo, s_hi, e_lo, e_hi


def compare(k: int, mean: Fraction, risk: Fraction) -> tuple[int, float] | None:
    """Sign of ``P(Y ≤ k) − risk`` (−1 or +1) and the tail as a float, or None.

    None when the mean is above :data:`MAX_MEAN` or the brackets did not separate
    within :data:`MAX_PRECISION` bits.

    e^-1 = 0.36787944117144232159... lies between these two risks:

    >>> compare(0, Fraction(1), Fraction(36787944117144233, 10**17))[0]
    -1
    >>> compare(0, Fraction(1), Fraction(36787944117144232, 10**17))[0]
    1
    """
    if k < 0:
        return (-1 if risk > 0 else 1), 0.0
    if mean <= 0 or mean > MAX_MEAN:
        return None
    num, den = risk.numerator, risk.denominator
    precision = START_PRECISION
    while precision <= MAX_PRECISION:
        s_lo, s_hi, e_lo, e_hi = _brackets(k, mean, precision)
        value = float(Fraction(s_lo + s_hi, e_lo + e_hi))
        if s_hi * den <= num * e_lo:
            return -1, value
        if s_lo * den > num * e_hi:
            return 1, value
        precision *= 2
    return None
