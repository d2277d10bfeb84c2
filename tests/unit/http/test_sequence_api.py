"""POST /v1/evaluation/sequence through the Flask test client."""

from __future__ import annotations

from typing import Any

import pytest
from scipy import stats

PATH = "/v1/evaluation/sequence"
CAUTION = (
    "These figures support, and do not replace, professional judgement and the "
    "auditing standards and methodology that apply to the engagement."
)


def test_sequence_over_http(client: Any) -> None:
    results = [0] * 40 + [1] + [0] * 59
    response = client.post(PATH, json={"results": results, "tolerable_rate": 0.1})
    assert response.status_code == 200, response.get_json()
    body = response.get_json()
    assert body["method"] == "with_replacement"
    assert len(body["points"]) == 100
    assert body["points"][40]["deviations"] == 1
    for point in body["points"]:
        s, t = point["deviations"], point["sample_size"]
        # Wider than Clopper–Pearson (scipy.stats.beta) at every n.
        assert point["upper_deviation_limit"] > stats.beta.ppf(0.95, s + 1, t - s)
    assert body["upper_deviation_limit"] == body["points"][-1]["upper_deviation_limit"]
    assert "any stopping time" in body["guarantee"]
    assert body["summary"].endswith(CAUTION)


def test_sequence_without_replacement(client: Any) -> None:
    response = client.post(PATH, json={"results": [False] * 50, "population": {"size": 50}})
    assert response.status_code == 200
    body = response.get_json()
    assert body["method"] == "without_replacement"
    assert body["upper_deviation_limit"] == 0.0  # every item tested, none deviant


@pytest.mark.parametrize(("body", "field"), [
    ({"results": [0, 2]}, "results.1"),
    ({"results": [0, "1"]}, "results.1"),
    ({"results": [0, 0.5]}, "results.1"),
    ({"results": []}, "results"),
    ({"results": [0] * 10, "population": {"size": 5}}, "population.size"),
    ({"results": [0] * 10_001}, "results"),
])
def test_bad_sequences_name_the_field(client: Any, body: dict, field: str) -> None:
    response = client.post(PATH, json=body)
    assert response.status_code == 422, response.get_json()
    errors = response.get_json()["errors"]
    assert any(key == field or key.startswith(field.replace(".1", "[1]")) for key in errors), errors
