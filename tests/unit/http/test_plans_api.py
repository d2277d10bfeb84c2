"""Several attributes and two-risk plans over HTTP (Flask test client).

Values are checked against scipy.stats.binom (reference implementation) and against the
single-attribute answers of the same service.
"""

from __future__ import annotations

import json
import math
from typing import Any

import pytest
from flask.testing import FlaskClient
from scipy import stats

SIZE = "/v1/sample-size"
EVALUATION = "/v1/evaluation"
CAUTION = "These figures support, and do not replace, professional judgement"


def post(
    client: FlaskClient, path: str, body: dict[str, Any], accept: str = "application/json"
) -> Any:
    return client.post(path, json=body, headers={"Accept": accept})


def problem_fields(response: Any) -> dict[str, list[str]]:
    assert response.status_code == 422, response.get_data(as_text=True)
    assert response.headers["Content-Type"] == "application/problem+json"
    return dict(json.loads(response.get_data(as_text=True))["errors"])


def test_several_attributes_one_sample(client: FlaskClient) -> None:
    body = {
        "confidence": 0.95,
        "attributes": [
            {"name": "approval present", "tolerable_rate": 0.05},
            {"name": "amount matches invoice", "tolerable_rate": 0.05, "expected_rate": 0.01},
        ],
    }
    response = post(client, SIZE, body)
    assert response.status_code == 200, response.get_data(as_text=True)
    answer = response.get_json()
    single = post(client, SIZE, {"tolerable_rate": 0.05, "expected_rate": 0.01}).get_json()
    assert answer["sample_size"] == single["sample_size"]
    assert answer["governing_attribute"] == "amount matches invoice"
    first, second = answer["attributes"]
    n = answer["sample_size"]
    assert first["allowed_deviations"] == 0
    assert first["risk_of_overreliance"] == pytest.approx(stats.binom.cdf(0, n, 0.05), rel=1e-9)
    assert second["allowed_deviations"] == math.ceil(round(0.01 * n, 9))
    assert second["risk_of_underreliance"] == pytest.approx(
        stats.binom.sf(second["allowed_deviations"], n, 0.01), rel=1e-9
    )
    assert CAUTION in answer["summary"]
    assert "tolerable_rate" not in answer


def test_several_attributes_evaluation(client: FlaskClient) -> None:
    body = {
        "sample_size": 93,
        "population": {"size": 2500, "label": "Purchase orders, Tallowmere Ltd, 2026"},
        "attributes": [
            {"name": "approval", "deviations": 1, "tolerable_rate": 0.05},
            {"name": "period", "deviations": 3, "tolerable_rate": 0.05},
        ],
    }
    response = post(client, EVALUATION, body)
    assert response.status_code == 200, response.get_data(as_text=True)
    answer = response.get_json()
    for item in answer["attributes"]:
        alone = post(
            client,
            EVALUATION,
            {
                "sample_size": 93,
                "deviations": item["deviations"],
                "tolerable_rate": 0.05,
                "population": {"size": 2500},
            },
        ).get_json()
        for name in (
            "upper_deviation_limit",
            "risk_at_tolerable_rate",
            "conclusion",
            "upper_deviation_count",
        ):
            assert item[name] == alone[name]
    assert answer["attributes_not_supporting"] == ["period"]
    assert answer["conclusion"] == "does_not_support_reliance"
    assert answer["next_steps"] and all(isinstance(step, str) for step in answer["next_steps"])
    body["attributes"] = body["attributes"][:1]
    assert post(client, EVALUATION, body).get_json()["next_steps"] == []
    assert CAUTION in answer["summary"]


@pytest.mark.parametrize(
    ("path", "body", "field"),
    [
        (SIZE, {"attributes": []}, "attributes"),
        (
            SIZE,
            {
                "attributes": [
                    {"name": "a", "tolerable_rate": 0.05},
                    {"name": "a", "tolerable_rate": 0.06},
                ]
            },
            "attributes[1].name",
        ),
        (
            SIZE,
            {"tolerable_rate": 0.05, "attributes": [{"name": "a", "tolerable_rate": 0.05}]},
            "tolerable_rate",
        ),
        (
            SIZE,
            {"attributes": [{"name": "a", "tolerable_rate": 0.05, "expected_rate": 0.05}]},
            "attributes[0].expected_rate",
        ),
        (
            SIZE,
            {"attributes": [{"name": "a", "tolerable_rate": 5}]},
            "attributes[0].tolerable_rate",
        ),
        (SIZE, {"attributes": [{"name": "a"}]}, "attributes[0].tolerable_rate"),
        (
            SIZE,
            {"attributes": [{"name": "a", "tolerable_rate": 0.05, "extra": 1}]},
            "attributes[0].extra",
        ),
        (SIZE, {"expected_rate": 0.01}, "tolerable_rate"),
        (SIZE, {"tolerable_rate": 0.05, "underreliance_risk": 0}, "underreliance_risk"),
        (EVALUATION, {"sample_size": 10, "attributes": []}, "attributes"),
        (
            EVALUATION,
            {
                "sample_size": 10,
                "attributes": [{"name": "a", "deviations": 11, "tolerable_rate": 0.05}],
            },
            "attributes[0].deviations",
        ),
        (
            EVALUATION,
            {
                "sample_size": 10,
                "deviations": 1,
                "attributes": [{"name": "a", "deviations": 1, "tolerable_rate": 0.05}],
            },
            "deviations",
        ),
        (
            EVALUATION,
            {
                "sample_size": 10,
                "attributes": [
                    {"name": "a", "deviations": 1, "tolerable_rate": 0.05},
                    {"name": "a", "deviations": 0, "tolerable_rate": 0.05},
                ],
            },
            "attributes[1].name",
        ),
        (EVALUATION, {"sample_size": 10}, "deviations"),
    ],
)
def test_bad_input_names_the_field(
    client: FlaskClient, path: str, body: dict[str, Any], field: str
) -> None:
    assert field in problem_fields(post(client, path, body))


def test_two_risk_plan(client: FlaskClient) -> None:
    body = {"tolerable_rate": 0.05, "expected_rate": 0.01, "underreliance_risk": 0.10}
    answer = post(client, SIZE, body).get_json()
    n, k = answer["sample_size"], answer["allowed_deviations"]
    assert stats.binom.cdf(k, n, 0.05) <= 0.05
    assert answer["risk_of_underreliance"] == pytest.approx(stats.binom.sf(k, n, 0.01), rel=1e-9)
    assert answer["risk_of_underreliance"] <= 0.10
    assert answer["underreliance_risk"] == 0.10
    assert answer["classical_sample_size"] == 93
    assert answer["curve_request"]["sample_size"] == n


def test_two_risk_plan_without_a_solution_is_a_problem(client: FlaskClient) -> None:
    # 40 items: 5% and 4% both mean 2 deviant items, so no sample tells them apart.
    body = {
        "tolerable_rate": 0.05,
        "expected_rate": 0.04,
        "underreliance_risk": 0.10,
        "population": {"size": 40},
    }
    errors = problem_fields(post(client, SIZE, body))
    assert "no sample of at most 40 items" in errors["underreliance_risk"][0]


def test_markdown_lists_each_attribute(client: FlaskClient) -> None:
    body = {
        "attributes": [
            {"name": "approval", "tolerable_rate": 0.05},
            {"name": "amount", "tolerable_rate": 0.07, "expected_rate": 0.01},
        ]
    }
    text = post(client, SIZE, body, "text/markdown").get_data(as_text=True)
    assert "| name |" in text and "| approval |" in text and "| amount |" in text
    assert CAUTION in text


def test_uniform_prior_plan_over_http(client: FlaskClient) -> None:
    # By hand: Beta(1, 1) and no deviation in n items gives P(p ≤ 5%) = 1 − 0.95^(n + 1),
    # first at least 0.95 at n = 58; the classical zero-deviation plan needs 59.
    answer = post(client, SIZE, {"tolerable_rate": 0.05, "prior": {"type": "uniform"}}).get_json()
    assert (answer["sample_size"], answer["classical_sample_size"], answer["items_saved"]) == (
        58,
        59,
        1,
    )
    assert answer["posterior_probability"] == pytest.approx(1 - 0.95**59, rel=1e-12)
    assert answer["posterior_upper_limit"] == pytest.approx(stats.beta.ppf(0.95, 1, 59), rel=1e-9)
    assert answer["prior"] == {"type": "uniform", "alpha": 1.0, "beta": 1.0}
    assert any("justified" in w for w in answer["warnings"])
    assert "must be justified and documented" in answer["summary"]
    assert CAUTION in answer["summary"]


def test_prior_in_evaluation_against_scipy_beta(client: FlaskClient) -> None:
    body = {
        "sample_size": 60,
        "deviations": 1,
        "tolerable_rate": 0.05,
        "prior": {"type": "previous_sample", "sample_size": 80, "deviations": 0, "weight": 0.5},
    }
    answer = post(client, EVALUATION, body).get_json()
    a, b = 1 + 0.5 * 0 + 1, 1 + 0.5 * 80 + 59
    assert answer["posterior_probability"] == pytest.approx(stats.beta.cdf(0.05, a, b), rel=1e-9)
    assert answer["posterior_upper_limit"] == pytest.approx(stats.beta.ppf(0.95, a, b), rel=1e-9)
    classical = post(client, EVALUATION, {k: v for k, v in body.items() if k != "prior"})
    assert answer["upper_deviation_limit"] == classical.get_json()["upper_deviation_limit"]
    text = post(client, EVALUATION, body, "text/markdown").get_data(as_text=True)
    assert "| posterior\\_probability |" in text and "%" in text.split("posterior\\_probability")[1]


@pytest.mark.parametrize(
    ("path", "body", "field"),
    [
        (
            SIZE,
            {
                "tolerable_rate": 0.05,
                "prior": {
                    "type": "previous_sample",
                    "sample_size": 60,
                    "deviations": 0,
                    "weight": 1.2,
                },
            },
            "prior.weight",
        ),
        (SIZE, {"tolerable_rate": 0.05, "prior": {"type": "flat"}}, "prior.type"),
        (
            SIZE,
            {"tolerable_rate": 0.05, "prior": {"type": "expected_rate", "strength": 10}},
            "prior.expected_rate",
        ),
        (SIZE, {"tolerable_rate": 0.05, "prior": {"type": "uniform", "weight": 1}}, "prior.weight"),
        (
            SIZE,
            {"tolerable_rate": 0.05, "underreliance_risk": 0.1, "prior": {"type": "uniform"}},
            "prior",
        ),
        (
            EVALUATION,
            {
                "sample_size": 60,
                "deviations": 0,
                "prior": {
                    "type": "previous_sample",
                    "sample_size": 60,
                    "deviations": 0,
                    "weight": -0.5,
                },
            },
            "prior.weight",
        ),
    ],
)
def test_bad_priors_name_the_field(
    client: FlaskClient, path: str, body: dict[str, Any], field: str
) -> None:
    assert field in problem_fields(post(client, path, body))


PERIODIC = "/v1/plans/periodic"


def test_periodic_plan_over_http(client: FlaskClient) -> None:
    answer = post(client, PERIODIC, {"frequency": "weekly", "tolerable_rate": 0.10}).get_json()
    assert answer["occurrences"] == 52
    assert answer["statistical_plan"]["population_size"] == 52
    for meaning in answer["sizes"]:
        n = meaning["sample_size"]
        # scipy.stats.hypergeom: chance of finding at least one of m deviant weeks
        for m in (1, 2, 3):
            assert meaning[f"confidence_against_{m}_deviant"] == pytest.approx(
                1 - stats.hypergeom.pmf(0, 52, m, n), abs=1e-12
            )
    assert CAUTION in answer["summary"]
    text = post(
        client, PERIODIC, {"frequency": "weekly", "tolerable_rate": 0.10}, "text/markdown"
    ).get_data(as_text=True)
    assert "| sample\\_size | basis |" in text and CAUTION in text


@pytest.mark.parametrize(
    ("body", "field"),
    [
        ({"frequency": "hourly", "tolerable_rate": 0.1}, "frequency"),
        ({"tolerable_rate": 0.1}, "frequency"),
        ({"frequency": "monthly", "tolerable_rate": 0.1, "occurrences": 0}, "occurrences"),
        ({"frequency": "monthly", "tolerable_rate": 0.1, "occurrences": 1.5}, "occurrences"),
        (
            {
                "frequency": "monthly",
                "tolerable_rate": 0.1,
                "common_practice": {"low": 5, "high": 2},
            },
            "common_practice.high",
        ),
        ({"frequency": "monthly", "tolerable_rate": 0.1, "expected_rate": 0.1}, "expected_rate"),
        ({"frequency": "monthly"}, "tolerable_rate"),
    ],
)
def test_periodic_bad_input(client: FlaskClient, body: dict[str, Any], field: str) -> None:
    assert field in problem_fields(post(client, PERIODIC, body))


def test_the_new_requests_answer_the_same_in_a_batch(client: FlaskClient) -> None:
    requests = {
        "sample-size": {
            "attributes": [{"name": "approval", "tolerable_rate": 0.05}],
            "population": {"size": 800},
        },
        "evaluation": {
            "sample_size": 50,
            "deviations": 0,
            "tolerable_rate": 0.05,
            "prior": {"type": "uniform"},
        },
        "plan-periodic": {"frequency": "quarterly", "tolerable_rate": 0.25},
    }
    items = [{"id": name, "operation": name, "request": body} for name, body in requests.items()]
    results = client.post("/v1/batch", json={"operations": items}).get_json()["results"]
    paths = {"sample-size": SIZE, "evaluation": EVALUATION, "plan-periodic": PERIODIC}
    for item, answer in zip(items, results, strict=True):
        single = client.post(paths[item["id"]], json=item["request"]).get_json()
        assert answer == {"id": item["id"], "status": 200, "result": single}


def test_more_than_a_hundred_attributes_are_refused(client: FlaskClient) -> None:
    many = [{"name": f"a{i}", "tolerable_rate": 0.05} for i in range(101)]
    errors = problem_fields(post(client, SIZE, {"attributes": many}))
    assert "at most 100" in errors["attributes"][0]
    assert post(client, SIZE, {"attributes": many[:100]}).status_code == 200
