"""The inputs of attribute sampling checked, with the bounds they are checked against."""

from __future__ import annotations

from fractions import Fraction

from service.sampling.errors import InvalidInput

DEFAULT_MAX_SAMPLE_SIZE = 10_000_000
# A computation cap: a plan allowing more deviations than this (a sample of
# hundreds of thousands of items) is refused rather than searched for.
MAX_ALLOWED_DEVIATIONS = 10_000
# Sampling fraction above which the with-replacement models lose materially
# against the hypergeometric one (common practice threshold, not a standard).
_LARGE_SAMPLING_FRACTION = Fraction(1, 10)
_LARGE_PLAN_FACTOR = 3
# Expected deviations e × n below which a plan allowing ceil(e × n) = 1 deviation is
# flagged: the expected rate adds a deviation the caller probably did not mean.
_TINY_EXPECTED_COUNT = Fraction(1, 100)


class _TooManyDeviations(Exception):
    """Internal signal: the plan search passed MAX_ALLOWED_DEVIATIONS."""


def _items(count: int) -> str:
    return f"{count:,} item" + ("" if count == 1 else "s")


def _check_open_unit(field: str, value: float) -> None:
    if not (0.0 < value < 1.0):
        raise InvalidInput(field, f"{field} {value!r} must be strictly between 0 and 1")


#: Confidence levels accepted: from an even chance to a risk of one in a million.  Beyond
#: them the quantiles leave the floating point range.
MIN_CONFIDENCE = 0.5
MAX_CONFIDENCE = 0.999999

#: Smallest tolerable rate accepted: a hundredth of a percent.
MIN_TOLERABLE_RATE = 0.0001


def _check_confidence(value: float) -> None:
    _check_open_unit("confidence", value)
    if not (MIN_CONFIDENCE <= value <= MAX_CONFIDENCE):
        raise InvalidInput(
            "confidence",
            f"confidence {value!r} must be from {MIN_CONFIDENCE:g} to {MAX_CONFIDENCE:g}",
        )


def _check_tolerable_rate(value: float) -> None:
    _check_open_unit("tolerable_rate", value)
    if value < MIN_TOLERABLE_RATE:
        raise InvalidInput(
            "tolerable_rate",
            f"tolerable_rate {value!r} must be at least {MIN_TOLERABLE_RATE:g}",
        )


def _check_population(population_size: int | None) -> None:
    if population_size is not None and population_size < 1:
        raise InvalidInput(
            "population.size", f"population.size {population_size} must be at least 1"
        )
