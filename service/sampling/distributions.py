"""The three attribute-sampling models: binomial, hypergeometric and Poisson.

Each model answers one question for a sample of ``n`` items drawn from a
population whose true deviation rate is ``rate``: the probability that the
sample shows at most ``k`` deviations (``lower_tail``), and more than ``k``
(``upper_tail``). Arguments ``k`` and ``n`` may be integers or integer numpy
arrays of one shape; the result has that shape.

- binomial: X ~ Binomial(n, rate): sampling with replacement, or from a
  population large enough for that to be immaterial.
- hypergeometric: X ~ Hypergeometric(N, M, n) with M = ceil(rate × N) deviant
  items in a population of N, sampled without replacement. The count is
  rounded up so that a population "at the tolerable rate" holds at least that
  rate of deviations.
- Poisson: X ~ Poisson(n × rate), the approximation behind the confidence
  factors of attribute-sampling practice.

References
----------
AICPA, *Audit Guide: Audit Sampling* (2019), chapter 3 and appendix A on
attribute sampling tables built from these distributions.
Johnson, Kemp & Kotz, *Univariate Discrete Distributions*, 3rd ed. (2005),
chapters 3, 4 and 6.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import special

from service.sampling import hypergeometric
from service.sampling.errors import InvalidInput
from service.sampling.rates import ceil_product

Counts = int | NDArray[np.int64]
Tail = Callable[[Counts, Counts, Fraction, int | None], Any]


def deviant_items(rate: Fraction, population_size: int) -> int:
    """Number of deviant items a population of ``population_size`` holds at ``rate``.

    Defined as ``ceil(rate × N)``, computed exactly.

    >>> deviant_items(Fraction(5, 100), 4200)
    210
    >>> deviant_items(Fraction(5, 100), 10)
    1
    """
    return ceil_product(rate, population_size)


def _both_integers(k: Counts, n: Counts) -> bool:
    return isinstance(k, int | np.integer) and isinstance(n, int | np.integer)


def _binomial_lower(k: Counts, n: Counts, rate: Fraction, population_size: int | None) -> Any:
    # P(X ≤ k) = 1 − I_p(k + 1, n − k), the regularised incomplete beta function (Johnson,
    # Kemp & Kotz 2005, §3.7), called directly: scipy.stats' generic machinery costs
    # about 100 times as much per scalar call as the function itself. Integer arguments
    # skip the arrays: building them costs more than the function.
    if _both_integers(k, n):
        if 0 <= k < n:
            return special.betaincc(k + 1, n - k, float(rate))
        return np.float64(0.0 if k < 0 else 1.0)
    k, n = np.asarray(k), np.asarray(n)
    inside = (k >= 0) & (k < n)
    value = special.betaincc(np.where(inside, k + 1, 1), np.where(inside, n - k, 1), float(rate))
    return _scalar(np.where(inside, value, np.where(k < 0, 0.0, 1.0)))


def _binomial_upper(k: Counts, n: Counts, rate: Fraction, population_size: int | None) -> Any:
    if _both_integers(k, n):
        if 0 <= k < n:
            return special.betainc(k + 1, n - k, float(rate))
        return np.float64(1.0 if k < 0 else 0.0)
    k, n = np.asarray(k), np.asarray(n)
    inside = (k >= 0) & (k < n)
    value = special.betainc(np.where(inside, k + 1, 1), np.where(inside, n - k, 1), float(rate))
    return _scalar(np.where(inside, value, np.where(k < 0, 1.0, 0.0)))


def _scalar(value: Any) -> Any:
    return value[()] if isinstance(value, np.ndarray) and value.ndim == 0 else value


def _required_population(population_size: int | None) -> int:
    if population_size is None:
        raise InvalidInput("population.size", "the hypergeometric method needs a population size")
    return population_size


def _hypergeometric_lower(
    k: Counts, n: Counts, rate: Fraction, population_size: int | None
) -> Any:
    size = _required_population(population_size)
    return hypergeometric.cdf(k, size, deviant_items(rate, size), n)


def _hypergeometric_upper(
    k: Counts, n: Counts, rate: Fraction, population_size: int | None
) -> Any:
    size = _required_population(population_size)
    return hypergeometric.sf(k, size, deviant_items(rate, size), n)


def _poisson_lower(k: Counts, n: Counts, rate: Fraction, population_size: int | None) -> Any:
    # P(Y ≤ k) = Q(k + 1, λ), the regularised upper incomplete gamma function.
    if _both_integers(k, n):
        if k >= 0:
            return special.gammaincc(k + 1, np.multiply(n, float(rate)))
        return np.float64(0.0)
    k, mean = np.asarray(k), np.multiply(n, float(rate))
    inside = k >= 0
    value = special.gammaincc(np.where(inside, k + 1, 1), mean)
    return _scalar(np.where(inside, value, 0.0))


def _poisson_upper(k: Counts, n: Counts, rate: Fraction, population_size: int | None) -> Any:
    if _both_integers(k, n):
        if k >= 0:
            return special.gammainc(k + 1, np.multiply(n, float(rate)))
        return np.float64(1.0)
    k, mean = np.asarray(k), np.multiply(n, float(rate))
    inside = k >= 0
    value = special.gammainc(np.where(inside, k + 1, 1), mean)
    return _scalar(np.where(inside, value, 1.0))


@dataclass(frozen=True)
class Model:
    """One attribute-sampling model: its tails and what it needs."""

    name: str
    lower_tail: Tail
    upper_tail: Tail
    needs_population: bool
    reference: str


MODELS: dict[str, Model] = {
    "binomial": Model(
        "binomial",
        _binomial_lower,
        _binomial_upper,
        needs_population=False,
        reference="binomial distribution; Clopper & Pearson (1934), Biometrika 26(4)",
    ),
    "hypergeometric": Model(
        "hypergeometric",
        _hypergeometric_lower,
        _hypergeometric_upper,
        needs_population=True,
        reference="hypergeometric distribution; Wright (1991), Statistics & Probability "
        "Letters 11(5); Buonaccorsi (1987), Communications in Statistics A 16(5)",
    ),
    "poisson": Model(
        "poisson",
        _poisson_lower,
        _poisson_upper,
        needs_population=False,
        reference="Poisson approximation; Garwood (1936), Biometrika 28(3/4)",
    ),
}


def resolve_model(method: str | None, population_size: int | None) -> Model:
    """The model named ``method``; by default hypergeometric when N is given, else binomial."""
    if method is None:
        method = "binomial" if population_size is None else "hypergeometric"
    model = MODELS.get(method)
    if model is None:
        raise InvalidInput("method", f"method {method!r} must be one of {sorted(MODELS)}")
    if model.needs_population and population_size is None:
        raise InvalidInput(
            "population.size", f"the {method} method needs population.size to be given"
        )
    return model
