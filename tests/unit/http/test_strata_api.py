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
