"""The operating characteristic of a staged plan, and its expected sample size.

For each true deviation rate ``p`` on an even grid from 0, the probability that the
staged plan accepts and the expected number of items it tests, both exact (convolution
over the stages, :mod:`service.sampling.sequential.staged`). The grid ends at the rate
where the acceptance probability falls to ``FLOOR_PROBABILITY`` (or at 1), and at least
at 1.5 times the tolerable rate when one is given.

References
----------
Dodge, H. F. & Romig, H. G. (1959). *Sampling Inspection Tables*, 2nd ed. Wiley: the
operating characteristic and average sample number of double sampling plans.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from service.sampling.distributions import Model, resolve_model
from service.sampling.errors import InvalidInput
from service.sampling.rates import exact_rate
from service.sampling.sequential.staged import (
    Stage,
    _walk,
    check_stages,
    expected_sample_size,
    increment_cdf,
    stage_outcomes,
)

DEFAULT_POINTS = 51
MIN_POINTS = 2
MAX_POINTS = 501
FLOOR_PROBABILITY = 0.001
_BISECTIONS = 40


@dataclass(frozen=True)
class StagedCurvePoint:
    rate: float
    acceptance_probability: float
    expected_sample_size: float


@dataclass(frozen=True)
class StagedCurve:
    """The curve of a staged plan: the inputs, repeated, beside the points."""

    method: str
    stages: tuple[Stage, ...]
    population_size: int | None
    tolerable_rate: float | None
    expected_rate: float | None
    risk_of_overreliance: float | None
    risk_of_underreliance: float | None
    expected_sample_size_at_tolerable_rate: float | None
    expected_sample_size_at_expected_rate: float | None
    points: tuple[StagedCurvePoint, ...]


def _point(stages: Sequence[Stage], model: Model, rate: Fraction, size: int | None
           ) -> StagedCurvePoint:
    outcomes = stage_outcomes(stages, model, rate, size)
    return StagedCurvePoint(
        float(rate), outcomes.acceptance, expected_sample_size(stages, outcomes)
    )


def _grid(stages: Sequence[Stage], model: Model, rates: Sequence[Fraction],
          size: int | None) -> tuple[StagedCurvePoint, ...]:
    """Every grid rate in one convolution: the tails are vectors over the rates."""
    cdf = increment_cdf(model, rates, size)
    sizes = [s.cumulative_sample_size for s in stages]
    reach, accept, _ = _walk(
        cdf, sizes, [s.accept_if_at_most for s in stages], [s.fail_if_at_least for s in stages]
    )
    steps = [sizes[0]] + [sizes[j] - sizes[j - 1] for j in range(1, len(sizes))]
    shape = (len(rates),)
    acceptance = sum((np.broadcast_to(a, shape) for a in accept), np.zeros(shape))
    asn = sum((np.broadcast_to(r, shape) * n for r, n in zip(reach, steps, strict=True)),
              np.zeros(shape))
    return tuple(
        StagedCurvePoint(float(rate), float(a), float(e))
        for rate, a, e in zip(rates, acceptance, asn, strict=True)
    )


def _end_rate(stages: Sequence[Stage], model: Model, size: int | None) -> float:
    """Smallest grid end where acceptance is at most FLOOR_PROBABILITY (bisection), or 1."""

    def acceptance(rate: float) -> float:
        return stage_outcomes(stages, model, Fraction(rate), size).acceptance

    if acceptance(1.0) > FLOOR_PROBABILITY:
        return 1.0
    lo, hi = 0.0, 1.0
    for _ in range(_BISECTIONS):
        mid = (lo + hi) / 2
        if acceptance(mid) > FLOOR_PROBABILITY:
            lo = mid
        else:
            hi = mid
    return hi


def staged_curve(
    stages: Sequence[Stage],
    population_size: int | None = None,
    method: str | None = None,
    tolerable_rate: float | None = None,
    expected_rate: float | None = None,
    points: int = DEFAULT_POINTS,
) -> StagedCurve:
    """Acceptance probability and expected sample size of a staged plan against the rate.

    Examples
    --------
    >>> curve = staged_curve([Stage(59, 0, 1)], tolerable_rate=0.05)
    >>> round(curve.risk_of_overreliance, 6)  # 0.95 ** 59
    0.048495
    """
    model = resolve_model(method, population_size)
    check_stages(stages, population_size)
    if not (MIN_POINTS <= points <= MAX_POINTS):
        raise InvalidInput("points", f"points {points} must be from {MIN_POINTS} to {MAX_POINTS}")
    for field, value in (("tolerable_rate", tolerable_rate), ("expected_rate", expected_rate)):
        if value is not None and not (0.0 <= value < 1.0):
            raise InvalidInput(field, f"{field} {value!r} must be at least 0 and below 1")
    end = _end_rate(stages, model, population_size)
    if tolerable_rate is not None:
        end = min(1.0, max(end, 1.5 * tolerable_rate))
    rates = [Fraction(end) * i / (points - 1) for i in range(points)]
    grid = _grid(stages, model, rates, population_size)
    at_t = (
        None if tolerable_rate is None
        else _point(stages, model, exact_rate(tolerable_rate), population_size)
    )
    at_e = (
        None if expected_rate is None
        else _point(stages, model, exact_rate(expected_rate), population_size)
    )
    return StagedCurve(
        method=model.name,
        stages=tuple(stages),
        population_size=population_size,
        tolerable_rate=tolerable_rate,
        expected_rate=expected_rate,
        risk_of_overreliance=None if at_t is None else at_t.acceptance_probability,
        risk_of_underreliance=None if at_e is None else 1.0 - at_e.acceptance_probability,
        expected_sample_size_at_tolerable_rate=None if at_t is None else at_t.expected_sample_size,
        expected_sample_size_at_expected_rate=None if at_e is None else at_e.expected_sample_size,
        points=grid,
    )
