"""POST /v1/evaluation through the Flask test client: the happy paths, and agreement
between a plan from /v1/sample-size and the evaluation of its outcome.

Reference values come from scipy.stats and statsmodels (reference libraries), from exact
integer arithmetic (math.comb, fractions) and, where named, from the AICPA Audit Guide:
Audit Sampling, table A-3, recalled from memory.
"""

from __future__ import annotations

import json
import math
import re
from fractions import Fraction
from typing import Any

import pytest
from scipy import stats
from statsmodels.stats.proportion import proportion_confint

PATH = "/v1/evaluation"

CAUTION = (
    "These figures support, and do not replace, professional judgement and the "
    "auditing standards and methodology that apply to the engagement."
)

EVALUATION_FIELDS = {
    "method",
    "sample_size",
    "deviations",
    "confidence",
    "population_size",
    "sample_deviation_rate",
    "upper_deviation_limit",
    "allowance_for_sampling_risk",
    "confidence_interval",
    "whole_population",
    "next_steps",
    "summary",
    "warnings",
}
WITH_TOLERABLE = {"tolerable_rate", "risk_at_tolerable_rate", "conclusion"}


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


def _post(client: Any, path: str, body: dict[str, Any]) -> dict[str, Any]:
    response = client.post(path, json=body)
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.mimetype == "application/json"
    document = json.loads(response.get_data(as_text=True), parse_constant=_refuse_constant)
    assert isinstance(document, dict)
    return document


def _evaluate(client: Any, body: dict[str, Any]) -> dict[str, Any]:
    return _post(client, PATH, body)


def _hypergeometric_cdf(k: int, size: int, deviant: int, n: int) -> Fraction:
    total = math.comb(size, n)
    return sum(
        (Fraction(math.comb(deviant, j) * math.comb(size - deviant, n - j), total)
         for j in range(k + 1)),
        Fraction(0),
    )


# --- binomial ----------------------------------------------------------------


def test_two_deviations_in_one_hundred(client: Any) -> None:
    result = _evaluate(client, {"sample_size": 100, "deviations": 2})

    assert result["method"] == "binomial"
    assert result["sample_deviation_rate"] == 0.02
    upper = result["upper_deviation_limit"]
    # Clopper–Pearson one-sided 95% upper bound: the 0.95 quantile of Beta(d + 1, n − d),
    # scipy.stats as reference library.
    assert upper == pytest.approx(float(stats.beta.ppf(0.95, 3, 98)), rel=1e-12)
    # The same bound is the upper end of the two-sided 90% exact interval (statsmodels).
    assert upper == pytest.approx(
        proportion_confint(2, 100, alpha=0.10, method="beta")[1], rel=1e-9
    )
    # AICPA Audit Guide: Audit Sampling, table A-3: sample 100, 2 deviations → 6.2%.
    assert round(upper, 3) == 0.062
    assert result["allowance_for_sampling_risk"] == pytest.approx(upper - 0.02, rel=1e-12)
    # Two-sided interval at the same 95%: statsmodels' exact (beta) interval.
    low, high = proportion_confint(2, 100, alpha=0.05, method="beta")
    assert result["confidence_interval"]["low"] == pytest.approx(low, rel=1e-9)
    assert result["confidence_interval"]["high"] == pytest.approx(high, rel=1e-9)


def test_no_deviation_bound(client: Any) -> None:
    result = _evaluate(client, {"sample_size": 59, "deviations": 0})
    # With no deviation the bound solves (1 − p)^59 = 0.05 in closed form.
    assert result["upper_deviation_limit"] == pytest.approx(1 - 0.05 ** (1 / 59), rel=1e-12)
    assert result["confidence_interval"]["low"] == 0.0
    assert result["sample_deviation_rate"] == 0.0


def test_poisson_bound(client: Any) -> None:
    result = _evaluate(client, {"sample_size": 100, "deviations": 2, "method": "poisson"})
    assert result["method"] == "poisson"
    # Garwood: λ_U = chi2.ppf(0.95, 2(d + 1)) / 2, rate = λ_U / n (scipy.stats reference).
    assert result["upper_deviation_limit"] == pytest.approx(
        float(stats.chi2.ppf(0.95, 6)) / 2 / 100, rel=1e-9
    )


@pytest.mark.parametrize(
    ("tolerable_rate", "conclusion"),
    [(0.07, "supports_reliance"), (0.06, "does_not_support_reliance")],
)
def test_conclusion_with_tolerable_rate(
    client: Any, tolerable_rate: float, conclusion: str
) -> None:
    result = _evaluate(
        client, {"sample_size": 100, "deviations": 2, "tolerable_rate": tolerable_rate}
    )
    assert set(result) == EVALUATION_FIELDS | WITH_TOLERABLE
    assert result["conclusion"] == conclusion
    assert result["tolerable_rate"] == tolerable_rate
    # P(X ≤ 2) for X ~ Binomial(100, tolerable), exactly.
    t = Fraction(repr(tolerable_rate))
    exact = sum(math.comb(100, j) * t**j * (1 - t) ** (100 - j) for j in range(3))
    assert result["risk_at_tolerable_rate"] == pytest.approx(float(exact), rel=1e-12)
    # The bound of ≈ 6.16% lies between the two tolerable rates.
    assert (result["upper_deviation_limit"] < tolerable_rate) == (conclusion == "supports_reliance")


# --- hypergeometric ----------------------------------------------------------


def test_hypergeometric_bound_for_a_finite_population(client: Any) -> None:
    result = _evaluate(client, {"sample_size": 100, "deviations": 2, "population": {"size": 1000}})

    assert result["method"] == "hypergeometric"
    assert result["population_size"] == 1000
    count = result["upper_deviation_count"]
    # Exact upper bound on the deviant items (integer arithmetic): the largest M with
    # P(X ≤ 2 | M) > 0.05, so that M + 1 is rejected at 95%.
    alpha = Fraction(5, 100)
    assert _hypergeometric_cdf(2, 1000, count, 100) > alpha
    assert _hypergeometric_cdf(2, 1000, count + 1, 100) <= alpha
    assert result["upper_deviation_limit"] == count / 1000
    # Sampling without replacement from 1,000 items gives a tighter bound than the binomial.
    assert result["upper_deviation_limit"] < float(stats.beta.ppf(0.95, 3, 98))


# --- fields ------------------------------------------------------------------


def test_fields_without_tolerable_rate(client: Any) -> None:
    result = _evaluate(client, {"sample_size": 60, "deviations": 1})
    assert set(result) == EVALUATION_FIELDS
    for absent in ("conclusion", "tolerable_rate", "risk_at_tolerable_rate", "population_label",
                   "upper_deviation_count"):
        assert absent not in result
    assert result["confidence"] == 0.95  # the documented default
    assert result["population_size"] is None
    assert set(result["confidence_interval"]) == {"low", "high"}


def test_population_label_is_echoed(client: Any) -> None:
    label = "Vendor payments PV-3100 to PV-4299, Northwind Trading, 2026"
    result = _evaluate(
        client,
        {"sample_size": 60, "deviations": 1, "population": {"size": 1200, "label": label}},
    )
    assert result["population_label"] == label
    assert label in result["summary"]
    assert "upper_deviation_count" in result
    assert "conclusion" not in result


EVALUATIONS = [
    {"sample_size": 100, "deviations": 2},
    {"sample_size": 100, "deviations": 2, "tolerable_rate": 0.07},
    {"sample_size": 100, "deviations": 2, "tolerable_rate": 0.05},
    {"sample_size": 59, "deviations": 0, "tolerable_rate": 0.05, "confidence": 0.9},
    {"sample_size": 1, "deviations": 1},
    {"sample_size": 40, "deviations": 40, "method": "poisson"},
    {"sample_size": 50, "deviations": 0, "population": {"size": 50}},
    {"sample_size": 80, "deviations": 3, "population": {"size": 400, "label": "PO-88"},
     "tolerable_rate": 0.1},
]


@pytest.mark.parametrize("body", EVALUATIONS)
def test_summary_cautions_and_never_concludes_on_the_control(
    client: Any, body: dict[str, Any]
) -> None:
    summary = _evaluate(client, body)["summary"]
    assert CAUTION in summary
    assert not re.search(r"\bis\s+effective\b", summary, re.IGNORECASE)


@pytest.mark.parametrize("body", EVALUATIONS)
def test_numbers_are_finite_and_ordered(client: Any, body: dict[str, Any]) -> None:
    result = _evaluate(client, body)
    assert all(math.isfinite(x) for x in _numbers(result))
    rate, upper = result["sample_deviation_rate"], result["upper_deviation_limit"]
    low, high = result["confidence_interval"]["low"], result["confidence_interval"]["high"]
    assert 0.0 <= low <= rate <= upper <= high <= 1.0
    assert result["allowance_for_sampling_risk"] >= 0.0


# --- sizing and evaluation agree ---------------------------------------------

PLANS = [
    {"tolerable_rate": 0.05},
    {"tolerable_rate": 0.05, "expected_rate": 0.01},
    {"tolerable_rate": 0.10, "expected_rate": 0.02, "confidence": 0.90},
    {"tolerable_rate": 0.06, "expected_rate": 0.01, "method": "poisson"},
    {"tolerable_rate": 0.05, "population": {"size": 100}},
    {"tolerable_rate": 0.05, "expected_rate": 0.01, "population": {"size": 2000}},
    {"tolerable_rate": 0.04, "expected_rate": 0.005, "population": {"size": 5000}},
]


@pytest.mark.parametrize("plan_request", PLANS)
def test_plan_and_evaluation_agree(client: Any, plan_request: dict[str, Any]) -> None:
    plan = _post(client, "/v1/sample-size", plan_request)
    common = {
        "sample_size": plan["sample_size"],
        "tolerable_rate": plan["tolerable_rate"],
        "confidence": plan["confidence"],
        "method": plan["method"],
    }
    if "population" in plan_request:
        common["population"] = plan_request["population"]

    allowed = _evaluate(client, {**common, "deviations": plan["allowed_deviations"]})
    one_more = _evaluate(client, {**common, "deviations": plan["allowed_deviations"] + 1})

    assert allowed["conclusion"] == "supports_reliance"
    assert one_more["conclusion"] == "does_not_support_reliance"
    # The evaluation's risk at the tolerable rate is the plan's risk of overreliance.
    assert allowed["risk_at_tolerable_rate"] == pytest.approx(
        plan["risk_of_overreliance"], rel=1e-12
    )
    # And the bound tells the same story as the conclusion.
    assert allowed["upper_deviation_limit"] <= plan["tolerable_rate"]
    assert one_more["upper_deviation_limit"] >= plan["tolerable_rate"]
