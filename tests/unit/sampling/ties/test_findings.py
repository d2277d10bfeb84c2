"""Comparisons with the risk that land exactly on it, decided as the definitions say.

Each expected answer is derived in the test with ``fractions.Fraction`` (see
``reference.py``), never taken from the service's output.
"""

from __future__ import annotations

from fractions import Fraction

from service.sampling.attributes import evaluate_sample, size_sample
from tests.unit.sampling.ties import reference as ref


def test_population_of_ten_at_ten_percent_and_ninety_percent_needs_nine_items():
    # Derived with fractions: 1 deviant item in 10; 9 items miss it with probability
    # C(9, 9) / C(10, 9) = 1/10, exactly the risk 1 − 0.9.
    assert ref.hypergeometric_lower(0, 10, 1, 9) == Fraction(1, 10)
    assert ref.hypergeometric_lower(0, 10, 1, 8) > Fraction(1, 10)
    expected = ref.sample_size(Fraction("0.1"), Fraction(0), Fraction("0.9"), 10)
    assert expected == (9, 0)
    plan = size_sample(0.1, 0.0, 0.9, population_size=10)
    assert (plan.sample_size, plan.allowed_deviations) == expected
    assert plan.risk_of_overreliance == 0.1


def test_binomial_thirty_percent_at_risk_0_343_needs_three_items():
    # Derived with fractions: 0.7³ = 0.343 = 1 − 0.657 exactly.
    assert Fraction("0.7") ** 3 == 1 - Fraction("0.657")
    expected = ref.sample_size(Fraction("0.3"), Fraction(0), Fraction("0.657"), None)
    assert expected == (3, 0)
    plan = size_sample(0.3, 0.0, 0.657, method="binomial")
    assert plan.sample_size == 3
    assert plan.risk_of_overreliance == 0.343


def test_nine_of_ten_without_deviation_support_reliance_at_the_limit():
    # Derived with fractions: P(X ≤ 0) = 1/10 ≤ 1 − 0.9, so the condition holds (with equality).
    risk = ref.hypergeometric_lower(0, 10, ref.deviant(Fraction("0.1"), 10), 9)
    assert risk == 1 - Fraction("0.9")
    result = evaluate_sample(9, 0, 0.9, tolerable_rate=0.1, population_size=10)
    assert result.supports_reliance is True
    assert result.risk_at_tolerable_rate == float(risk)


def test_one_of_two_items_at_an_even_chance_reports_a_risk_of_exactly_one_half():
    # Derived with fractions: N = 2, M = ceil(0.5 × 2) = 1, one item drawn: P(X = 0) = 1/2.
    risk = ref.hypergeometric_lower(0, 2, ref.deviant(Fraction("0.5"), 2), 1)
    assert risk == Fraction(1, 2)
    result = evaluate_sample(1, 0, 0.5, tolerable_rate=0.5, population_size=2)
    assert result.risk_at_tolerable_rate == 0.5
    assert result.supports_reliance is True


def test_poisson_tails_never_tie_and_are_decided_on_the_right_side():
    # e^-1 = 0.367879441171442321595... (the exponential series; any table of e):
    # a risk just above it is met by one item at a rate of 1, just below it is not.
    from service.sampling.ties import at_most

    above = Fraction("0.36787944117144233")
    below = Fraction("0.36787944117144232")
    assert at_most("poisson", 0, 1, Fraction(1), None, above).holds is True
    assert at_most("poisson", 0, 1, Fraction(1), None, below).holds is False


def test_exact_tails_agree_with_the_textbook_sums():
    from service.sampling.ties import exact_tails

    for n in range(1, 25):
        for k in range(-1, n + 1):
            p = Fraction(3, 10)
            assert exact_tails.binomial_lower(k, n, p) == (ref.binomial_lower(k, n, p) if k >= 0
                                                          else 0)
    for population in (1, 2, 7, 12):
        for marked in range(population + 1):
            for n in range(population + 1):
                for k in range(-1, n + 1):
                    want = ref.hypergeometric_lower(k, population, marked, n) if k >= 0 else 0
                    assert exact_tails.hypergeometric_lower(k, population, marked, n) == want


def test_the_sample_falls_from_45_to_39_when_the_population_grows_from_100_to_101():
    # Derived with fractions: at 5% the population holds ceil(0.05 N) deviant items, 5 for
    # N = 100 and 6 for N = 101; the zero-deviation sizes at 95% follow from the
    # hypergeometric definition (the README's example).
    five, six = ref.deviant(Fraction("0.05"), 100), ref.deviant(Fraction("0.05"), 101)
    assert (five, six) == (5, 6)
    small = ref.sample_size(Fraction("0.05"), Fraction(0), Fraction("0.95"), 100)
    large = ref.sample_size(Fraction("0.05"), Fraction(0), Fraction("0.95"), 101)
    assert (small, large) == ((45, 0), (39, 0))
    assert size_sample(0.05, 0.0, 0.95, population_size=100).sample_size == small[0]
    assert size_sample(0.05, 0.0, 0.95, population_size=101).sample_size == large[0]
