"""The estimation inputs, checked and made exact once (margins, confidences and rates as
fractions), and the size cap every method shares."""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction
from typing import NamedTuple

from scipy import stats

from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.estimation.lattice import _population_deviations
from service.sampling.estimation.limits import MAX_POPULATION_SIZE
from service.sampling.rates import WrittenDecimal, exact_rate


@dataclass(frozen=True)
class _Problem:
    margin: Fraction
    alpha: Fraction
    rate: Fraction | None
    population: int | None
    max_sample_size: int

    @property
    def alpha_float(self) -> float:
        return float(self.alpha)

    @property
    def variance_factor(self) -> Fraction:
        """``p(1 − p)`` at the anticipated rate, or its largest value 1/4."""
        if self.rate is None:
            return Fraction(1, 4)
        return self.rate * (1 - self.rate)

    @property
    def population_variance_factor(self) -> Fraction:
        """``p(1 − p)`` of the population the miss is measured from: ``M/N`` when a
        population and a rate are given (see :func:`_population_deviations`)."""
        if self.rate is None or self.population is None:
            return self.variance_factor
        share = Fraction(_population_deviations(self.population, self.rate), self.population)
        return share * (1 - share)

    @property
    def z(self) -> float:
        """Two-sided standard normal quantile ``Φ⁻¹(1 − α/2)``."""
        return float(stats.norm.ppf(1.0 - self.alpha_float / 2.0))


class _Sized(NamedTuple):
    sample_size: int
    finite_population_correction: bool
    miss_probability: float | None = None


def _real(value: object, field: str) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise InvalidInput(field, f"must be a number; got {value!r}")
    number = float(value)
    if not math.isfinite(number):
        raise InvalidInput(field, f"must be a finite number; got {value!r}")
    return number


def _exact(number: float) -> Fraction:
    """The rational number written by the shortest decimal form of ``number``."""
    return Fraction(repr(number))


def _open_unit(value: object, field: str, upper: float = 1.0) -> Fraction:
    number = _real(value, field)
    exact = exact_rate(value) if isinstance(value, WrittenDecimal) else _exact(number)
    if not 0 < exact < _exact(upper):
        raise InvalidInput(
            field, f"must be greater than 0 and less than {upper:g}; got {number!r}"
        )
    return exact


def _population(value: object) -> int | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int):
        raise InvalidInput("population.size", f"must be a whole number; got {value!r}")
    if value < 1:
        raise InvalidInput("population.size", f"must be at least 1; got {value}")
    if value > MAX_POPULATION_SIZE:
        raise ComputationTooLarge(
            "population.size",
            f"{value:,} is above the largest supported population, {MAX_POPULATION_SIZE:,}",
        )
    return value


def _sample_size(value: object, population: int | None) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise InvalidInput("sample_size", f"must be a whole number; got {value!r}")
    if value < 1:
        raise InvalidInput("sample_size", f"must be at least 1; got {value}")
    if population is not None and value > population:
        raise InvalidInput(
            "sample_size", f"{value} is above the population size {population}"
        )
    return value


def _ceil_positive(value: Fraction) -> int:
    return max(1, math.ceil(value))


def _cap(size: int, problem: _Problem) -> int:
    """A sample cannot be larger than the population (a census)."""
    if problem.population is not None:
        return min(size, problem.population)
    return size
