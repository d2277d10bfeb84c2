"""``P(X ≤ k) ≤ risk`` for the three models, exact wherever the double is in doubt.

The double tail decides when it lies outside the band of
:mod:`~service.sampling.ties.band` around the risk. Inside it the binomial and
hypergeometric tails are summed as fractions and compared exactly, and the Poisson
tail is bracketed by :func:`~service.sampling.ties.poisson_bounds.compare`. The
value reported beside a decision made exactly is the exact tail rounded once to the
nearest double, so a tail of exactly 1/2 is reported as ``0.5``.

When the exact work would be above :data:`~service.sampling.ties.exact_tails.WORK_LIMIT`
(samples of hundreds of thousands of items) the double decides; ``Decision.exact``
then says so.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import numpy as np

from service.sampling.distributions import MODELS, deviant_items
from service.sampling.ties import exact_tails, poisson_bounds
from service.sampling.ties.band import RELATIVE_BAND, near


@dataclass(frozen=True)
class Decision:
    """Whether the tail is at most the risk, the tail itself, and how it was decided."""

    holds: bool
    value: float
    exact: bool


def _double(risk: Fraction) -> float:
    """``float(risk)``: the correctly rounded quotient, without Fraction's generic method
    (these checks run several times a request)."""
    return risk.numerator / risk.denominator


def _exact_sign(
    model: str, k: int, n: int, rate: Fraction, population_size: int | None, risk: Fraction
) -> tuple[int, float] | None:
    """Sign of ``tail − risk`` (−1, 0 or +1) and the tail rounded once, or None if too costly."""
    if model == "poisson":
        return poisson_bounds.compare(k, n * rate, risk)
    if model == "binomial":
        if exact_tails.binomial_cost(k, n, rate) > exact_tails.WORK_LIMIT:
            return None
        tail = exact_tails.binomial_lower(k, n, rate)
    else:
        if population_size is None:
            return None
        deviant = deviant_items(rate, population_size)
        return _hypergeometric_sign(k, population_size, deviant, n, risk, upper=False)
    return (tail > risk) - (tail < risk), float(tail)


def _hypergeometric_sign(
    k: int, population: int, deviant: int, n: int, risk: Fraction, *, upper: bool
) -> tuple[int, float] | None:
    if exact_tails.hypergeometric_cost(k, population, deviant, n) > exact_tails.WORK_LIMIT:
        return None
    tail = exact_tails.hypergeometric_lower(k, population, deviant, n)
    if upper:
        tail = 1 - tail
    return (tail > risk) - (tail < risk), float(tail)


def hypergeometric_above(
    k: int, population: int, deviant: int, n: int, risk: Fraction, value: float, *, upper: bool
) -> bool:
    """Whether ``P(X ≤ k)`` (or ``P(X > k)`` when ``upper``) is strictly above ``risk``.

    ``value`` is the double tail; ``deviant`` is the count ``M`` itself, as in the
    bisections for the limits of an evaluation.

    >>> hypergeometric_above(0, 10, 1, 9, Fraction(1, 10), 0.10000000000000002, upper=False)
    False
    """
    risk_float = _double(risk)
    if not near(value, risk_float):
        return value > risk_float
    found = _hypergeometric_sign(k, population, deviant, n, risk, upper=upper)
    if found is None:
        return value > risk_float
    return found[0] > 0


def at_most(
    model: str,
    k: int,
    n: int,
    rate: Fraction,
    population_size: int | None,
    risk: Fraction,
    value: float | None = None,
) -> Decision:
    """Decide ``P(X ≤ k) ≤ risk`` at deviation rate ``rate`` under ``model``.

    ``value`` is the double tail when the caller has it already.

    >>> at_most("hypergeometric", 0, 9, Fraction(1, 10), 10, Fraction(1, 10))
    Decision(holds=True, value=0.1, exact=True)
    >>> at_most("binomial", 0, 3, Fraction(3, 10), None, Fraction(343, 1000))
    Decision(holds=True, value=0.343, exact=True)
    """
    if value is None:
        value = float(MODELS[model].lower_tail(k, n, rate, population_size))
    risk_float = _double(risk)
    if not near(value, risk_float):
        return Decision(value <= risk_float, value, exact=False)
    found = _exact_sign(model, k, n, rate, population_size, risk)
    if found is None:
        return Decision(value <= risk_float, value, exact=False)
    sign, exact_value = found
    return Decision(sign <= 0, exact_value, exact=True)


def at_most_each(
    model: str,
    ks: Any,
    ns: Any,
    values: Any,
    rate: Fraction,
    population_size: int | None,
    risk: Fraction,
) -> np.ndarray:
    """Element by element :func:`at_most` over arrays of ``k``, ``n`` and double tails."""
    values = np.asarray(values, dtype=np.float64)
    ks_b, ns_b = np.broadcast_to(ks, values.shape), np.broadcast_to(ns, values.shape)
    risk_float = float(risk)
    result = values <= risk_float
    doubtful = np.abs(values - risk_float) <= RELATIVE_BAND * np.maximum(
        abs(risk_float), np.abs(values)
    )
    for index in zip(*np.nonzero(doubtful), strict=True):
        result[index] = at_most(
            model, int(ks_b[index]), int(ns_b[index]), rate, population_size, risk,
            float(values[index]),
        ).holds
    return np.asarray(result)
