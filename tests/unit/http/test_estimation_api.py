"""POST /v1/estimation/sample-size through the Flask test client.

Sample sizes are checked against the closed forms of their published sources, evaluated
here independently of the service (the normal quantile from scipy.stats.norm, the normal
size also from statsmodels), and the exact and Wilson rows against direct computations
with scipy.stats.binom and statsmodels' Wilson interval.
"""

from __future__ import annotations

import json
import math
from fractions import Fraction
from typing import Any

import pytest
from scipy import stats
from statsmodels.stats.proportion import proportion_confint, samplesize_confint_proportion

PATH = "/v1/estimation/sample-size"

CAUTION = (
    "These figures support, and do not replace, professional judgement and the "
    "auditing standards and methodology that apply to the engagement."
)

FIELDS = {
    "margin",
    "confidence",
    "anticipated_rate",
    "population_size",
    "rows",
    "recommended",
    "summary",
}
ROW_FIELDS = {
    "method",
    "sample_size",
    "guarantee",
    "miss_probability",
    "ratio_to_exact",
    "finite_population_correction",
}


def _post(client: Any, body: dict[str, Any]) -> dict[str, Any]:
    response = client.post(PATH, json=body)
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.mimetype == "application/json"
    document = json.loads(response.get_data(as_text=True))
    assert isinstance(document, dict)
    return document


def _row(document: dict[str, Any], method: str) -> dict[str, Any]:
    (row,) = [row for row in document["rows"] if row["method"] == method]
    return row


def _size(client: Any, method: str, **body: Any) -> int:
    document = _post(client, {"methods": [method], **body})
    return int(_row(document, method)["sample_size"])


def _problem(response: Any) -> dict[str, Any]:
    assert response.status_code == 422, response.get_data(as_text=True)
    assert response.mimetype == "application/problem+json"
    body = response.get_json()
    assert body["status"] == 422
    assert isinstance(body["errors"], dict)
    return body


# --- published values ----------------------------------------------------------------


def test_chebyshev_worst_case(client: Any) -> None:
    # Chebyshev's inequality (standard result): P(|X/n − p| ≥ e) ≤ p(1 − p)/(n e²) ≤ α with
    # p(1 − p) ≤ 1/4 gives n = 1/(4 α e²) = 1/(4 × 0.05 × 0.05²) = 2000 exactly.
    assert Fraction(1) / (4 * Fraction(1, 20) * Fraction(1, 20) ** 2) == 2000
    assert _size(client, "chebyshev", margin=0.05, confidence=0.95) == 2000


def test_hoeffding(client: Any) -> None:
    # Hoeffding (1963), JASA 58, 13–30: P(|X/n − p| ≥ e) ≤ 2 exp(−2 n e²) ≤ α gives
    # n ≥ ln(2/α)/(2 e²) = ln(40)/0.005 = 737.78, so 738.
    assert math.ceil(math.log(40) / (2 * 0.05**2)) == 738
    assert _size(client, "hoeffding", margin=0.05, confidence=0.95) == 738


def test_normal_worst_case(client: Any) -> None:
    # Cochran, Sampling Techniques (3rd ed., 1977), §4.4: n0 = z² p(1 − p)/e², worst case
    # p = 1/2, z = 1.959964 (scipy.stats.norm.ppf(0.975)): 384.15, so 385.
    z = float(stats.norm.ppf(0.975))
    assert math.ceil(z * z / 4 / 0.05**2) == 385
    # statsmodels' normal-approximation sample size for a proportion agrees.
    assert math.ceil(samplesize_confint_proportion(0.5, 0.05, alpha=0.05)) == 385
    assert _size(client, "normal", margin=0.05, confidence=0.95) == 385


def test_normal_with_finite_population_correction(client: Any) -> None:
    # Cochran (1977), §4.4: n = n0 / (1 + (n0 − 1)/N) with n0 unrounded; N = 4200 gives
    # 384.15 / 1.0912 = 352.03, so 353.
    z = float(stats.norm.ppf(0.975))
    n0 = z * z / 4 / 0.05**2
    assert math.ceil(n0 / (1 + (n0 - 1) / 4200)) == 353
    document = _post(client, {"margin": 0.05, "methods": ["normal"],
                              "population": {"size": 4200}})
    row = _row(document, "normal")
    assert row["sample_size"] == 353
    assert row["finite_population_correction"] is True
    assert document["population_size"] == 4200


def test_normal_with_anticipated_rate(client: Any) -> None:
    # Cochran (1977), §4.4 with p = 0.1: z² × 0.09 / 0.05² = 138.3, so 139;
    # statsmodels.stats.proportion.samplesize_confint_proportion gives the same n0.
    n0 = samplesize_confint_proportion(0.1, 0.05, alpha=0.05)
    assert math.ceil(n0) == 139
    assert _size(client, "normal", margin=0.05, anticipated_rate=0.1) == 139


def test_exact_row_is_the_smallest_size_meeting_the_condition(client: Any) -> None:
    # Miss probability P(|X/n − p| > e) for X ~ Binomial(n, p), summed here from
    # scipy.stats.binom.pmf over the outcomes decided in exact integer arithmetic.
    rate, margin, alpha = Fraction(1, 10), Fraction(1, 20), 0.05

    def miss(n: int) -> float:
        outcomes = [x for x in range(n + 1) if abs(x - n * rate) > n * margin]
        return float(sum(stats.binom.pmf(outcomes, n, float(rate))))

    document = _post(client, {"margin": 0.05, "anticipated_rate": 0.1, "methods": ["exact"]})
    row = _row(document, "exact")
    n = row["sample_size"]
    assert row["guarantee"] == "exact"
    assert row["miss_probability"] == pytest.approx(miss(n), rel=1e-9)
    assert miss(n) <= alpha
    assert miss(n - 1) > alpha
    assert row["ratio_to_exact"] == 1.0


def test_wilson_row_is_the_smallest_interval_within_the_margin(client: Any) -> None:
    # Wilson (1927) score interval at the anticipated rate, from statsmodels'
    # proportion_confint(method="wilson"): its half-width is at most the margin at the
    # size returned, and above it one item fewer.
    def half_width(n: int) -> float:
        low, high = proportion_confint(0.2 * n, n, alpha=0.05, method="wilson")
        return float(high - low) / 2

    n = _size(client, "wilson", margin=0.05, anticipated_rate=0.2)
    assert half_width(n) <= 0.05 < half_width(n - 1)


# --- the response ------------------------------------------------------------------------


def test_all_methods_by_default_with_guarantees(client: Any) -> None:
    document = _post(client, {"margin": 0.05})
    assert set(document) == FIELDS
    assert document["margin"] == 0.05
    assert document["confidence"] == 0.95  # the documented default
    assert document["anticipated_rate"] is None
    assert document["population_size"] is None
    assert [row["method"] for row in document["rows"]] == [
        "exact", "wilson", "normal", "chebyshev", "hoeffding"
    ]
    guarantees = {row["method"]: row["guarantee"] for row in document["rows"]}
    assert guarantees == {
        "exact": "exact",
        "wilson": "approximate",
        "normal": "approximate",
        "chebyshev": "distribution_free_bound",
        "hoeffding": "distribution_free_bound",
    }
    exact = _row(document, "exact")["sample_size"]
    for row in document["rows"]:
        assert set(row) == ROW_FIELDS
        assert row["ratio_to_exact"] == row["sample_size"] / exact
        assert 0.0 <= row["miss_probability"] <= 1.0
    for method in ("exact", "chebyshev", "hoeffding"):
        assert _row(document, method)["miss_probability"] <= 0.05
    # The smallest size among the exact and distribution-free rows.
    assert document["recommended"] == "exact"


def test_rows_follow_the_order_asked_for(client: Any) -> None:
    document = _post(client, {"margin": 0.05, "methods": ["hoeffding", "normal", "chebyshev"]})
    assert [row["method"] for row in document["rows"]] == ["hoeffding", "normal", "chebyshev"]
    assert all(row["ratio_to_exact"] is None for row in document["rows"])
    assert document["recommended"] == "hoeffding"  # 738 against chebyshev's 2000


def test_only_approximate_methods_recommend_the_smallest(client: Any) -> None:
    document = _post(client, {"margin": 0.05, "methods": ["normal", "wilson"]})
    assert document["recommended"] == "wilson"  # 381 against 385
    assert "no guaranteed method was asked for" in document["summary"]


def test_population_label_is_repeated(client: Any) -> None:
    label = "Purchase orders PO-70001 to PO-74200, Q3"
    document = _post(client, {"margin": 0.05, "methods": ["normal", "hoeffding"],
                              "population": {"size": 4200, "label": label}})
    assert document["population_label"] == label
    assert label in document["summary"]
    assert "Normal uses the population size" in document["summary"]


def test_summary_says_which_rows_are_exact_approximate_or_bounds(client: Any) -> None:
    document = _post(client, {"margin": 0.05})
    summary = document["summary"]
    exact = document["rows"][0]["sample_size"]
    assert summary.endswith(CAUTION)
    assert "Exact (" in summary and f"exact {exact} items" in summary
    assert "Approximate (" in summary and "wilson 381 items" in summary
    assert "above the 5% allowed" in summary  # both approximate rows miss more than 5%
    assert "Distribution-free bounds (" in summary and "chebyshev 2,000 items" in summary
    assert f"Recommended: exact, {exact} items" in summary
    assert "worst case over all rates" in summary


def test_anticipated_rate_is_repeated(client: Any) -> None:
    document = _post(client, {"margin": 0.05, "anticipated_rate": 0.1, "methods": ["normal"]})
    assert document["anticipated_rate"] == 0.1
    assert "anticipated rate of 10%" in document["summary"]


# --- bad input ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("body", "field", "fragment"),
    [
        ({}, "margin", "Missing"),
        ({"margin": 0}, "margin", "at least 0.0001 and less than 0.5"),
        ({"margin": 0.00009}, "margin", "at least 0.0001"),
        ({"margin": 0.05, "confidence": 0.4}, "confidence", "from 0.5 to 0.999999"),
        ({"margin": 0.05, "confidence": 0.9999999}, "confidence", "from 0.5 to 0.999999"),
        ({"margin": 0.05, "methods": ["exact"] * 100_000}, "methods", "there are 5"),
        ({"margin": 0.5}, "margin", "less than 0.5"),
        ({"margin": -0.05}, "margin", "at least 0.0001"),
        ({"margin": 5}, "margin", "looks like a percentage"),
        ({"margin": "0.05"}, "margin", "not a string"),
        ({"margin": True}, "margin", "not a boolean"),
        ({"margin": 0.05, "confidence": 1}, "confidence", "strictly between 0 and 1"),
        ({"margin": 0.05, "confidence": 0}, "confidence", "strictly between 0 and 1"),
        ({"margin": 0.05, "confidence": 95}, "confidence", "looks like a percentage"),
        ({"margin": 0.05, "anticipated_rate": 0}, "anticipated_rate", "strictly between"),
        ({"margin": 0.05, "anticipated_rate": 1}, "anticipated_rate", "strictly between"),
        ({"margin": 0.05, "anticipated_rate": None}, "anticipated_rate", "null"),
        ({"margin": 0.05, "methods": ["exakt"]}, "methods[0]", "must be one of"),
        ({"margin": 0.05, "methods": ["exact", "binomial"]}, "methods[1]", "must be one of"),
        ({"margin": 0.05, "methods": []}, "methods", "at least one"),
        ({"margin": 0.05, "methods": "exact"}, "methods", "array of method names"),
        ({"margin": 0.05, "methods": ["normal", "normal"]}, "methods[1]", "repeats 'normal'"),
        ({"margin": 0.05, "methods": [1]}, "methods[0]", "not a number"),
        ({"margin": 0.05, "population": {"size": 0}}, "population.size", "from 1 to"),
        ({"margin": 0.05, "population": {"size": 10**12}}, "population.size",
         "largest supported population"),
        ({"margin": 0.05, "population": 4200}, "population", "JSON object"),
        ({"margin": 0.05, "method": "normal"}, "method", "not a field"),
        # Chebyshev would need 25,000,000 items, above the default limit of 10,000,000.
        ({"margin": 0.001, "confidence": 0.99, "methods": ["chebyshev"]}, "margin",
         "above the limit"),
    ],
)
def test_bad_input_is_422_naming_the_field(
    client: Any, body: dict[str, Any], field: str, fragment: str
) -> None:
    problem = _problem(client.post(PATH, json=body))
    assert field in problem["errors"], problem
    assert any(fragment in message for message in problem["errors"][field]), problem


def test_body_must_be_an_object(client: Any) -> None:
    problem = _problem(client.post(PATH, json=[0.05]))
    assert "body" in problem["errors"]


def test_each_repeated_method_is_named_by_its_index(client: Any) -> None:
    problem = _problem(client.post(PATH, json={
        "margin": 0.05, "methods": ["normal", "exact", "normal", "exact"]
    }))
    assert problem["errors"] == {
        "methods[2]": ["repeats 'normal', already given as methods[0]"],
        "methods[3]": ["repeats 'exact', already given as methods[1]"],
    }
