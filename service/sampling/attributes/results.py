"""The answers of attribute sampling: a sample-size plan, an evaluation, an interval."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Interval:
    """A closed interval ``[low, high]`` of deviation rates."""

    low: float
    high: float


@dataclass(frozen=True)
class SampleSizePlan:
    """A test-of-controls plan: the inputs, repeated, beside the answer."""

    method: str
    tolerable_rate: float
    expected_rate: float
    confidence: float
    population_size: int | None
    population_label: str | None
    sample_size: int
    allowed_deviations: int
    achieved_confidence: float
    risk_of_overreliance: float
    risk_of_underreliance: float
    warnings: tuple[str, ...]
    tolerable_deviant_items: int | None = None

    @property
    def whole_population(self) -> bool:
        """True when the plan tests every item of the population (no sampling risk)."""
        return self.population_size is not None and self.sample_size == self.population_size


@dataclass(frozen=True)
class Evaluation:
    """The evaluation of a finished test: the inputs, repeated, beside the answer."""

    method: str
    population_size: int | None
    population_label: str | None
    sample_size: int
    deviations: int
    confidence: float
    tolerable_rate: float | None
    sample_deviation_rate: float
    upper_deviation_limit: float
    upper_deviation_count: int | None
    allowance_for_sampling_risk: float
    interval: Interval
    risk_at_tolerable_rate: float | None
    supports_reliance: bool | None
    warnings: tuple[str, ...]
    expected_rate: float | None = None
    planned_allowed_deviations: int | None = None
    whole_population: bool = False
    tolerable_deviant_items: int | None = None
