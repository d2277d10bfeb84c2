"""Evaluation of misstatements: hand-worked Stringer example, definitions, bad input."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats

from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.monetary import bounds
from service.sampling.monetary.evaluation import Misstatement, evaluate_monetary_sample

# Interval 10,000.00 (in cents 1,000,000): book value 600,000.00 and 60 items.
BV, N = 60_000_000, 60


def limit_of(direction, method: str) -> float:  # type: ignore[no-untyped-def]
    return next(float(m.upper_misstatement_limit) for m in direction.methods if m.method == method)


def test_stringer_by_hand() -> None:
    # Worked by hand (AICPA Audit Guide *Audit Sampling*, MUS chapter, method): interval
    # 10,000, taints 0.5 and 0.2, 95% -> 10,000 x (2.996 + 1.748 x 0.5 + 1.552 x 0.2)
    # = about 41,800; projected misstatement 10,000 x 0.7 = 7,000.
    result = evaluate_monetary_sample(
        BV,
        [Misstatement("KV-2001", 400_000, 200_000), Misstatement("KV-2002", 500_000, 400_000)],
        sample_size=N,
    )
    over = result.overstatement
    assert over.projected_misstatement == 700_000
    assert limit_of(over, "stringer") / 100 == pytest.approx(41_800, abs=10)
    stringer = next(m for m in over.methods if m.method == "stringer")
    assert float(stringer.basic_precision) / 100 == pytest.approx(29_957.32, abs=0.01)
    assert float(stringer.incremental_allowance) == pytest.approx(
        float(stringer.upper_misstatement_limit - stringer.basic_precision - 700_000)
    )


@pytest.mark.parametrize("k", range(5))
def test_full_taints_give_the_poisson_and_binomial_limits(k: int) -> None:
    # With every taint 100%, Stringer and cell reduce to RF(k) (scipy.stats.chi2 / beta).
    taints = [1.0] * k
    assert bounds.stringer(taints, 0.95) == pytest.approx(stats.chi2.ppf(0.95, 2 * k + 2) / 2)
    assert bounds.cell(taints, 0.95) == pytest.approx(stats.chi2.ppf(0.95, 2 * k + 2) / 2)
    assert bounds.stringer(taints, 0.95, 100) == pytest.approx(
        100 * stats.beta.ppf(0.95, k + 1, 100 - k)
    )


def test_cell_by_hand_is_tighter_than_stringer() -> None:
    # Cell evaluation (Leslie, Teitlebaum & Anderson 1979) by hand with RF = 2.9957, 4.7439,
    # 6.2958: U1 = max(2.9957 + 0.5, 4.7439 x 0.5) = 3.4957; U2 = max(3.4957 + 0.2,
    # 6.2958 x 0.35) = 3.6957.
    assert bounds.cell([0.2, 0.5], 0.95) == pytest.approx(3.6957, abs=1e-4)
    assert bounds.cell([0.2, 0.5], 0.95) < bounds.stringer([0.2, 0.5], 0.95)


def average_wealth(taints: list[float], n: int, m: float) -> float:
    """The diversified betting wealth written out with plain math (Waudby-Smith & Ramdas)."""
    values = taints + [0.0] * (n - len(taints))
    return sum(math.prod(1 - bet * (x - m) for x in values) for bet in bounds.BETS) / len(
        bounds.BETS
    )


@pytest.mark.parametrize("taints", [[], [0.5, 0.2], [1.0, 1.0, 0.3]])
def test_betting_limit_is_where_the_wealth_reaches_one_over_alpha(taints: list[float]) -> None:
    limit = bounds.betting(taints, 80, 0.95) / 80
    assert average_wealth(taints, 80, limit * (1 + 1e-9)) >= 20 * (1 - 1e-6)
    assert average_wealth(taints, 80, limit * (1 - 1e-6)) < 20


def test_betting_covers_the_mean_in_repeated_samples() -> None:
    # Monte Carlo check with numpy's generator: taints 0 with probability 0.97, else
    # uniform on [0, 1]; the 95% limit must cover the true mean 0.015 in >= 95% of samples.
    rng = np.random.default_rng(20260101)
    covered = 0
    trials = 400
    for _ in range(trials):
        draws = np.where(rng.random(100) < 0.03, rng.random(100), 0.0)
        covered += bounds.betting([float(x) for x in draws[draws > 0]], 100, 0.95) / 100 >= 0.015
    assert covered / trials >= 0.95


def test_over_and_understatements_are_separate_and_netted() -> None:
    result = evaluate_monetary_sample(
        BV,
        [
            Misstatement("A", 400_000, 200_000),  # overstatement, taint 0.5
            Misstatement("B", 100_000, 130_000),  # understatement, taint 0.3
            Misstatement("C", 9_000_000, 8_500_000, individually_significant=True),
        ],
        sample_size=N,
    )
    assert result.overstatement.projected_misstatement == 500_000 + 500_000
    assert result.understatement.projected_misstatement == 300_000
    assert result.net_most_likely_misstatement == 700_000
    assert result.overstatement.known_misstatement == 500_000
    assert limit_of(result.overstatement, "stringer") == pytest.approx(
        1_000_000 * bounds.stringer([0.5], 0.95) + 500_000
    )


def test_a_taint_above_one_is_handled_explicitly() -> None:
    result = evaluate_monetary_sample(BV, [Misstatement("A", 100_000, -50_000)], sample_size=N)
    over = result.overstatement
    assert over.taints == (Fraction(3, 2),)
    betting = next(m for m in over.methods if m.method == "betting")
    assert betting.upper_misstatement_limit is None
    assert over.recommended == "stringer"
    assert any("above 100%" in w for w in result.warnings)


@pytest.mark.parametrize(
    ("selection_method", "eligible"),
    [
        ("cell", {"stringer", "stringer_binomial", "cell"}),
        ("random_units", {"stringer", "stringer_binomial", "betting"}),
    ],
)
def test_recommended_is_the_tightest_whose_guarantee_holds(
    selection_method: str, eligible: set[str]
) -> None:
    result = evaluate_monetary_sample(
        BV, [Misstatement("A", 400_000, 200_000)], sample_size=N, selection_method=selection_method
    )
    over = result.overstatement
    limits = {m.method: m.upper_misstatement_limit for m in over.methods}
    assert {m.method for m in over.methods if m.guarantee_holds} == eligible
    assert over.recommended_limit == min(limits[name] for name in eligible)  # type: ignore[type-var]


def test_conclusion_compares_the_recommended_limit_with_tolerable() -> None:
    result = evaluate_monetary_sample(BV, [], sample_size=N, tolerable_misstatement=3_500_000)
    assert result.conclusion == "within tolerable misstatement"
    result = evaluate_monetary_sample(BV, [], sample_size=N, tolerable_misstatement=2_000_000)
    assert result.conclusion == "exceeds tolerable misstatement"


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"book_value": -1, "sample_size": 5}, "book_value"),
        (
            {"book_value": BV, "sample_size": 60, "sampling_interval": Fraction(900_000)},
            "sampling_interval",
        ),
        ({"book_value": BV}, "sample_size"),
        (
            {
                "book_value": BV,
                "sample_size": 1,
                "misstatements": [Misstatement("A", 10, 5), Misstatement("B", 10, 5)],
            },
            "misstatements",
        ),
        (
            {"book_value": BV, "sample_size": 60, "misstatements": [Misstatement("A", 0, -5)]},
            "misstatements[0].book_amount",
        ),
        (
            {"book_value": BV, "sample_size": 60, "tolerable_misstatement": BV},
            "tolerable_misstatement",
        ),
    ],
)
def test_bad_input_names_the_field(kwargs: dict[str, object], field: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        evaluate_monetary_sample(**kwargs)  # type: ignore[arg-type]
    assert caught.value.field == field


def test_interval_alone_gives_the_sample_size() -> None:
    result = evaluate_monetary_sample(BV, [], sampling_interval=Fraction(1_000_000))
    assert result.sample_size == 60


def test_a_sample_above_the_limit_is_refused() -> None:
    with pytest.raises(ComputationTooLarge) as caught:
        evaluate_monetary_sample(2**60, [Misstatement("A", 10, 5, hits=2**40)],
                                 sample_size=2**50)
    assert caught.value.field == "sample_size"


def test_binomial_stringer_factors_match_scipy_one_by_one() -> None:
    # scipy.stats.beta, one factor at a time: n x beta.ppf(c, k + 1, n - k).
    taints = [0.9, 0.4, 0.3, 0.05]
    factors = [40 * stats.beta.ppf(0.9, k + 1, 40 - k) for k in range(5)]
    expected = factors[0] + sum((factors[i + 1] - factors[i]) * t for i, t in enumerate(taints))
    assert bounds.stringer(taints, 0.9, 40) == pytest.approx(expected)
