"""Hypergeometric probabilities for populations of one to 10^12 items.

A sample of ``n`` items drawn without replacement from a population of ``N``
items, ``M`` of them deviant, holds ``X`` deviant items, with

    P(X = x) = C(M, x) C(N − M, n − x) / C(N, n),

for ``x`` in the support ``max(0, n − (N − M)) ≤ x ≤ min(n, M)`` and zero
elsewhere. This module gives the probability (:func:`pmf`), the lower tail
``P(X ≤ k)`` (:func:`cdf`) and the upper tail ``P(X > k)`` (:func:`sf`) in
double precision for ``N`` up to 10^12 and samples up to 10^7 items. The
relative error measured against exact fractions (``bench/tail_accuracy.py``) is
below 1.3·10^-13 for samples up to 20,000 items; it grows with the sample (of order
10^-12 at 10^5 to 10^7 items) and in
proportion to ``|log P|`` for small results, to a few times 10^-13 near the bottom of
the range of normal doubles (10^-308); subnormal results lose precision.

Method
------
Probability
    The binomial coefficients are never formed. With ``p = n / N`` and
    ``q = (N − n) / N``,

        P(X = x) = b(x; M, p) · b(n − x; N − M, p) / b(n; N, p),

    where ``b(x; m, p) = C(m, x) p^x q^(m−x)``; the powers of ``p`` and ``q``
    cancel, so the identity is exact for any ``p``, and this choice puts every
    count at the centre of its binomial. Each ``b`` is computed by Loader's
    saddle-point form,

        b(x; m, p) = exp(δ(m) − δ(x) − δ(m − x) − D(x, m p) − D(m − x, m q))
                     · sqrt(m / (2π x (m − x))),

    with ``δ`` the error of Stirling's formula for ``log m!`` and
    ``D(x, μ) = x log(x / μ) + μ − x`` the deviance, computed by a series when
    ``x`` is close to ``μ``. The terms that would cancel between the three
    binomials (``x log p`` and the like, of size up to 10^12) never appear:
    every term left is small, so nothing large is subtracted.
Tails
    From the recurrence of successive probabilities,

        P(X = x − 1) / P(X = x) = x (N − M − n + x) / ((M − x + 1)(n − x + 1)),

    a tail is ``P(X = s) · (1 + r₁ + r₁ r₂ + …)`` summed from its first term
    ``s`` away from the mode. The probabilities are log-concave, so the ratios
    only fall along the sum, and once a ratio ``r`` is below one the rest of
    the sum is at most ``t r / (1 − r)`` after a term ``t``: the sum stops when
    that bound is below 10^-17 of the sum. The lower tail ``P(X ≤ k)`` is
    summed when ``k + 1`` is below the mode point ``(M + 1)(n + 1) / (N + 2)``,
    otherwise the upper tail ``P(X > k)``; the other tail is ``1`` minus the
    one summed, which stops short of the mode and so is never close to 1 (at
    most about 0.6 in practice), so the subtraction loses no significant
    accuracy. The cost is the number of terms summed: at most the distance to
    the end of the support, and far fewer where the terms fall fast (a few
    tens of standard deviations at most).

Degenerate cases are exact: a tail below the support is 0, a tail at or above
its top is 1, and a population with ``M = 0``, ``M = N`` or a sample with
``n = N`` (one possible outcome) has probability exactly 1 at that outcome.

The scalar tails run compiled where the install built ``_hypergeometric_tails.c``: the
same operations in the same order on the same doubles, so the same results to the bit,
about twenty times faster; the Python code below stays the definition.

Arguments are integers or integer numpy arrays, broadcast against each other;
the result is a float for integer arguments and a float64 array otherwise.
Arguments outside the domain (``N < 1``, ``M`` or ``n`` outside ``0 … N``, or
``N ≥ 2^53``, beyond exact doubles) give ``nan``.

References
----------
.. [1] C. Loader, "Fast and accurate computation of binomial probabilities"
       (2000), the saddle-point form, the Stirling error ``δ`` (tabulated for
       small arguments) and the deviance ``D``.
.. [2] N. L. Johnson, A. W. Kemp & S. Kotz, *Univariate Discrete
       Distributions*, 3rd ed., Wiley (2005), chapter 6: the hypergeometric
       distribution, its recurrence, mode and log-concavity.

Examples
--------
>>> round(pmf(1, 100, 5, 10), 6)  # C(5,1) C(95,9) / C(100,10)
0.339391
>>> cdf(0, 10**12, 0, 59), sf(3, 10, 10, 4)  # no deviant item; four drawn, all deviant
(1.0, 1.0)
"""

from __future__ import annotations

import math
from collections.abc import Callable
from decimal import Decimal, localcontext
from typing import overload

import numpy as np
from numpy.typing import NDArray

__all__ = ["cdf", "pmf", "sf"]

Counts = int | np.integer | NDArray[np.integer]
FloatArray = NDArray[np.float64]

#: Populations must stay below this for every count to be an exact double.
_LARGEST_POPULATION = 2**53

#: A tail sum stops when what is left is below this fraction of it.
_TOLERANCE = 1e-17

#: Terms summed one by one for integer arguments before vectorised blocks take over.
_SCALAR_TERMS = 256

#: Largest number of cells (elements × terms) in one block of a vectorised tail sum.
_MAX_CELLS = 1 << 18

_TWO_PI = 2.0 * math.pi

# Stirling series: δ(m) = 1/(12m) − 1/(360m³) + 1/(1260m⁵) − …, the coefficients
# B₂ⱼ / (2j (2j − 1)) of the Bernoulli numbers, up to m^-13; used for m > 15, where
# the first term left out is below 3·10^-20.
_S0 = 1.0 / 12.0
_S1 = 1.0 / 360.0
_S2 = 1.0 / 1260.0
_S3 = 1.0 / 1680.0
_S4 = 1.0 / 1188.0
_S5 = 691.0 / 360360.0
_S6 = 1.0 / 156.0

_PI_DIGITS = "3.14159265358979323846264338327950288419716939937510582097494"


def _stirling_error_table() -> tuple[float, ...]:
    """``δ(m) = log m! − (m + 1/2) log m + m − log √(2π)`` for m = 0 … 15, rounded once.

    Computed in 40-digit decimal arithmetic; ``δ(0)`` is set to 0, which makes the
    saddle-point form give the right value at the ends of the support.
    """
    values = [0.0]
    with localcontext() as context:
        context.prec = 40
        half_log_two_pi = (2 * Decimal(_PI_DIGITS)).ln() / 2
        for m in range(1, 16):
            exact = (
                Decimal(math.factorial(m)).ln()
                - (m + Decimal("0.5")) * Decimal(m).ln()
                + m
                - half_log_two_pi
            )
            values.append(float(exact))
    return tuple(values)


_STIRLING_ERROR = _stirling_error_table()
_STIRLING_ERROR_ARRAY = np.array(_STIRLING_ERROR, dtype=np.float64)

_Lower = Callable[[int, int, int, int], "tuple[float, float] | None"]


def _compiled_tails() -> _Lower | None:
    """The scalar tails compiled (``_hypergeometric_tails.c``): the same operations on the
    same doubles, so the same bits; None where the install found no C compiler."""
    try:
        from service.sampling import _hypergeometric_tails
    except ImportError:  # pragma: no cover - an install without a C compiler
        return None
    _hypergeometric_tails.configure(_STIRLING_ERROR)
    return _hypergeometric_tails.lower


_compiled_lower = _compiled_tails()


# --------------------------------------------------------------------------- one value


def _stirling_error(m: int) -> float:
    if m <= 15:
        return _STIRLING_ERROR[m]
    s = 1.0 / m
    s2 = s * s
    return s * (_S0 - s2 * (_S1 - s2 * (_S2 - s2 * (_S3 - s2 * (_S4 - s2 * (_S5 - s2 * _S6))))))


def _deviance(x: float, mean: float) -> float:
    """``D(x, μ) = x log(x/μ) + μ − x`` for ``x ≥ 0``, ``μ > 0``; ``D(0, μ) = μ``."""
    d = x - mean
    total = x + mean
    if abs(d) < 0.1 * total:
        v = d / total
        s = d * v
        term = 2.0 * x * v
        v2 = v * v
        for j in range(3, 41, 2):
            term *= v2
            following = s + term / j
            if following == s:
                break
            s = following
        return s
    if x == 0.0:
        return mean
    return x * math.log(x / mean) + mean - x


def _binomial_parts(x: int, m: int, p: float, q: float) -> tuple[float, float]:
    """``(c, w)`` with ``b(x; m, p) = exp(c) / sqrt(w)``, for ``0 ≤ x ≤ m``, ``m ≥ 1``."""
    c = (
        _stirling_error(m)
        - _stirling_error(x)
        - _stirling_error(m - x)
        - _deviance(float(x), m * p)
        - _deviance(float(m - x), m * q)
    )
    w = 1.0 if x in (0, m) else _TWO_PI * x * (m - x) / m
    return c, w


def _pmf_one(x: int, total: int, marked: int, drawn: int) -> float:
    """Probability of ``x``, inside the support of a distribution with more than one outcome."""
    p = drawn / total
    q = (total - drawn) / total
    c1, w1 = _binomial_parts(x, marked, p, q)
    c2, w2 = _binomial_parts(drawn - x, total - marked, p, q)
    c3, w3 = _binomial_parts(drawn, total, p, q)
    return math.exp(c1 + c2 - c3) * math.sqrt(w3 / (w1 * w2))


def _tail_one(start: int, up: bool, steps: int, total: int, marked: int, drawn: int) -> float:
    """``P(X ≥ start)`` (``up``) or ``P(X ≤ start)``, for a ``start`` from which the
    probabilities fall in the direction summed.

    ``steps`` is the number of further outcomes in the support beyond ``start``.
    """
    rest = total - marked - drawn
    term, acc, x = 1.0, 1.0, start
    for _ in range(min(steps, _SCALAR_TERMS)):
        if up:
            ratio = ((marked - x) * (drawn - x)) / ((x + 1) * (rest + x + 1))
            x += 1
        else:
            ratio = (x * (rest + x)) / ((marked - x + 1) * (drawn - x + 1))
            x -= 1
        term *= ratio
        acc += term
        if term == 0.0 or (ratio < 1.0 and term * ratio <= _TOLERANCE * acc * (1.0 - ratio)):
            steps = 0
            break
        steps -= 1
    if steps > 0:
        one = np.ones(1, dtype=np.float64)
        acc = float(
            _sum_series(
                one * x, one * term, one * acc, one * steps, up,
                one * marked, one * drawn, one * rest,
            )[0]
        )
    return _pmf_one(start, total, marked, drawn) * acc


def _valid_one(total: int, marked: int, drawn: int) -> bool:
    return 1 <= total < _LARGEST_POPULATION and 0 <= marked <= total and 0 <= drawn <= total


def _lower_one(k: int, total: int, marked: int, drawn: int) -> tuple[float, float]:
    """``(P(X ≤ k), P(X > k))`` for valid integer arguments."""
    low = max(0, drawn - (total - marked))
    high = min(drawn, marked)
    if k < low:
        return 0.0, 1.0
    if k >= high:
        return 1.0, 0.0
    # below the mode by more than one: (k + 1)(N + 2) < (M + 1)(n + 1), in exact integers
    if (k + 1) * (total + 2) < (marked + 1) * (drawn + 1):
        below = min(1.0, _tail_one(k, False, k - low, total, marked, drawn))
        return below, 1.0 - below
    above = min(1.0, _tail_one(k + 1, True, high - k - 1, total, marked, drawn))
    return 1.0 - above, above


# --------------------------------------------------------------------------- arrays


def _stirling_error_array(m: FloatArray) -> FloatArray:
    s = 1.0 / np.maximum(m, 16.0)
    s2 = s * s
    series = s * (_S0 - s2 * (_S1 - s2 * (_S2 - s2 * (_S3 - s2 * (_S4 - s2 * (_S5 - s2 * _S6))))))
    small = m <= 15.0
    table = _STIRLING_ERROR_ARRAY[np.where(small, m, 0.0).astype(np.intp)]
    return np.asarray(np.where(small, table, series), dtype=np.float64)


def _deviance_array(x: FloatArray, mean: FloatArray) -> FloatArray:
    """:func:`_deviance` element by element (``mean > 0``)."""
    d = x - mean
    total = x + mean
    near = np.abs(d) < 0.1 * total
    v = np.where(near, d / total, 0.0)
    series = d * v
    term = 2.0 * x * v
    v2 = v * v
    # |v| < 0.1: the term after v^19 is below 10^-20 of the sum
    for j in range(3, 21, 2):
        term = term * v2
        series = series + term / j
    positive = x > 0.0
    ratio = np.where(positive & ~near, x, mean) / mean
    direct = np.where(positive, x * np.log(ratio), 0.0) + mean - x
    return np.asarray(np.where(near, series, direct), dtype=np.float64)


def _pmf_array(x: FloatArray, total: FloatArray, marked: FloatArray,
               drawn: FloatArray) -> FloatArray:
    """Probability of ``x`` inside the support, all arguments float arrays of one shape
    describing distributions with more than one outcome."""
    p = drawn / total
    q = (total - drawn) / total
    # three binomials b(x; m, p): (x, m) = (x, M), (n − x, N − M), (n, N)
    xs = np.stack([x, drawn - x, drawn])
    ms = np.stack([marked, total - marked, total])
    ys = ms - xs
    stirling = _stirling_error_array(np.stack([ms, xs, ys]))
    deviance = _deviance_array(np.stack([xs, ys]), np.stack([ms * p, ms * q]))
    c = stirling[0] - stirling[1] - stirling[2] - deviance[0] - deviance[1]
    inner = (xs > 0.0) & (ys > 0.0)
    w = np.where(inner, _TWO_PI * xs * ys / np.where(inner, ms, 1.0), 1.0)
    return np.asarray(np.exp(c[0] + c[1] - c[2]) * np.sqrt(w[2] / (w[0] * w[1])),
                      dtype=np.float64)


def _ratios(x: FloatArray, up: bool, marked: FloatArray, drawn: FloatArray,
            rest: FloatArray) -> FloatArray:
    if up:
        return np.asarray((marked - x) * (drawn - x) / ((x + 1.0) * (rest + x + 1.0)),
                          dtype=np.float64)
    return np.asarray(x * (rest + x) / ((marked - x + 1.0) * (drawn - x + 1.0)),
                      dtype=np.float64)


def _sum_series(x: FloatArray, term: FloatArray, acc: FloatArray, steps: FloatArray,
                up: bool, marked: FloatArray, drawn: FloatArray,
                rest: FloatArray) -> FloatArray:
    """Continue tail sums ``acc`` whose last term ``term`` is at outcome ``x``, for at
    most ``steps`` further outcomes, in blocks of terms (see :func:`_tail_one`)."""
    acc = acc.copy()
    x, term, steps = x.copy(), term.copy(), steps.copy()
    index = np.flatnonzero((steps > 0) & (term > 0.0))
    sign = 1.0 if up else -1.0
    width = 32
    while index.size:
        width = max(16, min(width, _MAX_CELLS // index.size))
        offsets = np.arange(width, dtype=np.float64)
        at = x[index, None] + sign * offsets
        ratio = _ratios(at, up, marked[index, None], drawn[index, None], rest[index, None])
        ratio = np.where(offsets < steps[index, None], ratio, 0.0)
        terms = term[index, None] * np.cumprod(ratio, axis=1)
        sums = acc[index] + terms.sum(axis=1)
        acc[index] = sums
        last_term, last_ratio = terms[:, -1], ratio[:, -1]
        x[index] += sign * width
        term[index] = last_term
        steps[index] -= width
        negligible = last_term * last_ratio <= _TOLERANCE * sums * (1.0 - last_ratio)
        done = (steps[index] <= 0) | (last_term == 0.0) | ((last_ratio < 1.0) & negligible)
        index = index[~done]
        width *= 2
    return acc


def _tails_array(k: FloatArray, total: FloatArray, marked: FloatArray,
                 drawn: FloatArray) -> tuple[FloatArray, FloatArray]:
    """``(P(X ≤ k), P(X > k))`` for 1-D float arrays of one shape inside the domain."""
    low = np.maximum(0.0, drawn - (total - marked))
    high = np.minimum(drawn, marked)
    below = np.where(k < low, 0.0, 1.0)
    above = 1.0 - below
    inside = np.flatnonzero((k >= low) & (k < high))
    if not inside.size:
        return below, above
    k_in, drawn_in = k[inside], drawn[inside]
    total_in, marked_in = total[inside], marked[inside]
    rest = total_in - marked_in - drawn_in
    # below the mode by more than one (see _lower_one); which side is chosen near the
    # boundary is immaterial, so the float products need not be exact
    rising = (k_in + 1.0) * (total_in + 2.0) < (marked_in + 1.0) * (drawn_in + 1.0)
    start = np.where(rising, k_in, k_in + 1.0)
    steps = np.where(rising, k_in - low[inside], high[inside] - k_in - 1.0)
    sums = np.ones_like(start)
    for up in (False, True):
        part = np.flatnonzero(rising != up)
        if part.size:
            sums[part] = _sum_series(start[part], sums[part], sums[part], steps[part], up,
                                     marked_in[part], drawn_in[part], rest[part])
    tail = np.minimum(1.0, _pmf_array(start, total_in, marked_in, drawn_in) * sums)
    below[inside] = np.where(rising, tail, 1.0 - tail)
    above[inside] = np.where(rising, 1.0 - tail, tail)
    return below, above


# --------------------------------------------------------------------------- public


def _scalar(value: Counts) -> int | None:
    if type(value) is int:  # the usual case, decided before the slower isinstance
        return value
    if isinstance(value, int | np.integer):
        return int(value)
    return None


def _arrays(*values: Counts) -> tuple[tuple[int, ...], list[NDArray[np.int64]]]:
    arrays = [np.asarray(value, dtype=np.int64) for value in values]
    shape = np.broadcast_shapes(*(a.shape for a in arrays))
    return shape, [np.broadcast_to(a, shape).ravel() for a in arrays]


def _valid_array(total: NDArray[np.int64], marked: NDArray[np.int64],
                 drawn: NDArray[np.int64]) -> NDArray[np.bool_]:
    return np.asarray(
        (total >= 1) & (total < _LARGEST_POPULATION)
        & (marked >= 0) & (marked <= total) & (drawn >= 0) & (drawn <= total),
        dtype=np.bool_,
    )


@overload
def pmf(x: int, N: int, M: int, n: int) -> float: ...  # noqa: N803
@overload
def pmf(x: Counts, N: Counts, M: Counts, n: Counts) -> float | FloatArray: ...  # noqa: N803
def pmf(x: Counts, N: Counts, M: Counts, n: Counts) -> float | FloatArray:  # noqa: N803
    """Hypergeometric probability ``P(X = x)``.

    Parameters
    ----------
    x : int or array of int
        Number of deviant items in the sample.
    N : int or array of int
        Population size, ``1 ≤ N < 2^53``.
    M : int or array of int
        Deviant items in the population, ``0 ≤ M ≤ N``.
    n : int or array of int
        Sample size, ``0 ≤ n ≤ N``.

    Returns
    -------
    float or ndarray of float64
        ``C(M, x) C(N − M, n − x) / C(N, n)``; 0 outside the support, exactly 1
        when the support is the single outcome ``x``, ``nan`` for arguments
        outside the domain. A float when every argument is an integer, else an
        array of the broadcast shape.

    Notes
    -----
    Computed as ``b(x; M, p) b(n − x; N − M, p) / b(n; N, p)`` with ``p = n/N``,
    each binomial probability by Loader's saddle-point form (module docstring).

    References
    ----------
    C. Loader (2000), "Fast and accurate computation of binomial probabilities";
    Johnson, Kemp & Kotz (2005), *Univariate Discrete Distributions*, 3rd ed., §6.1.

    Examples
    --------
    >>> round(pmf(0, 10**12, 5 * 10**10, 59), 12)  # C(N − M, 59) / C(N, 59)
    0.048494525245
    """
    values = (_scalar(x), _scalar(N), _scalar(M), _scalar(n))
    if values[0] is not None and values[1] is not None and values[2] is not None and (
        values[3] is not None
    ):
        xi, total, marked, drawn = values[0], values[1], values[2], values[3]
        if not _valid_one(total, marked, drawn):
            return math.nan
        first, last = max(0, drawn - (total - marked)), min(drawn, marked)
        if not first <= xi <= last:
            return 0.0
        if first == last:
            return 1.0
        return _pmf_one(xi, total, marked, drawn)
    shape, (xa, total_a, marked_a, drawn_a) = _arrays(x, N, M, n)
    result = np.zeros(xa.shape, dtype=np.float64)
    valid = _valid_array(total_a, marked_a, drawn_a)
    low = np.maximum(0, drawn_a - (total_a - marked_a))
    high = np.minimum(drawn_a, marked_a)
    in_support = valid & (xa >= low) & (xa <= high)
    result[in_support & (low == high)] = 1.0
    spread = np.flatnonzero(in_support & (low < high))
    if spread.size:
        result[spread] = _pmf_array(
            xa[spread].astype(np.float64), total_a[spread].astype(np.float64),
            marked_a[spread].astype(np.float64), drawn_a[spread].astype(np.float64),
        )
    result[~valid] = np.nan
    return result.reshape(shape)


def _tails(k: Counts, total: Counts, marked: Counts, drawn: Counts,
           upper: bool) -> float | FloatArray:
    values = (_scalar(k), _scalar(total), _scalar(marked), _scalar(drawn))
    if values[0] is not None and values[1] is not None and values[2] is not None and (
        values[3] is not None
    ):
        # The compiled tails answer inside the domain and the support, with the bits
        # _lower_one gives; everything else is _lower_one's.
        if _compiled_lower is not None and (
            tails := _compiled_lower(values[0], values[1], values[2], values[3])
        ):
            return tails[1 if upper else 0]
        if not _valid_one(values[1], values[2], values[3]):
            return math.nan
        return _lower_one(values[0], values[1], values[2], values[3])[1 if upper else 0]
    shape, (ka, total_a, marked_a, drawn_a) = _arrays(k, total, marked, drawn)
    result = np.full(ka.shape, np.nan, dtype=np.float64)
    valid = np.flatnonzero(_valid_array(total_a, marked_a, drawn_a))
    if valid.size:
        below, above = _tails_array(
            ka[valid].astype(np.float64), total_a[valid].astype(np.float64),
            marked_a[valid].astype(np.float64), drawn_a[valid].astype(np.float64),
        )
        result[valid] = above if upper else below
    return result.reshape(shape)


@overload
def cdf(k: int, N: int, M: int, n: int) -> float: ...  # noqa: N803
@overload
def cdf(k: Counts, N: Counts, M: Counts, n: Counts) -> float | FloatArray: ...  # noqa: N803
def cdf(k: Counts, N: Counts, M: Counts, n: Counts) -> float | FloatArray:  # noqa: N803
    """Hypergeometric lower tail ``P(X ≤ k)``.

    Parameters
    ----------
    k : int or array of int
        Largest number of deviant items counted.
    N, M, n : int or array of int
        Population size, deviant items in it and sample size, as for :func:`pmf`.

    Returns
    -------
    float or ndarray of float64
        ``Σ_{x ≤ k} P(X = x)``: exactly 0 for ``k < max(0, n − (N − M))``,
        exactly 1 for ``k ≥ min(n, M)``, ``nan`` for arguments outside the domain.

    Notes
    -----
    Below the mode the probabilities are summed downwards from ``k``; from the
    mode on, the result is ``1 − P(X > k)`` with the upper tail summed upwards
    from ``k + 1`` (module docstring). The relative error is of order 10^-13
    or better for results that are normal doubles.

    References
    ----------
    Johnson, Kemp & Kotz (2005), *Univariate Discrete Distributions*, 3rd ed.,
    §6.2 (recurrence and mode); C. Loader (2000) for the first probability.

    Examples
    --------
    >>> round(cdf(1, 100, 5, 10), 6)  # P(X ≤ 1), 5 deviant items in 100, 10 drawn
    0.923143
    """
    return _tails(k, N, M, n, upper=False)


@overload
def sf(k: int, N: int, M: int, n: int) -> float: ...  # noqa: N803
@overload
def sf(k: Counts, N: Counts, M: Counts, n: Counts) -> float | FloatArray: ...  # noqa: N803
def sf(k: Counts, N: Counts, M: Counts, n: Counts) -> float | FloatArray:  # noqa: N803
    """Hypergeometric upper tail ``P(X > k)``.

    Parameters
    ----------
    k : int or array of int
        Deviant items above which the sample is counted.
    N, M, n : int or array of int
        Population size, deviant items in it and sample size, as for :func:`pmf`.

    Returns
    -------
    float or ndarray of float64
        ``Σ_{x > k} P(X = x)``: exactly 1 for ``k < max(0, n − (N − M))``,
        exactly 0 for ``k ≥ min(n, M)``, ``nan`` for arguments outside the domain.

    Notes
    -----
    Above the mode the probabilities are summed upwards from ``k + 1``; below
    it the result is ``1 − P(X ≤ k)``, so that the sum always runs away from
    the mode and small upper tails keep their relative accuracy.

    References
    ----------
    Johnson, Kemp & Kotz (2005), *Univariate Discrete Distributions*, 3rd ed., §6.2;
    C. Loader (2000).

    Examples
    --------
    >>> round(sf(1, 100, 5, 10), 6)  # P(X > 1) = 1 − P(X ≤ 1)
    0.076857
    """
    return _tails(k, N, M, n, upper=True)
