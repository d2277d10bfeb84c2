"""Upper limits of the misstatement rate per monetary unit, from the taints of a sample.

Each function takes the taints of the n sampled units that were misstated (a taint is the
misstatement of an item as a fraction of its book amount; units that were not misstated have
taint 0 and are not listed) and returns the upper limit in sampling intervals: multiplied by
the sampling interval J = B / n it is a limit in money.

- :func:`stringer` -- the Stringer bound (Stringer 1963; AICPA Audit Guide *Audit Sampling*,
  chapter on monetary-unit sampling): RF(0) + sum over taints ordered from the largest of
  (RF(i) - RF(i - 1)) x taint_i, with Poisson or binomial factors RF.
- :func:`cell` -- cell evaluation (Leslie, Teitlebaum & Anderson, *Dollar-Unit Sampling*,
  1979): U_0 = RF(0); U_i = max(U_{i-1} + t_i, RF(i) x mean(t_1..t_i)), taints ordered from
  the largest; the limit is U_m. Poisson factors.
- :func:`betting` -- the betting confidence bound for the mean of bounded variables
  (Waudby-Smith & Ramdas, "Estimating means of bounded random variables by betting",
  JRSS-B 86(1), 2024), on the n taints in [0, 1] including the zeros. The wealth of
  a bettor against "mean >= m" is, for a fixed bet lambda in [0, 1],
  K(m, lambda) = prod_i (1 - lambda (x_i - m)); averaging over a fixed grid of bets (the
  paper's diversified betting) keeps E[K] <= 1 at the true mean for independent draws with
  replacement, and the bound is the largest m whose average wealth stays below
  1 / (1 - confidence) (Markov's inequality). K grows with m, so the limit is found by
  bisection. The guarantee needs independent uniform selection of units and taints in
  [0, 1]; it holds for any distribution of taints.
"""

from __future__ import annotations

from collections.abc import Sequence
from functools import lru_cache
from typing import Final

import numpy as np
from scipy import special

BETS: Final = np.array([0.1, 0.25, 0.5, 0.75, 0.875, 0.9375, 0.97, 0.985, 0.995, 1.0])
"""The fixed grid of bets averaged by :func:`betting` (chosen before any data)."""


def _ordered(taints: Sequence[float]) -> list[float]:
    return sorted(taints, reverse=True)


def _factors(count: int, confidence: float, sample_size: int | None) -> np.ndarray:
    """RF(0), ..., RF(count): Poisson, or binomial for ``sample_size`` (one vectorised call)."""
    k = np.arange(count + 1, dtype=float)
    if sample_size is None:
        return np.asarray(special.gammaincinv(k + 1, confidence), dtype=float)
    inside = k < sample_size
    upper = np.ones_like(k)
    upper[inside] = special.betaincinv(k[inside] + 1, sample_size - k[inside], confidence)
    return sample_size * upper


def stringer(taints: Sequence[float], confidence: float, sample_size: int | None = None) -> float:
    """Stringer limit in sampling intervals; binomial factors when ``sample_size`` is given.

    >>> round(stringer([0.5, 0.2], 0.95), 4)
    4.1802
    """
    ordered = np.asarray(_ordered(taints), dtype=float)
    factors = _factors(len(ordered), confidence, sample_size)
    return float(factors[0] + np.dot(np.diff(factors), ordered))


def cell(taints: Sequence[float], confidence: float) -> float:
    """Cell-evaluation limit in sampling intervals (Poisson factors).

    >>> round(cell([0.5, 0.2], 0.95), 4), round(cell([1.0], 0.95), 4)
    (3.6957, 4.7439)
    """
    ordered = _ordered(taints)
    factors = _factors(len(ordered), confidence, None).tolist()
    limit = factors[0]
    running = 0.0
    for i, taint in enumerate(ordered, start=1):
        running += taint
        limit = max(limit + taint, factors[i] * running / i)
    return float(limit)


def _log_wealth(values: np.ndarray, counts: np.ndarray, m: float) -> float:
    """log of the average over :data:`BETS` of prod (1 - lambda (x - m))^count."""
    factors = np.maximum(1.0 - np.outer(BETS, values - m), 0.0)
    with np.errstate(divide="ignore"):
        logs = np.log(factors) @ counts
    top = float(logs.max())
    if top == float("-inf"):
        return top
    return top + float(np.log(np.exp(logs - top).sum() / len(BETS)))


_STEPS: Final = 48  # bisection steps: the limit is known to within 2^-48 of the mean's range


def betting(taints: Sequence[float], sample_size: int, confidence: float) -> float:
    """Betting upper limit of the mean taint, times n (in sampling intervals).

    ``taints`` are the nonzero taints, each in (0, 1]; the other units have taint 0. The
    bisection returns the upper end of its last bracket, so the limit is never understated.

    >>> limit = betting([], 60, 0.95)
    >>> 2.9957 < limit < 6
    True
    """
    return _betting(tuple(sorted(taints)), sample_size, confidence)


@lru_cache(maxsize=4096)
def _betting(taints: tuple[float, ...], sample_size: int, confidence: float) -> float:
    listed = np.asarray(taints, dtype=float)
    values = np.concatenate(([0.0], listed))
    counts = np.concatenate(([float(sample_size - len(listed))], np.ones(len(listed))))
    threshold = float(np.log(1.0 / (1.0 - confidence)))
    low, high = float(listed.sum() / sample_size), 1.0
    if _log_wealth(values, counts, high) < threshold:
        return float(sample_size)
    for _ in range(_STEPS):
        middle = (low + high) / 2
        if _log_wealth(values, counts, middle) >= threshold:
            high = middle
        else:
            low = middle
    return high * sample_size
