"""Staged (stop-or-go) plans for tests of controls, with their exact risks.

A staged plan tests ``n_1`` items; with ``D_1`` deviations it accepts when
``D_1 ≤ a_1``, fails when ``D_1 ≥ r_1`` and otherwise extends the sample to
``n_2`` items in all, and so on; at the last stage ``r_s = a_s + 1``, so the
test always ends. Counts are cumulative.

Exact probabilities
    The deviations found in the items a stage adds depend on the past only
    through the deviations found so far, so the outcome probabilities follow by
    convolution over the stages: binomial increments ``Bin(n_j − n_{j−1}, p)``;
    Poisson increments ``Poisson((n_j − n_{j−1}) p)``; hypergeometric, drawn
    without replacement across stages, ``Hyp(N − n_{j−1}, M − d, n_j − n_{j−1})``
    after ``d`` deviations in the first ``n_{j−1}`` items, ``M = ceil(p N)``.
    The *risk of overreliance* is the probability that the plan accepts when the
    true rate is the tolerable rate; the *risk of underreliance* the
    probability that it fails at the expected rate; the *expected sample size*
    at a rate is ``Σ_j P(stage j is reached) (n_j − n_{j−1})``.

Plan search
    The plan returned minimises the expected sample size at the expected rate
    subject to (1) a risk of overreliance of at most ``1 − confidence`` and (2)
    a risk of underreliance no larger than that of the fixed-size plan for the
    same inputs (:func:`service.sampling.attributes.size_sample`), so that the
    staged plan is never harder on an effective control. Without (2) the
    smallest expected size is reached by failing at the first deviation. The
    fixed-size plan is itself a candidate (one stage). Search caps, so that a
    request stays fast (documented in the README):

    - final allowance ``a_s`` from ``k`` to ``k + EXTRA_ALLOWANCE``, ``k`` the
      fixed-size plan's allowance, and ``k ≤ MAX_FIXED_ALLOWANCE``; three-stage
      plans are searched only when ``k ≤ MAX_THREE_STAGE_ALLOWANCE`` (else two-stage
      plans, with a warning); stage counts of a plan sent for evaluation are at most
      ``MAX_STAGE_COUNT``;
    - earlier allowances ``0 ≤ a_1 ≤ a_2 ≤ a_s``; fail points
      ``a_j + 2 ≤ r_j ≤ a_s + 1`` (two stages), ``r_j = a_s + 1`` (three stages:
      fail early only once the deviations pass the final allowance);
    - two stages: first sizes ``1 ≤ n_1 < n``, ``n`` the fixed-size plan's
      size, all of them or ``FIRST_SIZES`` evenly spaced ones; three stages:
      ``n_1`` and ``n_2`` on grids of at most ``GRID_POINTS`` sizes each, below
      ``LARGEST_FACTOR × n``;
    - the last size is the smallest meeting (1), at most
      ``LARGEST_FACTOR × n`` (and at most N).

References
----------
Dodge, H. F. & Romig, H. G. (1959). *Sampling Inspection Tables: Single and
Double Sampling*, 2nd ed. Wiley: double sampling plans and their operating
characteristic.
Jennison, C. & Turnbull, B. W. (2000). *Group Sequential Methods with
Applications to Clinical Trials*. Chapman & Hall/CRC, §8.4: the stage-wise
ordering of outcomes used for confidence limits after a staged test.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import numpy as np
from scipy import optimize, special

from service.sampling import hypergeometric
from service.sampling.attributes import evaluate_sample, size_sample
from service.sampling.distributions import Model, deviant_items, resolve_model
from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.rates import exact_rate

MIN_STAGES = 2
MAX_STAGES = 3
EXTRA_ALLOWANCE = 1
MAX_FIXED_ALLOWANCE = 6
MAX_THREE_STAGE_ALLOWANCE = 3
# Largest deviation count a stage may name (accept_if_at_most, fail_if_at_least): the
# exact computation costs the square of the counts between them at each stage.
MAX_STAGE_COUNT = 50
FIRST_SIZES = 64
GRID_POINTS = 16
LARGEST_FACTOR = 3
# Risks of underreliance are compared with this slack for floating point rounding.
_SLACK = 1e-12

# numpy arrays of sizes, flags or probabilities, broadcast together.
Array = Any
# P(Y ≤ x) for the deviations Y among ``m`` further items, after ``c`` deviations in the
# first ``prior`` items; arguments broadcast as numpy arrays.
IncrementCdf = Callable[[Any, Any, Any, Any], Any]


@dataclass(frozen=True)
class Stage:
    """One stage: cumulative size and the cumulative deviation counts that end the test."""

    cumulative_sample_size: int
    accept_if_at_most: int
    fail_if_at_least: int


@dataclass(frozen=True)
class StageOutcomes:
    """Probabilities of each way a staged test can end, at one true rate."""

    reach: tuple[float, ...]
    accept: tuple[float, ...]
    fail: tuple[float, ...]

    @property
    def acceptance(self) -> float:
        return math.fsum(self.accept)


@dataclass(frozen=True)
class StagedPlan:
    """A staged plan, its exact risks and expected sizes, beside the fixed-size plan."""

    method: str
    tolerable_rate: float
    expected_rate: float
    confidence: float
    population_size: int | None
    population_label: str | None
    max_stages: int
    stages: tuple[Stage, ...]
    risk_of_overreliance: float
    achieved_confidence: float
    risk_of_underreliance: float
    expected_sample_size_at_expected_rate: float
    expected_sample_size_at_tolerable_rate: float
    largest_sample_size: int
    fixed_sample_size: int
    fixed_allowed_deviations: int
    fixed_risk_of_underreliance: float
    plans_examined: int
    warnings: tuple[str, ...]


# --- exact probabilities ----------------------------------------------------


def increment_cdf(
    model: Model, rate: Fraction | Sequence[Fraction], population_size: int | None
) -> IncrementCdf:
    """The conditional distribution of the deviations a stage adds, as a lower tail.

    ``rate`` may be a sequence of rates: the tail then has one value per rate, in the last
    axis.
    """
    rates = [rate] if isinstance(rate, Fraction) else list(rate)
    p: Any = float(rates[0]) if isinstance(rate, Fraction) else np.array([float(r) for r in rates])
    if model.name == "binomial":
        return lambda x, m, prior, c: _binomial_cdf(x, m, p)
    if model.name == "poisson":
        return lambda x, m, prior, c: _poisson_cdf(x, np.multiply(m, p))
    if population_size is None:
        raise InvalidInput("population.size", "the hypergeometric method needs a population size")
    size = population_size
    counts = [deviant_items(r, size) for r in rates]
    marked: Any = counts[0] if isinstance(rate, Fraction) else np.array(counts, dtype=np.int64)

    def hyper(x: Any, m: Any, prior: Any, c: Any) -> Any:
        shape = np.broadcast(np.asarray(x), np.asarray(m), np.asarray(prior), np.asarray(c),
                             np.asarray(marked)).shape
        remaining = np.broadcast_to(np.maximum(size - np.asarray(prior), 1), shape)
        left = np.clip(marked - np.asarray(c), 0, remaining)
        drawn = np.clip(m, 0, remaining)
        return hypergeometric.cdf(
            np.broadcast_to(np.asarray(x), shape).astype(np.int64),
            remaining.astype(np.int64), np.broadcast_to(left, shape).astype(np.int64),
            np.broadcast_to(drawn, shape).astype(np.int64),
        )

    return hyper


def _binomial_cdf(x: Any, m: Any, p: float) -> Any:
    x, m = np.asarray(x), np.asarray(m)
    inside = (x >= 0) & (x < m)
    value = special.bdtr(np.where(inside, x, 0), np.where(inside, m, 1), p)
    return np.where(inside, value, np.where(x < 0, 0.0, 1.0))


def _poisson_cdf(x: Any, mean: Any) -> Any:
    x = np.asarray(x)
    return np.where(x < 0, 0.0, special.pdtr(np.maximum(x, 0), mean))


def _walk(
    cdf: IncrementCdf, sizes: Sequence[Any], accepts: Sequence[int], fails: Sequence[int]
) -> tuple[list[Any], list[Any], list[Any]]:
    """Reach, accept and fail probabilities by stage; sizes may be broadcast arrays."""
    shape = np.broadcast(*[np.asarray(s) for s in sizes]).shape
    continuing: dict[int, Any] = {0: np.ones(shape)}
    previous: Any = 0
    reach, accept, fail = [], [], []
    for size, a, r in zip(sizes, accepts, fails, strict=True):
        m = np.asarray(size) - previous
        total = sum(continuing.values())
        accepted: Any = np.zeros(shape)
        carried: dict[int, Any] = {}
        for c, mass in continuing.items():
            low = cdf(a - c, m, previous, c)
            accepted = accepted + mass * low
            below = low
            for d in range(max(c, a + 1), r):
                upto = cdf(d - c, m, previous, c)
                carried[d] = carried.get(d, 0.0) + mass * (upto - below)
                below = upto
        reach.append(total)
        accept.append(accepted)
        fail.append(np.maximum(total - accepted - sum(carried.values(), np.zeros(shape)), 0.0))
        continuing, previous = carried, np.asarray(size)
    return reach, accept, fail


def stage_outcomes(
    stages: Sequence[Stage], model: Model, rate: Fraction, population_size: int | None
) -> StageOutcomes:
    """Exact probabilities of reaching, accepting and failing at each stage.

    >>> from service.sampling.distributions import MODELS
    >>> plan = [Stage(30, 0, 2), Stage(60, 1, 2)]
    >>> out = stage_outcomes(plan, MODELS["binomial"], Fraction(1, 20), None)
    >>> round(out.acceptance, 6)  # 0.95^30 + 30 × 0.05 × 0.95^29 × 0.95^30
    0.287381
    """
    reach, accept, fail = _walk(
        increment_cdf(model, rate, population_size),
        [s.cumulative_sample_size for s in stages],
        [s.accept_if_at_most for s in stages],
        [s.fail_if_at_least for s in stages],
    )
    return StageOutcomes(
        tuple(float(v) for v in reach), tuple(float(v) for v in accept),
        tuple(float(v) for v in fail),
    )


def expected_sample_size(stages: Sequence[Stage], outcomes: StageOutcomes) -> float:
    """``Σ_j P(stage j is reached) (n_j − n_{j−1})``."""
    sizes = [0, *(s.cumulative_sample_size for s in stages)]
    return math.fsum(
        reach * (sizes[j + 1] - sizes[j]) for j, reach in enumerate(outcomes.reach)
    )


# --- validation -------------------------------------------------------------


def check_stages(stages: Sequence[Stage], population_size: int | None) -> None:
    """Refuse a plan whose stages do not make a staged test that always ends."""
    if not stages:
        raise InvalidInput("stages", "stages must hold at least one stage")
    if len(stages) > MAX_STAGES:
        raise InvalidInput("stages", f"stages holds {len(stages)} stages; at most {MAX_STAGES}")
    previous = 0
    for j, stage in enumerate(stages):
        field = f"stages[{j}]"
        n, a, r = stage.cumulative_sample_size, stage.accept_if_at_most, stage.fail_if_at_least
        if n <= previous:
            raise InvalidInput(
                f"{field}.cumulative_sample_size",
                f"cumulative_sample_size {n} must be above the previous stage's {previous}",
            )
        if population_size is not None and n > population_size:
            raise InvalidInput(
                f"{field}.cumulative_sample_size",
                f"cumulative_sample_size {n} exceeds population.size {population_size}",
            )
        if r > MAX_STAGE_COUNT:
            raise InvalidInput(
                f"{field}.fail_if_at_least",
                f"fail_if_at_least {r} is above {MAX_STAGE_COUNT}, the largest deviation "
                "count a stage may name here",
            )
        if not (-1 <= a < r):
            raise InvalidInput(
                f"{field}.fail_if_at_least",
                f"fail_if_at_least {r} must be above accept_if_at_most {a} (and "
                "accept_if_at_most at least -1)",
            )
        last = j == len(stages) - 1
        if last and r != a + 1:
            raise InvalidInput(
                f"{field}.fail_if_at_least",
                f"the last stage must decide: fail_if_at_least {r} must be "
                f"accept_if_at_most + 1 = {a + 1}",
            )
        previous = n


# --- plan search ------------------------------------------------------------


def _smallest_last_size(
    feasible: Callable[[Array], Array], low: Array, high: int
) -> Array:
    """Per entry, the smallest size in [low, high] where ``feasible`` holds (high + 1 if none).

    ``feasible`` is monotone in the last size: more items with the same allowance
    accept less often at any rate.
    """
    lo = low.astype(np.int64)
    hi = np.full_like(lo, high)
    ok_high = feasible(hi)
    answer = np.where(ok_high, hi, high + 1)
    lo = np.minimum(lo, hi)
    active = ok_high.copy()
    while np.any(active & (lo < hi)):
        mid = (lo + hi) // 2
        ok = feasible(mid)
        hi = np.where(active & ok, mid, hi)
        lo = np.where(active & ~ok, mid + 1, lo)
    return np.where(active, hi, answer)


@dataclass(frozen=True)
class _Candidate:
    stages: tuple[Stage, ...]
    asn: float
    largest: int


def _best(
    firsts: Sequence[Array],
    accepts: tuple[int, ...],
    fails: tuple[int, ...],
    cdf_t: IncrementCdf,
    cdf_e: IncrementCdf,
    alpha: float,
    beta: float,
    cap: int,
) -> tuple[_Candidate | None, int]:
    """The best plan with the given allowances, over the given earlier sizes."""
    last_low = firsts[-1] + 1

    def feasible(last: Array) -> Array:
        accept = _walk(cdf_t, [*firsts, last], accepts, fails)[1]
        return np.asarray(sum(accept) <= alpha)

    last = _smallest_last_size(feasible, last_low, cap)
    usable = last <= cap
    if not np.any(usable):
        return None, int(last.size)
    sizes = [np.asarray(f)[usable] for f in firsts] + [last[usable]]
    reach, _, fail = _walk(cdf_e, sizes, accepts, fails)
    under = sum(fail)
    steps = [sizes[0]] + [sizes[j] - sizes[j - 1] for j in range(1, len(sizes))]
    asn = sum(r * s for r, s in zip(reach, steps, strict=True))
    asn = np.where(under <= beta + _SLACK, asn, np.inf)
    i = int(np.argmin(asn))
    if not np.isfinite(asn[i]):
        return None, int(last.size)
    stages = tuple(
        Stage(int(sizes[j][i]), accepts[j], fails[j]) for j in range(len(sizes))
    )
    return _Candidate(stages, float(asn[i]), int(sizes[-1][i])), int(last.size)


def _grid(low: int, high: int, points: int) -> list[int]:
    """Every size from low to high, or ``points`` evenly spaced ones when there are more."""
    if high < low:
        return []
    if high - low + 1 <= points:
        return list(range(low, high + 1))
    return sorted({round(v) for v in np.linspace(low, high, points)})


def _search(
    stages: int, n: int, k: int, cdf_t: IncrementCdf, cdf_e: IncrementCdf,
    alpha: float, beta: float, cap: int,
) -> tuple[list[_Candidate], int]:
    found: list[_Candidate] = []
    examined = 0
    for final in range(k, k + EXTRA_ALLOWANCE + 1):
        if stages == 2:
            firsts = [np.array(_grid(1, n - 1, FIRST_SIZES), dtype=np.int64)]
            if firsts[0].size == 0:
                continue
            for a1 in range(0, final + 1):
                for r1 in range(a1 + 2, final + 2):
                    best, count = _best(
                        firsts, (a1, final), (r1, final + 1), cdf_t, cdf_e, alpha, beta, cap
                    )
                    examined += count
                    if best:
                        found.append(best)
        else:
            pairs = [(x, y) for x in _grid(1, n - 1, GRID_POINTS)
                     for y in _grid(x + 1, cap - 1, GRID_POINTS)]
            if not pairs:
                continue
            first = np.array([p[0] for p in pairs], dtype=np.int64)
            second = np.array([p[1] for p in pairs], dtype=np.int64)
            for a1 in range(0, final):
                for a2 in range(a1, final):
                    best, count = _best(
                        [first, second], (a1, a2, final), (final + 1, final + 1, final + 1),
                        cdf_t, cdf_e, alpha, beta, cap,
                    )
                    examined += count
                    if best:
                        found.append(best)
    return found, examined


def plan_staged(
    tolerable_rate: float,
    expected_rate: float = 0.0,
    confidence: float = 0.95,
    population_size: int | None = None,
    method: str | None = None,
    max_stages: int = 2,
    *,
    population_label: str | None = None,
    max_sample_size: int = 10_000_000,
) -> StagedPlan:
    """The staged plan with the smallest expected sample size at the expected rate.

    Parameters
    ----------
    tolerable_rate, expected_rate, confidence, population_size, method
        As for :func:`service.sampling.attributes.size_sample`.
    max_stages : {2, 3}
        Most stages the plan may have.

    Returns
    -------
    StagedPlan

    Notes
    -----
    Minimises the expected sample size at the expected rate subject to an exact
    risk of overreliance of at most ``1 − confidence`` and a risk of
    underreliance no larger than the fixed-size plan's; see the module docstring
    for the convolution and the search caps.

    Examples
    --------
    >>> plan = plan_staged(0.05, 0.01, 0.95)
    >>> plan.risk_of_overreliance <= 0.05, plan.fixed_sample_size
    (True, 93)
    """
    if not (MIN_STAGES <= max_stages <= MAX_STAGES):
        raise InvalidInput(
            "max_stages", f"max_stages {max_stages} must be {MIN_STAGES} or {MAX_STAGES}"
        )
    fixed = size_sample(
        tolerable_rate, expected_rate, confidence, population_size, method,
        max_sample_size=max_sample_size,
    )
    model = resolve_model(method, population_size)
    n, k = fixed.sample_size, fixed.allowed_deviations
    if k > MAX_FIXED_ALLOWANCE:
        raise ComputationTooLarge(
            "expected_rate",
            f"the fixed-size plan allows {k} deviations; staged plans are searched only "
            f"when it allows at most {MAX_FIXED_ALLOWANCE} (a larger expected-to-tolerable "
            "gap gives a smaller plan)",
        )
    tolerable, expected = exact_rate(tolerable_rate), exact_rate(expected_rate)
    alpha = 1.0 - confidence
    cap = min(LARGEST_FACTOR * n, max_sample_size)
    if population_size is not None:
        cap = min(cap, population_size)
    cdf_t = increment_cdf(model, tolerable, population_size)
    cdf_e = increment_cdf(model, expected, population_size)

    single = (Stage(n, k, k + 1),)
    candidates = [_Candidate(single, float(n), n)]
    notes: list[str] = []
    searched = max_stages
    if max_stages == 3 and k > MAX_THREE_STAGE_ALLOWANCE:
        searched = 2
        notes.append(
            f"The fixed-size plan allows {k} deviations; three-stage plans are searched only "
            f"up to {MAX_THREE_STAGE_ALLOWANCE}, so the best two-stage plan is returned."
        )
    found, examined = _search(
        searched, n, k, cdf_t, cdf_e, alpha, fixed.risk_of_underreliance, cap
    )
    candidates += found
    if searched == 3:
        more, count = _search(2, n, k, cdf_t, cdf_e, alpha, fixed.risk_of_underreliance, cap)
        candidates += more
        examined += count
    best = min(candidates, key=lambda c: (round(c.asn, 9), c.largest, len(c.stages)))
    return _describe(
        best.stages, model, tolerable, expected, confidence, population_size,
        population_label, tolerable_rate, expected_rate, max_stages, fixed.sample_size,
        fixed.allowed_deviations, fixed.risk_of_underreliance, examined + 1, tuple(notes),
    )


def _describe(
    stages: tuple[Stage, ...], model: Model, tolerable: Fraction, expected: Fraction,
    confidence: float, population_size: int | None, population_label: str | None,
    tolerable_rate: float, expected_rate: float, max_stages: int, fixed_n: int,
    fixed_k: int, fixed_under: float, examined: int, notes: tuple[str, ...] = (),
) -> StagedPlan:
    at_t = stage_outcomes(stages, model, tolerable, population_size)
    at_e = stage_outcomes(stages, model, expected, population_size)
    risk = at_t.acceptance
    warnings: list[str] = list(notes)
    if len(stages) == 1:
        warnings.append(
            "No staged plan within the search limits has a smaller expected sample size than "
            "the fixed-size plan, which is returned as a single stage."
        )
    return StagedPlan(
        method=model.name,
        tolerable_rate=tolerable_rate,
        expected_rate=expected_rate,
        confidence=confidence,
        population_size=population_size,
        population_label=population_label,
        max_stages=max_stages,
        stages=stages,
        risk_of_overreliance=risk,
        achieved_confidence=1.0 - risk,
        risk_of_underreliance=math.fsum(at_e.fail),
        expected_sample_size_at_expected_rate=expected_sample_size(stages, at_e),
        expected_sample_size_at_tolerable_rate=expected_sample_size(stages, at_t),
        largest_sample_size=stages[-1].cumulative_sample_size,
        fixed_sample_size=fixed_n,
        fixed_allowed_deviations=fixed_k,
        fixed_risk_of_underreliance=fixed_under,
        plans_examined=examined,
        warnings=tuple(warnings),
    )


# --- evaluation of a finished staged test -----------------------------------


@dataclass(frozen=True)
class StagedEvaluation:
    """A finished staged test, judged by the plan's own exact probabilities."""

    method: str
    population_size: int | None
    population_label: str | None
    stages: tuple[Stage, ...]
    stage_reached: int
    sample_size: int
    deviations: int
    confidence: float
    tolerable_rate: float
    decision: str
    plan_risk_of_overreliance: float
    risk_at_tolerable_rate: float
    upper_deviation_limit: float
    sample_deviation_rate: float
    supports_reliance: bool
    fixed_size_upper_deviation_limit: float
    fixed_size_risk_at_tolerable_rate: float
    fixed_size_supports_reliance: bool
    warnings: tuple[str, ...]


def _entering(cdf: IncrementCdf, stages: Sequence[Stage], j: int) -> tuple[dict[int, float], int]:
    """Probability of each cumulative count with which stage ``j`` (0-based) is entered."""
    continuing: dict[int, float] = {0: 1.0}
    previous = 0
    for stage in stages[:j]:
        m = stage.cumulative_sample_size - previous
        carried: dict[int, float] = {}
        for c, mass in continuing.items():
            below = float(cdf(stage.accept_if_at_most - c, m, previous, c))
            for d in range(max(c, stage.accept_if_at_most + 1), stage.fail_if_at_least):
                upto = float(cdf(d - c, m, previous, c))
                carried[d] = carried.get(d, 0.0) + mass * (upto - below)
                below = upto
        continuing, previous = carried, stage.cumulative_sample_size
    return continuing, previous


def ordered_probability(
    stages: Sequence[Stage], j: int, deviations: int, cdf: IncrementCdf
) -> float:
    """P(an outcome at most as unfavourable as stopping at stage ``j`` with ``deviations``).

    Stage-wise ordering (Jennison & Turnbull 2000, §8.4), from the most favourable:
    accepting at stage 1, 2, …, s (fewer deviations first within a stage), then failing at
    stage s, s − 1, …, 1. ``j`` is 0-based.
    """
    sizes = [s.cumulative_sample_size for s in stages]
    _, accept, fail = _walk(
        cdf, sizes, [s.accept_if_at_most for s in stages], [s.fail_if_at_least for s in stages]
    )
    entering, previous = _entering(cdf, stages, j)
    m = sizes[j] - previous

    def low(x: int) -> float:
        return math.fsum(mass * float(cdf(x - c, m, previous, c)) for c, mass in entering.items())

    stage = stages[j]
    if deviations <= stage.accept_if_at_most:
        return math.fsum([*(float(a) for a in accept[:j]), low(deviations)])
    return min(1.0, math.fsum([
        *(float(a) for a in accept),
        *(float(f) for f in fail[j + 1:]),
        low(deviations) - low(stage.fail_if_at_least - 1),
    ]))


def _upper_limit(
    stages: Sequence[Stage], j: int, d: int, alpha: float, model: Model,
    population_size: int | None,
) -> float:
    def tail(rate: Fraction) -> float:
        return ordered_probability(stages, j, d, increment_cdf(model, rate, population_size))

    if population_size is not None and model.needs_population:
        size = population_size
        lo, hi = 0, size  # counts of deviant items
        if tail(Fraction(hi, size)) > alpha:
            return 1.0
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if tail(Fraction(mid, size)) > alpha:
                lo = mid
            else:
                hi = mid
        return lo / size
    top = 1.0 - 1e-12
    if tail(Fraction(top)) > alpha:
        return 1.0
    root = optimize.brentq(lambda p: tail(Fraction(p)) - alpha, 0.0, top, xtol=1e-14, rtol=1e-12)
    return float(root)


def evaluate_staged(
    stages: Sequence[Stage],
    stage_reached: int,
    deviations: int,
    tolerable_rate: float,
    confidence: float = 0.95,
    population_size: int | None = None,
    method: str | None = None,
    *,
    population_label: str | None = None,
) -> StagedEvaluation:
    """Evaluate a finished staged test with the plan's own exact probabilities.

    Parameters
    ----------
    stages : sequence of Stage
        The plan as run.
    stage_reached : int
        The stage (1-based) at which the test stopped.
    deviations : int
        Cumulative deviations found up to that stage.
    tolerable_rate, confidence, population_size, method
        As for :func:`service.sampling.attributes.evaluate_sample`.

    Notes
    -----
    The decision is the plan's: accept when the deviations are at most the stage's
    ``accept_if_at_most``, fail when at least ``fail_if_at_least``. The plan's risk of
    overreliance is its exact acceptance probability at the tolerable rate; the upper
    deviation limit is the rate at which the outcomes at most as unfavourable as the one
    observed (stage-wise ordering) have probability ``1 − confidence``. The fixed-size
    formula applied to the items tested, which ignores that the sample size depended on the
    deviations found, is reported beside it for comparison only.

    Examples
    --------
    >>> plan = [Stage(66, 0, 2), Stage(135, 2, 3)]
    >>> result = evaluate_staged(plan, 2, 2, 0.05)
    >>> result.decision, result.supports_reliance
    ('accept', True)
    """
    model = resolve_model(method, population_size)
    check_stages(stages, population_size)
    if not (1 <= stage_reached <= len(stages)):
        raise InvalidInput(
            "stage_reached", f"stage_reached {stage_reached} must be from 1 to {len(stages)}"
        )
    j = stage_reached - 1
    stage = stages[j]
    n = stage.cumulative_sample_size
    if not (0 <= deviations <= n):
        raise InvalidInput(
            "deviations", f"deviations {deviations} must be between 0 and the {n} items tested"
        )
    if j > 0 and deviations <= stages[j - 1].accept_if_at_most:
        raise InvalidInput(
            "deviations",
            f"deviations {deviations} would have ended the test at stage {j} (accept with at "
            f"most {stages[j - 1].accept_if_at_most}); stage {stage_reached} was not reached",
        )
    if stage.accept_if_at_most < deviations < stage.fail_if_at_least:
        raise InvalidInput(
            "deviations",
            f"with {deviations} deviations at stage {stage_reached} the plan extends the "
            "sample: the test is not finished",
        )
    fixed = evaluate_sample(
        n, deviations, confidence, tolerable_rate, population_size, method
    )
    tolerable = exact_rate(tolerable_rate)
    alpha = 1.0 - confidence
    cdf_t = increment_cdf(model, tolerable, population_size)
    at_t = stage_outcomes(stages, model, tolerable, population_size)
    accepted = deviations <= stage.accept_if_at_most
    plan_risk = at_t.acceptance
    warnings: list[str] = []
    if plan_risk > alpha:
        warnings.append(
            f"The plan's own risk of overreliance at the tolerable rate is {plan_risk:.4g}, "
            f"above 1 − confidence = {alpha:.4g}: acceptance under this plan does not "
            "support reliance at that confidence."
        )
    return StagedEvaluation(
        method=model.name,
        population_size=population_size,
        population_label=population_label,
        stages=tuple(stages),
        stage_reached=stage_reached,
        sample_size=n,
        deviations=deviations,
        confidence=confidence,
        tolerable_rate=tolerable_rate,
        decision="accept" if accepted else "fail",
        plan_risk_of_overreliance=plan_risk,
        risk_at_tolerable_rate=ordered_probability(stages, j, deviations, cdf_t),
        upper_deviation_limit=_upper_limit(stages, j, deviations, alpha, model, population_size),
        sample_deviation_rate=deviations / n,
        supports_reliance=accepted and plan_risk <= alpha,
        fixed_size_upper_deviation_limit=fixed.upper_deviation_limit,
        fixed_size_risk_at_tolerable_rate=float(fixed.risk_at_tolerable_rate or 0.0),
        fixed_size_supports_reliance=bool(fixed.supports_reliance),
        warnings=tuple(warnings),
    )
