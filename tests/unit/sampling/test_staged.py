"""Staged plans: every risk recomputed by brute-force enumeration of the stage outcomes.

The enumeration walks every vector of per-stage deviation counts with the probability
mass functions of scipy.stats (binom, hypergeom, poisson), independently of the
convolution in the core.
"""

from __future__ import annotations

import math

import pytest
from scipy import stats

from service.sampling.attributes import size_sample
from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.sequential.staged import (
    Stage,
    evaluate_staged,
    plan_staged,
)


def _increment_pmf(method: str, y: int, m: int, rate: float, size: int | None,
                   prior: int, c: int) -> float:
    if method == "binomial":
        return float(stats.binom.pmf(y, m, rate))
    if method == "poisson":
        return float(stats.poisson.pmf(y, m * rate))
    assert size is not None
    marked = math.ceil(round(rate * size, 9))
    return float(stats.hypergeom.pmf(y, size - prior, marked - c, m))


def enumerate_outcomes(stages: list[Stage], method: str, rate: float,
                       size: int | None = None) -> dict[tuple[str, int, int], float]:
    """P(end at stage j with cumulative count d, accepting or failing), by enumeration."""
    outcomes: dict[tuple[str, int, int], float] = {}
    top = stages[-1].fail_if_at_least  # counts above this only matter as "fail"

    def walk(j: int, prior: int, c: int, mass: float) -> None:
        stage = stages[j]
        m = stage.cumulative_sample_size - prior
        ceiling = m if method != "poisson" else max(0, top - c + 40)
        for y in range(0, ceiling + 1):
            p = mass * _increment_pmf(method, y, m, rate, size, prior, c)
            if p == 0.0:
                continue
            d = c + y
            if d <= stage.accept_if_at_most:
                key = ("accept", j, d)
            elif d >= stage.fail_if_at_least:
                key = ("fail", j, d)
            else:
                walk(j + 1, stage.cumulative_sample_size, d, p)
                continue
            outcomes[key] = outcomes.get(key, 0.0) + p

    walk(0, 0, 0, 1.0)
    return outcomes


def accept_probability(outcomes: dict[tuple[str, int, int], float]) -> float:
    return math.fsum(p for (kind, _, _), p in outcomes.items() if kind == "accept")


def expected_size(stages: list[Stage], outcomes: dict[tuple[str, int, int], float]) -> float:
    return math.fsum(p * stages[j].cumulative_sample_size for (_, j, _), p in outcomes.items())


CASES = [
    dict(tolerable_rate=0.05, expected_rate=0.01, method="binomial"),
    dict(tolerable_rate=0.05, expected_rate=0.01, method="binomial", max_stages=3),
    dict(tolerable_rate=0.1, expected_rate=0.02, method="poisson"),
    dict(tolerable_rate=0.05, expected_rate=0.01, method="hypergeometric", population_size=600),
    dict(tolerable_rate=0.08, expected_rate=0.02, method="hypergeometric",
         population_size=300, max_stages=3),
]


@pytest.mark.parametrize("case", CASES)
def test_each_plan_risk_matches_brute_force_enumeration(case: dict) -> None:
    plan = plan_staged(**case)
    stages = list(plan.stages)
    size = case.get("population_size")
    at_t = enumerate_outcomes(stages, case["method"], case["tolerable_rate"], size)
    at_e = enumerate_outcomes(stages, case["method"], case["expected_rate"], size)
    risk = accept_probability(at_t)
    assert plan.risk_of_overreliance == pytest.approx(risk, rel=1e-9, abs=1e-13)
    assert risk <= 1 - 0.95 + 1e-12
    # Poisson enumeration is truncated 40 deviations past the last fail point.
    assert plan.risk_of_underreliance == pytest.approx(1 - accept_probability(at_e), rel=1e-8)
    assert plan.expected_sample_size_at_expected_rate == pytest.approx(
        expected_size(stages, at_e), rel=1e-9)
    assert plan.expected_sample_size_at_tolerable_rate == pytest.approx(
        expected_size(stages, at_t), rel=1e-9)
    # Never harder on an effective control than the fixed-size plan, never larger on average.
    fixed = size_sample(case["tolerable_rate"], case["expected_rate"], 0.95, size,
                        case["method"])
    assert (plan.fixed_sample_size, plan.fixed_allowed_deviations) == (
        fixed.sample_size, fixed.allowed_deviations)
    assert plan.risk_of_underreliance <= fixed.risk_of_underreliance + 1e-12
    assert plan.expected_sample_size_at_expected_rate <= fixed.sample_size
    assert len(stages) <= case.get("max_stages", 2)
    assert stages[-1].fail_if_at_least == stages[-1].accept_if_at_most + 1


def test_staging_saves_items_at_the_expected_rate() -> None:
    # Fixed plan 93 items / 1 deviation (AICPA Audit Sampling guide, table A-1, 5% risk,
    # tolerable 5%, expected 1%; recalled from memory, also asserted in test_attributes).
    plan = plan_staged(0.05, 0.01, 0.95)
    assert plan.fixed_sample_size == 93
    assert len(plan.stages) == 2
    assert plan.expected_sample_size_at_expected_rate < 93


def test_no_deviation_expected_gives_the_zero_deviation_plan() -> None:
    # 1 − 0.95^59 ≥ 0.95 > 1 − 0.95^58: 59 items, none deviating (derived by hand).
    plan = plan_staged(0.05, 0.0, 0.95)
    assert plan.stages == (Stage(59, 0, 1),)
    assert plan.risk_of_overreliance == pytest.approx(0.95 ** 59, rel=1e-12)


@pytest.mark.parametrize("stages", [1, 4, 0])
def test_stage_count_outside_two_to_three_is_refused(stages: int) -> None:
    with pytest.raises(InvalidInput) as caught:
        plan_staged(0.05, 0.01, 0.95, max_stages=stages)
    assert caught.value.field == "max_stages"


def test_plans_beyond_the_search_cap_are_refused() -> None:
    with pytest.raises(ComputationTooLarge) as caught:
        plan_staged(0.05, 0.03, 0.95)
    assert caught.value.field == "expected_rate"


# --- evaluation of a finished staged test -------------------------------------------

PLAN = [Stage(66, 0, 2), Stage(135, 2, 3)]


def ordered_brute_force(stages: list[Stage], j: int, d: int, rate: float) -> float:
    """Stage-wise ordering (Jennison & Turnbull 2000, §8.4), summed over enumerated outcomes."""
    last = len(stages) - 1

    def key(kind: str, stage: int, count: int) -> tuple[int, int, int]:
        if stage == last:
            return (0, last, count)
        return (0, stage, count) if kind == "accept" else (1, -stage, count)

    outcomes = enumerate_outcomes(stages, "binomial", rate)
    kind = "accept" if d <= stages[j].accept_if_at_most else "fail"
    mine = key(kind, j, d)
    return math.fsum(p for (k, s, c), p in outcomes.items() if key(k, s, c) <= mine)


@pytest.mark.parametrize(("stage", "deviations"), [(1, 0), (1, 2), (1, 4), (2, 1), (2, 2),
                                                    (2, 3), (2, 6)])
def test_staged_evaluation_uses_the_plans_own_probabilities(stage: int, deviations: int) -> None:
    result = evaluate_staged(PLAN, stage, deviations, 0.05, 0.95, method="binomial")
    everything = enumerate_outcomes(PLAN, "binomial", 0.05)
    assert result.plan_risk_of_overreliance == pytest.approx(
        accept_probability(everything), rel=1e-10)
    assert result.risk_at_tolerable_rate == pytest.approx(
        ordered_brute_force(PLAN, stage - 1, deviations, 0.05), rel=1e-9, abs=1e-14)
    # The upper limit is where the ordered tail probability equals 1 − confidence.
    assert ordered_brute_force(PLAN, stage - 1, deviations, result.upper_deviation_limit) == (
        pytest.approx(0.05, rel=1e-6))
    assert result.decision == ("accept" if deviations <= PLAN[stage - 1].accept_if_at_most
                               else "fail")


def test_the_fixed_size_formula_understates_the_risk_after_extending() -> None:
    # Accepting with 2 deviations in 135 after extending: the fixed-size formula
    # (Clopper–Pearson on 135 items, scipy.stats.beta) gives a smaller limit than the
    # staged test's own, because it ignores that the sample grew with the deviations.
    result = evaluate_staged(PLAN, 2, 2, 0.05, 0.95, method="binomial")
    assert result.fixed_size_upper_deviation_limit == pytest.approx(
        stats.beta.ppf(0.95, 3, 133), rel=1e-9)
    assert result.fixed_size_risk_at_tolerable_rate == pytest.approx(
        stats.binom.cdf(2, 135, 0.05), rel=1e-9)
    assert result.upper_deviation_limit > result.fixed_size_upper_deviation_limit
    assert result.risk_at_tolerable_rate > result.fixed_size_risk_at_tolerable_rate


def test_hypergeometric_staged_evaluation_against_enumeration() -> None:
    result = evaluate_staged(PLAN, 2, 2, 0.05, 0.95, population_size=400)
    outcomes = enumerate_outcomes(PLAN, "hypergeometric", 0.05, 400)
    assert result.plan_risk_of_overreliance == pytest.approx(
        accept_probability(outcomes), rel=1e-9)
    assert result.upper_deviation_limit * 400 == round(result.upper_deviation_limit * 400)


@pytest.mark.parametrize(("stage", "deviations", "field"), [
    (3, 0, "stage_reached"),
    (0, 0, "stage_reached"),
    (1, 1, "deviations"),   # between accept and fail at stage 1: not finished
    (2, 0, "deviations"),   # stage 2 cannot be reached with 0 deviations
    (2, 136, "deviations"),
])
def test_impossible_outcomes_are_refused(stage: int, deviations: int, field: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        evaluate_staged(PLAN, stage, deviations, 0.05)
    assert caught.value.field == field


@pytest.mark.parametrize(("stages", "field"), [
    ([Stage(66, 0, 2), Stage(60, 2, 3)], "stages[1].cumulative_sample_size"),
    ([Stage(66, 0, 2), Stage(135, 2, 4)], "stages[1].fail_if_at_least"),
    ([Stage(66, 2, 2), Stage(135, 2, 3)], "stages[0].fail_if_at_least"),
    ([Stage(10, 0, 2)] * 4, "stages"),
])
def test_inconsistent_stages_are_refused(stages: list[Stage], field: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        evaluate_staged(stages, 1, 0, 0.05)
    assert caught.value.field == field


def test_every_enumerated_plan_outcome_sums_to_one() -> None:
    total = sum(enumerate_outcomes(PLAN, "binomial", 0.03).values())
    assert total == pytest.approx(1.0, abs=1e-12)


def test_three_stages_beyond_their_cap_fall_back_to_two_with_a_warning() -> None:
    plan = plan_staged(0.05, 0.02, 0.95, max_stages=3)  # fixed-size plan allows 4
    assert plan.fixed_allowed_deviations > 3
    assert len(plan.stages) <= 2
    assert any("three-stage plans are searched only" in w for w in plan.warnings)


def test_stage_counts_above_the_cap_are_refused() -> None:
    with pytest.raises(InvalidInput) as caught:
        evaluate_staged([Stage(1000, 0, 60), Stage(2000, 70, 71)], 2, 65, 0.05)
    assert caught.value.field == "stages[0].fail_if_at_least"
