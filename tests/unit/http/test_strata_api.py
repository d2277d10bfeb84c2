"""POST /v1/evaluation/strata through the Flask test client."""

from __future__ import annotations

from typing import Any

import pytest
from scipy import stats

PATH = "/v1/evaluation/strata"
CAUTION = (
    "These figures support, and do not replace, professional judgement and the "
    "auditing standards and methodology that apply to the engagement."
)
STRATA = [
    {"label": "Plant A", "population_size": 1200, "sample_size": 40, "deviations": 0},
    {"label": "Plant B", "population_size": 800, "sample_size": 30, "deviations": 1},
]


def test_strata_over_http(client: Any) -> None:
    response = client.post(PATH, json={"strata": STRATA, "tolerable_rate": 0.1})
    assert response.status_code == 200, response.get_json()
    body = response.get_json()
    assert [s["label"] for s in body["strata"]] == ["Plant A", "Plant B"]
    assert body["population_size"] == 2000
    assert sum(s["risk_share"] for s in body["strata"]) == pytest.approx(0.05)
    for stratum in body["strata"]:
        # Each part is the exact hypergeometric bound at its own risk (scipy.stats.hypergeom).
        m, n, size = (stratum["upper_deviation_count"], stratum["sample_size"],
                      stratum["population_size"])
        d, risk = stratum["deviations"], stratum["risk_share"]
        assert stats.hypergeom.cdf(d, size, m, n) > risk >= stats.hypergeom.cdf(d, size, m + 1, n)
        assert stratum["evaluation"]["method"] == "hypergeometric"
    assert body["upper_deviation_count"] == sum(s["upper_deviation_count"] for s in body["strata"])
    assert body["upper_deviation_limit"] == body["upper_deviation_count"] / 2000
    assert "Boole" in body["guarantee"]
    assert body["summary"].endswith(CAUTION)


@pytest.mark.parametrize(("strata", "field"), [
    ([{**STRATA[0], "sample_size": 1300}], "strata[0].sample_size"),
    ([STRATA[0], {**STRATA[1], "label": "Plant A"}], "strata[1].label"),
    ([{**STRATA[0], "deviations": 41}], "strata[0].deviations"),
    ([], "strata"),
    ([{**STRATA[0], "extra": 1}], "strata[0].extra"),
])
def test_bad_strata_name_the_field(client: Any, strata: list, field: str) -> None:
    response = client.post(PATH, json={"strata": strata})
    assert response.status_code == 422, response.get_json()
    assert response.mimetype == "application/problem+json"
    assert field in response.get_json()["errors"]


def test_too_many_strata_are_refused_before_validation(client: Any) -> None:
    response = client.post(PATH, json={"strata": [STRATA[0]] * 5000})
    assert response.status_code == 422
    assert "strata" in response.get_json()["errors"]


# POST /v1/evaluation takes the same strata and gives the same answer.
EVALUATION = "/v1/evaluation"


def test_evaluation_with_strata_answers_as_the_strata_path(client: Any) -> None:
    body = {"strata": STRATA, "tolerable_rate": 0.1, "confidence": 0.9}
    direct = client.post(PATH, json=body)
    through = client.post(EVALUATION, json=body)
    assert through.status_code == 200, through.get_json()
    answer = through.get_json()
    assert answer == direct.get_json()
    assert answer["confidence"] == 0.9
    assert sum(s["risk_share"] for s in answer["strata"]) == pytest.approx(0.1)
    assert answer["population_size"] == 2000
    assert answer["sample_size"] == 70
    assert answer["deviations"] == 1
    assert answer["upper_deviation_limit"] == answer["upper_deviation_count"] / 2000


def test_evaluation_with_strata_without_rates_uses_the_defaults(client: Any) -> None:
    answer = client.post(EVALUATION, json={"strata": STRATA}).get_json()
    assert answer["confidence"] == 0.95
    assert answer["expected_rate"] == 0.0
    assert "conclusion" not in answer
    assert answer == client.post(PATH, json={"strata": STRATA}).get_json()


def test_evaluation_with_strata_as_markdown(client: Any) -> None:
    response = client.post(EVALUATION, json={"strata": STRATA, "tolerable_rate": 0.1},
                           headers={"Accept": "text/markdown"})
    assert response.status_code == 200
    text = response.get_data(as_text=True)
    assert "Boole" in text
    assert "Plant B" in text
    assert text.rstrip().endswith(CAUTION)


@pytest.mark.parametrize(("body", "field"), [
    ({"strata": [{**STRATA[0], "sample_size": 1300}]}, "strata[0].sample_size"),
    ({"strata": [STRATA[0], {**STRATA[1], "label": "Plant A"}]}, "strata[1].label"),
    ({"strata": [{**STRATA[0], "deviations": 41}]}, "strata[0].deviations"),
    ({"strata": []}, "strata"),
    ({"strata": "Plant A"}, "strata"),
    ({"strata": STRATA, "sample_size": 70}, "sample_size"),
    ({"strata": STRATA, "deviations": 1}, "deviations"),
    ({"strata": STRATA, "population": {"size": 2000}}, "population"),
    ({"strata": STRATA, "method": "binomial"}, "method"),
    ({"strata": STRATA, "prior": {"type": "uniform"}}, "prior"),
    ({"strata": STRATA, "attributes": [{"name": "a", "deviations": 0, "tolerable_rate": 0.05}]},
     "attributes"),
    ({"strata": STRATA, "tolerable_rate": 0.05, "expected_rate": 0.05}, "expected_rate"),
    ({"deviations": 1}, "sample_size"),
    ({"sample_size": 60}, "deviations"),
])
def test_bad_strata_on_evaluation_name_the_field(client: Any, body: dict, field: str) -> None:
    response = client.post(EVALUATION, json=body)
    assert response.status_code == 422, response.get_json()
    assert response.mimetype == "application/problem+json"
    assert field in response.get_json()["errors"], response.get_json()


def test_every_single_population_field_mixed_with_strata_is_named_at_once(client: Any) -> None:
    response = client.post(EVALUATION, json={
        "strata": STRATA, "sample_size": 70, "deviations": 1, "method": "hypergeometric"})
    errors = response.get_json()["errors"]
    assert {"sample_size", "deviations", "method"} <= set(errors)
    assert "strata" in errors["method"][0]


def test_too_many_strata_on_evaluation_are_refused_before_validation(client: Any) -> None:
    response = client.post(EVALUATION, json={"strata": [STRATA[0]] * 5000})
    assert response.status_code == 422
    assert "strata" in response.get_json()["errors"]
