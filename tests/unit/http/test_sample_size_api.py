"""POST /v1/sample-size through the Flask test client: the happy paths.

Expected sample sizes come from the AICPA Audit Guide: Audit Sampling, tables A-1
(5% risk of overreliance) and A-2 (10%), recalled from memory, and are each checked
again here with exact rational arithmetic (math.comb and fractions), independently of
the service's floating-point search.
"""

from __future__ import annotations

import json
import math
import re
from fractions import Fraction
from typing import Any

import pytest

PATH = "/v1/sample-size"

CAUTION = (
    "These figures support, and do not replace, professional judgement and the "
    "auditing standards and methodology that apply to the engagement."
)

PLAN_FIELDS = {
    "curve_request",
    "links",
    "sample_size",
    "allowed_deviations",
    "method",
    "tolerable_rate",
    "expected_rate",
    "confidence",
    "achieved_confidence",
    "risk_of_overreliance",
    "risk_of_underreliance",
    "population_size",
    "whole_population",
    "summary",
    "warnings",
}


def _refuse_constant(name: str) -> Any:
    raise AssertionError(f"the response contains the non-JSON literal {name}")


def _numbers(value: Any) -> list[float]:
    if isinstance(value, bool):
        return []
    if isinstance(value, int | float):
        return [value]
    if isinstance(value, dict):
        return [x for item in value.values() for x in _numbers(item)]
    if isinstance(value, list):
        return [x for item in value for x in _numbers(item)]
    return []


def _post(client: Any, body: dict[str, Any]) -> dict[str, Any]:
    response = client.post(PATH, json=body)
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.mimetype == "application/json"
    document = json.loads(response.get_data(as_text=True), parse_constant=_refuse_constant)
    assert isinstance(document, dict)
    return document


# --- exact references --------------------------------------------------------


def _binomial_cdf(k: int, n: int, rate: Fraction) -> Fraction:
    """P(X ≤ k) for X ~ Binomial(n, rate), exactly."""
    return sum(
        (math.comb(n, j) * rate**j * (1 - rate) ** (n - j) for j in range(k + 1)), Fraction(0)
    )


def _hypergeometric_cdf(k: int, size: int, deviant: int, n: int) -> Fraction:
    """P(X ≤ k) drawing n of size items without replacement, deviant of them deviations."""
    total = math.comb(size, n)
    return sum(
        (Fraction(math.comb(deviant, j) * math.comb(size - deviant, n - j), total)
         for j in range(k + 1)),
        Fraction(0),
    )


def _alpha(confidence: str) -> Fraction:
    return 1 - Fraction(confidence)


# --- sizes -------------------------------------------------------------------


@pytest.mark.parametrize(
    ("confidence", "expected_size"),
    [
        # AICPA Audit Guide: Audit Sampling, table A-1, 5% tolerable, 0% expected: 59 (0).
        ("0.95", 59),
        # Same guide, table A-2 (10% risk of overreliance), 5% tolerable, 0% expected: 45 (0).
        ("0.90", 45),
    ],
)
def test_zero_deviation_plan(client: Any, confidence: str, expected_size: int) -> None:
    plan = _post(client, {"tolerable_rate": 0.05, "confidence": float(confidence)})

    assert plan["sample_size"] == expected_size
    assert plan["allowed_deviations"] == 0
    assert plan["method"] == "binomial"
    assert plan["expected_rate"] == 0.0
    assert plan["population_size"] is None
    # Exact check of minimality: (0.95)^n ≤ 1 − confidence holds at n and fails at n − 1.
    alpha, t = _alpha(confidence), Fraction(5, 100)
    assert _binomial_cdf(0, expected_size, t) <= alpha < _binomial_cdf(0, expected_size - 1, t)
    # The reported risk is that exact tail, to double precision.
    assert plan["risk_of_overreliance"] == pytest.approx(
        float(_binomial_cdf(0, expected_size, t)), rel=1e-12
    )
    assert plan["achieved_confidence"] == pytest.approx(1 - plan["risk_of_overreliance"], abs=1e-15)
    assert plan["risk_of_underreliance"] == 0.0


def test_plan_allowing_one_deviation(client: Any) -> None:
    # AICPA Audit Guide: Audit Sampling, table A-1, 5% tolerable, 1% expected: 93 (1).
    plan = _post(client, {"tolerable_rate": 0.05, "expected_rate": 0.01, "confidence": 0.95})

    assert (plan["sample_size"], plan["allowed_deviations"]) == (93, 1)
    t, e, alpha = Fraction(5, 100), Fraction(1, 100), _alpha("0.95")
    # Exact: 93 items allowing ceil(0.01 × 93) = 1 deviation meet the condition, and no
    # smaller n does with its own ceil(0.01 × n) allowance.
    assert _binomial_cdf(1, 93, t) <= alpha
    assert all(_binomial_cdf(math.ceil(e * n), n, t) > alpha for n in range(1, 93))
    assert plan["risk_of_overreliance"] == pytest.approx(float(_binomial_cdf(1, 93, t)), rel=1e-12)
    # Risk of underreliance: P(X > 1) at the expected rate, exactly.
    assert plan["risk_of_underreliance"] == pytest.approx(
        float(1 - _binomial_cdf(1, 93, e)), rel=1e-12
    )


@pytest.mark.parametrize(
    ("population", "expected_size"),
    [
        # Checked by exact hypergeometric arithmetic below: ceil(0.05 × 100) = 5 deviant items.
        (100, 45),
        # Checked the same way: ceil(0.05 × 600) = 30 deviant items.
        (600, 56),
    ],
)
def test_hypergeometric_plan_for_a_small_population(
    client: Any, population: int, expected_size: int
) -> None:
    plan = _post(client, {"tolerable_rate": 0.05, "population": {"size": population}})

    assert plan["method"] == "hypergeometric"
    assert plan["population_size"] == population
    assert (plan["sample_size"], plan["allowed_deviations"]) == (expected_size, 0)
    deviant = math.ceil(Fraction(5, 100) * population)
    alpha = _alpha("0.95")
    assert _hypergeometric_cdf(0, population, deviant, expected_size) <= alpha
    assert _hypergeometric_cdf(0, population, deviant, expected_size - 1) > alpha
    # Fewer items than the 59 a large population needs (table A-1).
    assert plan["sample_size"] < 59


def test_method_can_be_chosen(client: Any) -> None:
    # Poisson: smallest n with exp(−0.05 n) ≤ 0.05, i.e. n ≥ ln(20) / 0.05 = 59.9.
    plan = _post(client, {"tolerable_rate": 0.05, "method": "poisson"})
    assert plan["method"] == "poisson"
    assert plan["sample_size"] == math.ceil(math.log(20) / 0.05) == 60


# --- response fields ---------------------------------------------------------


def test_fields_of_a_plan_without_population(client: Any) -> None:
    plan = _post(client, {"tolerable_rate": 0.05, "expected_rate": 0.01})
    assert set(plan) == PLAN_FIELDS
    assert "population_label" not in plan
    assert plan["tolerable_rate"] == 0.05
    assert plan["expected_rate"] == 0.01
    assert plan["confidence"] == 0.95  # the documented default
    assert isinstance(plan["warnings"], list)


def test_population_label_is_echoed(client: Any) -> None:
    label = "Purchase orders PO-70001 to PO-74200, Northwind Trading, Q3"
    plan = _post(client, {"tolerable_rate": 0.05, "population": {"size": 4200, "label": label}})
    assert set(plan) == PLAN_FIELDS | {"population_label", "tolerable_deviant_items"}
    assert plan["tolerable_deviant_items"] == 210  # ceil(0.05 × 4,200)
    assert plan["population_label"] == label
    assert plan["population_size"] == 4200
    assert label in plan["summary"]


def test_population_without_label_has_no_label_field(client: Any) -> None:
    plan = _post(client, {"tolerable_rate": 0.05, "population": {"size": 4200}})
    assert "population_label" not in plan


PLANS = [
    {"tolerable_rate": 0.05},
    {"tolerable_rate": 0.05, "confidence": 0.90},
    {"tolerable_rate": 0.05, "expected_rate": 0.01},
    {"tolerable_rate": 0.10, "expected_rate": 0.03, "confidence": 0.90},
    {"tolerable_rate": 0.05, "population": {"size": 100}},
    {"tolerable_rate": 0.05, "expected_rate": 0.02, "population": {"size": 900, "label": "Q4"}},
    {"tolerable_rate": 0.06, "expected_rate": 0.01, "method": "poisson"},
    {"tolerable_rate": 0.02, "expected_rate": 0.015},
]


@pytest.mark.parametrize("body", PLANS)
def test_summary_cautions_and_never_concludes_on_the_control(
    client: Any, body: dict[str, Any]
) -> None:
    plan = _post(client, body)
    summary = plan["summary"]
    assert CAUTION in summary
    assert not re.search(r"\bis\s+effective\b", summary, re.IGNORECASE)
    assert f"{plan['sample_size']:,}" in summary


@pytest.mark.parametrize("body", PLANS)
def test_numbers_are_finite_and_probabilities_in_range(client: Any, body: dict[str, Any]) -> None:
    plan = _post(client, body)
    assert all(math.isfinite(x) for x in _numbers(plan))
    for name in ("achieved_confidence", "risk_of_overreliance", "risk_of_underreliance"):
        assert 0.0 <= plan[name] <= 1.0, name
    # The plan meets the confidence asked for.
    assert plan["risk_of_overreliance"] <= 1 - plan["confidence"] + 1e-12
    assert plan["sample_size"] >= 1
    assert 0 <= plan["allowed_deviations"] < plan["sample_size"]
