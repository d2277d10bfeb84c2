"""Periodic controls: what the frequency-based sample sizes of common practice prove.

A control performed a countable number of times in the period (12 monthly
reconciliations, 52 weekly reviews) is a small population of ``N`` occurrences, tested
without replacement. Practice sizes such tests by the control's frequency from a table of
conventions; this module sets those sizes beside the exact statistical plan for the same
population and states what each size proves:

- against ``m`` deviant occurrences (``m`` = 1, 2, 3), the probability that a sample of
  ``n`` finds at least one, ``1 − P(X = 0)`` with ``X ~ Hypergeometric(N, m, n)``: the
  confidence with which finding none rules out ``m`` or more deviant occurrences;
- the upper deviation limit if none is found (the hypergeometric bound of
  :func:`service.sampling.attributes.evaluate_sample`), as a count of occurrences and a
  rate;
- whether finding none supports reliance at the tolerable rate, whose ``ceil(t N)``
  deviant occurrences are stated as a count.

The default table is common practice, recalled from memory, with no published source:
the sizes and the yearly occurrences are conventions, to be replaced by the
engagement's own methodology (``conventions``, or per request).

References
----------
AICPA, *Audit Guide: Audit Sampling* (2019), chapter 3 (small populations and the
hypergeometric distribution). Johnson, Kemp & Kotz (2005), *Univariate Discrete
Distributions*, chapter 6.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from service.sampling import hypergeometric
from service.sampling.attributes import (
    DEFAULT_MAX_SAMPLE_SIZE,
    SampleSizePlan,
    evaluate_sample,
    size_sample,
)
from service.sampling.distributions import deviant_items
from service.sampling.errors import InvalidInput
from service.sampling.rates import exact_rate

# Largest number of occurrences accepted (a control run every minute of a year is ~500,000).
MAX_OCCURRENCES = 10_000_000
# The deviant occurrences against which each size's confidence is stated.
DEVIANT_COUNTS = (1, 2, 3)


@dataclass(frozen=True)
class FrequencyConvention:
    """A frequency's usual yearly occurrences and the range of sample sizes practice uses."""

    occurrences: int
    low: int
    high: int


#: Common practice, recalled from memory, with no published source: conventions only.
DEFAULT_CONVENTIONS: Mapping[str, FrequencyConvention] = {
    "annual": FrequencyConvention(1, 1, 1),
    "quarterly": FrequencyConvention(4, 2, 2),
    "monthly": FrequencyConvention(12, 2, 5),
    "weekly": FrequencyConvention(52, 5, 15),
    "daily": FrequencyConvention(250, 20, 40),
    "several_daily": FrequencyConvention(1000, 25, 60),
}
FREQUENCIES = tuple(DEFAULT_CONVENTIONS)


@dataclass(frozen=True)
class SizeMeaning:
    """What testing ``sample_size`` of the occurrences and finding none proves."""

    sample_size: int
    basis: str
    confidence_against_1_deviant: float | None
    confidence_against_2_deviant: float | None
    confidence_against_3_deviant: float | None
    upper_deviation_count_if_none_found: int
    upper_deviation_limit_if_none_found: float
    achieved_confidence_at_tolerable: float
    supports_reliance_if_none_found: bool


@dataclass(frozen=True)
class PeriodicPlan:
    """The conventions, the statistical plan and what each size proves."""

    frequency: str
    occurrences: int
    occurrences_basis: str
    tolerable_rate: float
    expected_rate: float
    confidence: float
    tolerable_deviant_items: int
    common_practice_low: int
    common_practice_high: int
    common_practice_basis: str
    statistical_plan: SampleSizePlan
    sizes: tuple[SizeMeaning, ...]
    warnings: tuple[str, ...]


def _meaning(
    n: int, size: int, tolerable_rate: float, confidence: float, basis: str
) -> SizeMeaning:
    detects: list[float | None] = []
    for m in DEVIANT_COUNTS:
        detects.append(None if m > size else 1.0 - float(hypergeometric.cdf(0, size, m, n)))
    none_found = evaluate_sample(n, 0, confidence, tolerable_rate, size, "hypergeometric")
    risk = none_found.risk_at_tolerable_rate
    return SizeMeaning(
        sample_size=n,
        basis=basis,
        confidence_against_1_deviant=detects[0],
        confidence_against_2_deviant=detects[1],
        confidence_against_3_deviant=detects[2],
        upper_deviation_count_if_none_found=none_found.upper_deviation_count or 0,
        upper_deviation_limit_if_none_found=none_found.upper_deviation_limit,
        achieved_confidence_at_tolerable=1.0 - (risk if risk is not None else 1.0),
        supports_reliance_if_none_found=bool(none_found.supports_reliance),
    )


def plan_periodic(
    frequency: str,
    tolerable_rate: float,
    confidence: float = 0.95,
    occurrences: int | None = None,
    expected_rate: float = 0.0,
    *,
    common_practice_low: int | None = None,
    common_practice_high: int | None = None,
    conventions: Mapping[str, FrequencyConvention] = DEFAULT_CONVENTIONS,
    max_sample_size: int = DEFAULT_MAX_SAMPLE_SIZE,
) -> PeriodicPlan:
    """Common-practice sizes for a periodic control beside the exact plan, and their meaning.

    Parameters
    ----------
    frequency : {"annual", "quarterly", "monthly", "weekly", "daily", "several_daily"}
    tolerable_rate, confidence, expected_rate
        As for :func:`service.sampling.attributes.size_sample`.
    occurrences : int, optional
        Times the control ran in the period; by default the convention for the frequency.
    common_practice_low, common_practice_high : int, optional
        The engagement's own range of sizes for this frequency, instead of the table's.
    conventions : mapping
        The table of conventions (default :data:`DEFAULT_CONVENTIONS`).

    Returns
    -------
    PeriodicPlan

    Examples
    --------
    >>> plan = plan_periodic("monthly", 0.10)
    >>> plan.occurrences, plan.statistical_plan.sample_size, plan.tolerable_deviant_items
    (12, 9, 2)
    >>> round(plan.sizes[0].confidence_against_1_deviant, 4)  # 2 of 12 finds 1 deviant
    0.1667
    """
    convention = conventions.get(frequency)
    if convention is None:
        raise InvalidInput(
            "frequency", f"frequency {frequency!r} must be one of {list(conventions)}"
        )
    size = convention.occurrences if occurrences is None else occurrences
    if not (1 <= size <= MAX_OCCURRENCES):
        raise InvalidInput(
            "occurrences", f"occurrences {size} must be from 1 to {MAX_OCCURRENCES:,}"
        )
    low = convention.low if common_practice_low is None else common_practice_low
    high = convention.high if common_practice_high is None else common_practice_high
    custom = common_practice_low is not None or common_practice_high is not None
    if not (1 <= low <= high):
        raise InvalidInput(
            "common_practice.high",
            f"the common-practice range {low} to {high} must start at 1 or more and not "
            "end below its start",
        )
    plan = size_sample(
        tolerable_rate,
        expected_rate,
        confidence,
        size,
        "hypergeometric",
        max_sample_size=max_sample_size,
    )
    warnings: list[str] = []
    if high > size:
        warnings.append(
            f"The common-practice sizes reach {high:,}, more than the {size:,} occurrences: "
            f"they are capped at {size:,} (every occurrence)."
        )
    candidates: dict[int, str] = {}
    for n, basis in (
        (min(low, size), "common practice, low end"),
        (min(high, size), "common practice, high end"),
        (plan.sample_size, "statistical plan"),
    ):
        candidates[n] = f"{candidates[n]}; {basis}" if n in candidates else basis
    sizes = tuple(
        _meaning(n, size, tolerable_rate, confidence, basis)
        for n, basis in sorted(candidates.items())
    )
    short = [m.sample_size for m in sizes if not m.supports_reliance_if_none_found]
    if short:
        warnings.append(
            "Finding no deviation in "
            + " or ".join(f"{n:,}" for n in short)
            + f" of {size:,} occurrences does not reach {confidence:.4g} confidence at the "
            "tolerable rate: such a size rests on judgement and other evidence, not on "
            "sampling alone."
        )
    if plan.sample_size == size and size > 1:
        warnings.append(
            f"The statistical plan tests all {size:,} occurrences: at this tolerable rate no "
            "smaller sample reaches the confidence."
        )
    return PeriodicPlan(
        frequency=frequency,
        occurrences=size,
        occurrences_basis="given" if occurrences is not None else "convention",
        tolerable_rate=tolerable_rate,
        expected_rate=expected_rate,
        confidence=confidence,
        tolerable_deviant_items=deviant_items(exact_rate(tolerable_rate), size),
        common_practice_low=low,
        common_practice_high=high,
        common_practice_basis=(
            "given" if custom else "common practice (a convention, no published source)"
        ),
        statistical_plan=plan,
        sizes=sizes,
        warnings=tuple(warnings),
    )
