"""One upper deviation limit for a population sampled in strata, with guaranteed coverage.

Each stratum ``h`` holds ``N_h`` items, ``M_h`` of them deviant (unknown); ``n_h`` are
drawn without replacement and ``d_h`` deviations found. The whole population holds
``M = Σ M_h`` deviant items in ``N = Σ N_h``.

Limit
    For risks ``α_h ≥ 0`` with ``Σ α_h = α = 1 − confidence``, let ``U_h`` be the exact
    hypergeometric upper bound on ``M_h`` at confidence ``1 − α_h``: the largest ``M`` with
    ``P(X ≤ d_h | N_h, M, n_h) > α_h`` (``U_h = N_h − n_h + d_h`` when ``α_h = 0``). The
    combined upper deviation count is ``U = Σ U_h`` and the limit ``U / N``.

Guarantee
    ``P(M_h > U_h) ≤ α_h`` for each stratum whatever its ``M_h`` (exact limits), so by
    Boole's inequality ``P(M > U) ≤ P(some M_h > U_h) ≤ Σ α_h = α``: the combined limit
    covers the population's deviation rate with probability at least the confidence, for
    every possible set of deviant counts, however the strata differ. This holds because
    the split ``α_h`` is fixed from the design alone (population and sample sizes and the
    planned expected rate), never from the deviations found.

Conservatism
    Boole's inequality treats the strata's misses as if they could never occur together,
    and each exact discrete limit already covers at least its level; the actual coverage
    is therefore above the confidence, often well above with many strata, and the limit
    wider than an exact joint method would give.

Split
    Chosen before the results: in ``SPLIT_UNITS`` equal parts of ``α``, given one at a
    time to the stratum whose planning limit falls most (ties: the larger stratum), the
    planning limit being the one for ``round(e n_h)`` deviations, ``e`` the planned
    expected rate (0 by default).

References
----------
Wright, T. (1991). Exact confidence bounds when sampling from small finite universes.
Bonferroni, C. E. (1936); Boole's inequality: e.g. Casella & Berger, *Statistical
Inference*, 2nd ed. (2002), §1.2.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from fractions import Fraction

from service.sampling import hypergeometric
from service.sampling.attributes import Evaluation, evaluate_sample
from service.sampling.distributions import deviant_items
from service.sampling.errors import InvalidInput
from service.sampling.rates import exact_rate

SPLIT_UNITS = 200
MAX_STRATA = 100


@dataclass(frozen=True)
class StratumResult:
    """A stratum's inputs, its own evaluation and its part of the combined limit."""

    label: str
    population_size: int
    sample_size: int
    deviations: int
    evaluation: Evaluation
    risk_share: float
    upper_deviation_count: int


@dataclass(frozen=True)
class StratifiedEvaluation:
    """The evaluation of a population sampled in strata."""

    confidence: float
    tolerable_rate: float | None
    expected_rate: float
    population_size: int
    sample_size: int
    deviations: int
    strata: tuple[StratumResult, ...]
    estimated_deviation_rate: float
    upper_deviation_count: int
    upper_deviation_limit: float
    tolerable_deviant_items: int | None
    supports_reliance: bool | None
    warnings: tuple[str, ...]


@dataclass(frozen=True)
class StratumInput:
    label: str
    population_size: int
    sample_size: int
    deviations: int


def upper_count(deviations: int, sample_size: int, population_size: int, risk: float) -> int:
    """Largest deviant count ``M`` with ``P(X ≤ d | N, M, n) > risk`` (exact, by bisection).

    >>> upper_count(0, 59, 1000, 0.05)  # no deviation in 59 of 1,000 items
    48
    """
    lo, hi = deviations, population_size - (sample_size - deviations)
    if risk <= 0.0:
        return hi

    def above(m: int) -> bool:
        return bool(hypergeometric.cdf(deviations, population_size, m, sample_size) > risk)

    if above(hi):
        return hi
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if above(mid):
            lo = mid
        else:
            hi = mid
    return lo


def risk_split(
    strata: Sequence[StratumInput], alpha: float, expected: Fraction
) -> list[float]:
    """The split of ``alpha`` among the strata, from the design only (module docstring)."""
    planned = [round(expected * s.sample_size) for s in strata]
    planned = [min(p, s.sample_size) for p, s in zip(planned, strata, strict=True)]
    units = [0] * len(strata)
    step = alpha / SPLIT_UNITS

    def bound(h: int, count: int) -> int:
        s = strata[h]
        return upper_count(planned[h], s.sample_size, s.population_size, count * step)

    current = [bound(h, 0) for h in range(len(strata))]
    following = [bound(h, 1) for h in range(len(strata))]
    for _ in range(SPLIT_UNITS):
        best, gain = 0, -1
        for h, s in enumerate(strata):
            g = current[h] - following[h]
            if g > gain or (g == gain and s.population_size > strata[best].population_size):
                best, gain = h, g
        units[best] += 1
        current[best] = following[best]
        following[best] = bound(best, units[best] + 1)
    return [u * alpha / SPLIT_UNITS for u in units]


def _check(strata: Sequence[StratumInput]) -> None:
    if not strata:
        raise InvalidInput("strata", "strata must hold at least one stratum")
    if len(strata) > MAX_STRATA:
        raise InvalidInput("strata", f"strata holds {len(strata)} strata; at most {MAX_STRATA}")
    seen: dict[str, int] = {}
    for i, s in enumerate(strata):
        field = f"strata[{i}]"
        if s.label in seen:
            raise InvalidInput(
                f"{field}.label", f"label {s.label!r} repeats that of strata[{seen[s.label]}]"
            )
        seen[s.label] = i
        if s.population_size < 1:
            raise InvalidInput(f"{field}.population_size", "population_size must be at least 1")
        if not (1 <= s.sample_size <= s.population_size):
            raise InvalidInput(
                f"{field}.sample_size",
                f"sample_size {s.sample_size} must be from 1 to population_size "
                f"{s.population_size}",
            )
        if not (0 <= s.deviations <= s.sample_size):
            raise InvalidInput(
                f"{field}.deviations",
                f"deviations {s.deviations} must be from 0 to sample_size {s.sample_size}",
            )


def evaluate_strata(
    strata: Sequence[StratumInput],
    confidence: float = 0.95,
    tolerable_rate: float | None = None,
    expected_rate: float = 0.0,
) -> StratifiedEvaluation:
    """Each stratum's evaluation and one upper deviation limit for the whole population.

    Parameters
    ----------
    strata : sequence of StratumInput
        Label, population size, sample size and deviations of each stratum.
    confidence : float
        Confidence of each stratum's own evaluation and of the combined limit.
    tolerable_rate : float, optional
        When given, each stratum and the whole population are judged against it.
    expected_rate : float
        The planned expected deviation rate, used only to split the risk before the
        results are known.

    Examples
    --------
    >>> from service.sampling.sequential.strata import StratumInput as S
    >>> result = evaluate_strata([S("North", 1000, 59, 0), S("South", 500, 45, 0)])
    >>> result.upper_deviation_count == sum(s.upper_deviation_count for s in result.strata)
    True
    """
    _check(strata)
    results = [
        evaluate_sample(
            s.sample_size, s.deviations, confidence, tolerable_rate, s.population_size,
            "hypergeometric", population_label=s.label,
        )
        for s in strata
    ]
    tolerable_limit = 1.0 if tolerable_rate is None else tolerable_rate
    if not (0.0 <= expected_rate < tolerable_limit):
        raise InvalidInput(
            "expected_rate",
            f"expected_rate {expected_rate!r} must be at least 0 and below "
            + ("1" if tolerable_rate is None else f"tolerable_rate {tolerable_rate!r}"),
        )
    alpha = 1.0 - confidence
    shares = risk_split(strata, alpha, exact_rate(expected_rate))
    counts = [
        upper_count(s.deviations, s.sample_size, s.population_size, share)
        for s, share in zip(strata, shares, strict=True)
    ]
    size = sum(s.population_size for s in strata)
    estimate = sum(Fraction(s.population_size * s.deviations, s.sample_size) for s in strata)
    upper = sum(counts)
    tolerable_count = (
        None if tolerable_rate is None else deviant_items(exact_rate(tolerable_rate), size)
    )
    warnings: list[str] = []
    if len(strata) > 1:
        warnings.append(
            "The combined limit adds per-stratum limits whose risks sum to 1 − confidence "
            "(Boole's inequality): its coverage is guaranteed and usually above the "
            "confidence, so the limit is conservative."
        )
    return StratifiedEvaluation(
        confidence=confidence,
        tolerable_rate=tolerable_rate,
        expected_rate=expected_rate,
        population_size=size,
        sample_size=sum(s.sample_size for s in strata),
        deviations=sum(s.deviations for s in strata),
        strata=tuple(
            StratumResult(s.label, s.population_size, s.sample_size, s.deviations, r, share,
                          count)
            for s, r, share, count in zip(strata, results, shares, counts, strict=True)
        ),
        estimated_deviation_rate=float(estimate / size),
        upper_deviation_count=upper,
        upper_deviation_limit=upper / size,
        tolerable_deviant_items=tolerable_count,
        supports_reliance=None if tolerable_count is None else upper < tolerable_count,
        warnings=tuple(warnings),
    )
