"""Strata: the combined upper deviation limit covers the population's rate, checked by
exact enumeration of every outcome on tiny strata with scipy.stats.hypergeom."""

from __future__ import annotations

import itertools

import pytest
from scipy import stats

from service.sampling.errors import InvalidInput
from service.sampling.sequential.strata import (
    StratumInput,
    evaluate_strata,
    risk_split,
    upper_count,
)


def stratum_limits(strata: list[tuple[int, int]], confidence: float) -> list[list[int]]:
    """U_h(d) for every stratum and count, from the service (the split is fixed by design,
    see test_the_split_depends_on_the_design_only)."""
    table = []
    for h, (_, n) in enumerate(strata):
        row = []
        for d in range(n + 1):
            result = evaluate_strata(
                [StratumInput(f"s{g}", size, m, d if g == h else 0)
                 for g, (size, m) in enumerate(strata)], confidence)
            row.append(result.strata[h].upper_deviation_count)
        table.append(row)
    return table


def exact_coverage(strata: list[tuple[int, int]], limits: list[list[int]],
                   deviant: tuple[int, ...]) -> float:
    """P(Σ U_h(d_h) ≥ Σ M_h) by enumerating every (d_1, …, d_K) with hypergeom pmfs."""
    ranges = [range(0, n + 1) for _, n in strata]
    covered = 0.0
    for ds in itertools.product(*ranges):
        p = 1.0
        for (size, n), m, d in zip(strata, deviant, ds, strict=True):
            p *= stats.hypergeom.pmf(d, size, m, n)
        if p > 0.0 and sum(limits[h][d] for h, d in enumerate(ds)) >= sum(deviant):
            covered += p
    return covered


@pytest.mark.parametrize(("strata", "confidence"), [
    ([(6, 3), (8, 4)], 0.8),
    ([(5, 2), (4, 2), (7, 3)], 0.9),
])
def test_combined_limit_covers_every_true_state(strata: list[tuple[int, int]],
                                                confidence: float) -> None:
    limits = stratum_limits(strata, confidence)
    for deviant in itertools.product(*[range(0, size + 1) for size, _ in strata]):
        assert exact_coverage(strata, limits, deviant) >= confidence - 1e-12, deviant


def test_one_stratum_is_the_exact_hypergeometric_limit() -> None:
    # Exact hypergeometric upper bound (Wright 1991) checked against scipy.stats.hypergeom:
    # the largest M with P(X ≤ 1 | 400, M, 50) > 0.05.
    result = evaluate_strata([StratumInput("only", 400, 50, 1)], 0.95)
    m = result.upper_deviation_count
    assert stats.hypergeom.cdf(1, 400, m, 50) > 0.05 >= stats.hypergeom.cdf(1, 400, m + 1, 50)
    assert result.strata[0].evaluation.upper_deviation_count == m
    assert result.warnings == ()


def test_the_split_depends_on_the_design_only() -> None:
    design = [(1000, 59), (500, 45), (4000, 60)]
    shares = {
        tuple(s.risk_share for s in evaluate_strata(
            [StratumInput(f"s{h}", size, n, d) for h, ((size, n), d) in
             enumerate(zip(design, ds, strict=True))], 0.95).strata)
        for ds in [(0, 0, 0), (3, 0, 1), (0, 5, 2)]
    }
    assert len(shares) == 1
    (split,) = shares
    assert sum(split) == pytest.approx(0.05, abs=1e-15)


def test_each_stratum_has_its_own_evaluation_and_the_whole_is_judged() -> None:
    result = evaluate_strata([StratumInput("North", 1000, 59, 0),
                              StratumInput("South", 500, 45, 1)], 0.95, tolerable_rate=0.1)
    assert [s.evaluation.population_label for s in result.strata] == ["North", "South"]
    assert result.population_size == 1500
    assert result.tolerable_deviant_items == 150
    assert result.supports_reliance == (result.upper_deviation_count < 150)
    assert result.upper_deviation_limit == result.upper_deviation_count / 1500
    # Stratified estimate Σ N_h d_h / n_h / N, by hand: (500 / 45) / 1500.
    assert result.estimated_deviation_rate == pytest.approx(500 / 45 / 1500)


def test_upper_count_with_no_risk_is_every_untested_item() -> None:
    assert upper_count(2, 10, 50, 0.0) == 42
    assert risk_split([StratumInput("a", 10, 10, 0)], 0.05, 0)[0] == pytest.approx(0.05)


@pytest.mark.parametrize(("strata", "field"), [
    ([], "strata"),
    ([StratumInput("a", 10, 11, 0)], "strata[0].sample_size"),
    ([StratumInput("a", 10, 5, 6)], "strata[0].deviations"),
    ([StratumInput("a", 10, 5, 0), StratumInput("a", 20, 5, 0)], "strata[1].label"),
])
def test_bad_strata_name_the_field(strata: list[StratumInput], field: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        evaluate_strata(strata)
    assert caught.value.field == field
