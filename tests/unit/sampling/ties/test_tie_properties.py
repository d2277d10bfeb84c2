"""Sizing and evaluation against the rational definition, on inputs built to tie.

Confidences are drawn so that ``1 − c`` is an exact tail: ``(1 − t)^k`` for the
binomial, a hypergeometric ``P(X = 0)`` with ``N t`` whole for a population. Only
short decimals are kept (what a person would type); the expected answers come from
``reference.py`` (fractions).
"""

from __future__ import annotations

from fractions import Fraction

from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from service.sampling.attributes import evaluate_sample, size_sample
from tests.unit.sampling.ties import reference as ref
from tests.unit.sampling.ties.reference import short_decimal, usable_risk

FEW = settings(max_examples=60, derandomize=True, deadline=None, database=None,
               suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])


@FEW
@given(
    q=st.sampled_from(["0.5", "0.6", "0.7", "0.75", "0.8", "0.9", "0.95"]),
    power=st.integers(1, 12),
    expected=st.sampled_from(["0", "0.01", "0.02", "0.025", "0.04"]),
)
def test_binomial_plans_meet_the_rational_definition(q, power, expected):
    tolerable = 1 - Fraction(q)
    confidence = usable_risk(Fraction(q) ** power)
    assume(confidence is not None and Fraction(expected) < tolerable)
    want = ref.sample_size(tolerable, Fraction(expected), Fraction(repr(confidence)), None)
    plan = size_sample(float(tolerable), float(expected), confidence,
                       method="binomial")
    assert (plan.sample_size, plan.allowed_deviations) == want


@FEW
@given(
    population=st.sampled_from([2, 4, 5, 8, 10, 16, 20, 25, 40, 50]),
    marked_share=st.floats(0.01, 0.99),
    drawn_share=st.floats(0.0, 1.0),
)
def test_population_plans_and_evaluations_meet_the_rational_definition(
    population, marked_share, drawn_share
):
    marked = min(population - 1, max(1, round(marked_share * population)))
    drawn = min(population - marked, max(1, round(drawn_share * population)))
    tolerable_fraction = Fraction(marked, population)
    tolerable = short_decimal(tolerable_fraction)
    risk = ref.hypergeometric_lower(0, population, marked, drawn)
    confidence = usable_risk(risk)
    assume(tolerable is not None and tolerable >= 0.0001 and confidence is not None)
    want = ref.sample_size(tolerable_fraction, Fraction(0), 1 - risk, population)
    assert want[0] <= drawn  # ``drawn`` itself meets the condition with equality
    plan = size_sample(tolerable, 0.0, confidence, population_size=population)
    assert (plan.sample_size, plan.allowed_deviations) == want
    result = evaluate_sample(drawn, 0, confidence, tolerable_rate=tolerable,
                             population_size=population)
    assert result.supports_reliance is True
    assert result.risk_at_tolerable_rate == float(risk)
