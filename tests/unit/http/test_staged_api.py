"""POST /v1/plans/staged and /v1/plans/staged/evaluation through the Flask test client.

Risks are recomputed here by enumerating every stage outcome with scipy.stats.binom.
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET
from typing import Any

import pytest
from scipy import stats

PLAN = "/v1/plans/staged"
EVALUATION = "/v1/plans/staged/evaluation"

CAUTION = (
    "These figures support, and do not replace, professional judgement and the "
    "auditing standards and methodology that apply to the engagement."
)


def _acceptance(stages: list[dict[str, int]], rate: float) -> float:
    total = 0.0

    def walk(j: int, prior: int, c: int, mass: float) -> None:
        nonlocal total
        stage = stages[j]
        m = stage["cumulative_sample_size"] - prior
        for y in range(m + 1):
            d = c + y
            p = mass * stats.binom.pmf(y, m, rate)
            if d <= stage["accept_if_at_most"]:
                total += p
            elif d < stage["fail_if_at_least"]:
                walk(j + 1, stage["cumulative_sample_size"], d, p)

    walk(0, 0, 0, 1.0)
    return total


def test_staged_plan_over_http(client: Any) -> None:
    response = client.post(PLAN, json={"tolerable_rate": 0.05, "expected_rate": 0.01})
    assert response.status_code == 200, response.get_json()
    body = response.get_json()
    assert body["max_stages"] == 2
    assert body["method"] == "binomial"
    assert 1 <= len(body["stages"]) <= 2
    assert body["risk_of_overreliance"] == pytest.approx(
        _acceptance(body["stages"], 0.05), rel=1e-9)
    assert body["risk_of_overreliance"] <= 0.05
    assert body["risk_of_underreliance"] == pytest.approx(
        1 - _acceptance(body["stages"], 0.01), rel=1e-9)
    assert body["fixed_sample_size"] == 93  # AICPA guide table A-1, recalled from memory
    assert body["expected_sample_size_at_expected_rate"] < 93
    assert body["summary"].endswith(CAUTION)


@pytest.mark.parametrize(("body", "field"), [
    ({"tolerable_rate": 0.05, "max_stages": 4}, "max_stages"),
    ({"tolerable_rate": 0.05, "max_stages": 1}, "max_stages"),
    ({"tolerable_rate": 0.05, "max_stages": 2.5}, "max_stages"),
    ({"tolerable_rate": 0.05, "expected_rate": 0.05}, "expected_rate"),
    ({"expected_rate": 0.01}, "tolerable_rate"),
    ({"tolerable_rate": 0.05, "stages": 2}, "stages"),
    ({"tolerable_rate": 0.05, "expected_rate": 0.03}, "expected_rate"),
])
def test_bad_staged_plan_requests_name_the_field(client: Any, body: dict, field: str) -> None:
    response = client.post(PLAN, json=body)
    assert response.status_code == 422
    assert response.mimetype == "application/problem+json"
    problem = response.get_json()
    assert field in problem["errors"], problem


def test_staged_evaluation_over_http_uses_the_plans_own_risk(client: Any) -> None:
    stages = [{"cumulative_sample_size": 66, "accept_if_at_most": 0, "fail_if_at_least": 2},
              {"cumulative_sample_size": 135, "accept_if_at_most": 2, "fail_if_at_least": 3}]
    response = client.post(EVALUATION, json={
        "stages": stages, "stage_reached": 2, "deviations": 2, "tolerable_rate": 0.05})
    assert response.status_code == 200, response.get_json()
    body = response.get_json()
    assert body["decision"] == "accept"
    assert body["conclusion"] == "supports_reliance"
    assert body["plan_risk_of_overreliance"] == pytest.approx(_acceptance(stages, 0.05), rel=1e-9)
    fixed = body["fixed_size_formula"]
    # Clopper–Pearson for 2 in 135 (scipy.stats.beta), as if 135 had been fixed in advance.
    assert fixed["upper_deviation_limit"] == pytest.approx(stats.beta.ppf(0.95, 3, 133))
    assert body["upper_deviation_limit"] > fixed["upper_deviation_limit"]
    assert body["summary"].endswith(CAUTION)
    assert math.isclose(body["sample_deviation_rate"], 2 / 135)


@pytest.mark.parametrize(("change", "field"), [
    ({"stage_reached": 3}, "stage_reached"),
    ({"deviations": 1, "stage_reached": 1}, "deviations"),
    ({"stages": []}, "stages"),
    ({"stages": [{"cumulative_sample_size": 10, "accept_if_at_most": 0}]},
     "stages[0].fail_if_at_least"),
    ({"stages": [{"cumulative_sample_size": 66, "accept_if_at_most": 0, "fail_if_at_least": 2},
                 {"cumulative_sample_size": 50, "accept_if_at_most": 2, "fail_if_at_least": 3}]},
     "stages[1].cumulative_sample_size"),
])
def test_bad_staged_evaluations_name_the_field(client: Any, change: dict, field: str) -> None:
    body = {"stages": [
        {"cumulative_sample_size": 66, "accept_if_at_most": 0, "fail_if_at_least": 2},
        {"cumulative_sample_size": 135, "accept_if_at_most": 2, "fail_if_at_least": 3}],
        "stage_reached": 2, "deviations": 2, "tolerable_rate": 0.05, **change}
    response = client.post(EVALUATION, json=body)
    assert response.status_code == 422, response.get_json()
    problem = response.get_json()
    assert field in problem["errors"], problem


def test_staged_plan_as_markdown_carries_the_caution(client: Any) -> None:
    response = client.post(PLAN, json={"tolerable_rate": 0.05, "expected_rate": 0.01},
                           headers={"Accept": "text/markdown"})
    assert response.status_code == 200
    text = response.get_data(as_text=True)
    assert "Staged (stop-or-go) plan" in text
    assert text.rstrip().endswith(CAUTION)


def test_staged_curve_over_http(client: Any) -> None:
    stages = [{"cumulative_sample_size": 66, "accept_if_at_most": 0, "fail_if_at_least": 2},
              {"cumulative_sample_size": 135, "accept_if_at_most": 2, "fail_if_at_least": 3}]
    response = client.post("/v1/plans/staged/curve", json={
        "stages": stages, "tolerable_rate": 0.05, "expected_rate": 0.01, "points": 11})
    assert response.status_code == 200, response.get_json()
    body = response.get_json()
    assert len(body["points"]) == 11
    assert body["risk_of_overreliance"] == pytest.approx(_acceptance(stages, 0.05), rel=1e-9)
    assert body["risk_of_underreliance"] == pytest.approx(1 - _acceptance(stages, 0.01),
                                                          rel=1e-9)
    middle = body["points"][5]
    assert middle["acceptance_probability"] == pytest.approx(
        _acceptance(stages, middle["rate"]), rel=1e-9)
    assert body["summary"].endswith(CAUTION)


@pytest.mark.parametrize(("change", "field"), [
    ({"points": 1}, "points"),
    ({"stages": [{"cumulative_sample_size": 66, "accept_if_at_most": 0,
                  "fail_if_at_least": 2}]}, "stages[0].fail_if_at_least"),
    ({"stages": [{"cumulative_sample_size": 9, "accept_if_at_most": 0,
                  "fail_if_at_least": 1}], "population": {"size": 5}},
     "stages[0].cumulative_sample_size"),
])
def test_bad_staged_curve_requests_name_the_field(client: Any, change: dict, field: str) -> None:
    body = {"stages": [{"cumulative_sample_size": 59, "accept_if_at_most": 0,
                        "fail_if_at_least": 1}], **change}
    response = client.post("/v1/plans/staged/curve", json=body)
    assert response.status_code == 422, response.get_json()
    assert field in response.get_json()["errors"]


SVG_TYPE = "image/svg+xml"
SVG = "{http://www.w3.org/2000/svg}"
CURVE_STAGES = [
    {"cumulative_sample_size": 66, "accept_if_at_most": 0, "fail_if_at_least": 2},
    {"cumulative_sample_size": 135, "accept_if_at_most": 2, "fail_if_at_least": 3},
]


def _svg_ids(root: ET.Element) -> dict[str, ET.Element]:
    return {element.get("id", ""): element for element in root.iter() if element.get("id")}


def _svg_text(element: ET.Element) -> str:
    return " ".join("".join(node.itertext()).strip() for node in element.iter(f"{SVG}text"))


def test_staged_curve_as_svg_carries_the_plans_values(client: Any) -> None:
    body = {"stages": CURVE_STAGES, "tolerable_rate": 0.05, "expected_rate": 0.01,
            "points": 21, "population": {"size": 4200}}
    document = client.post("/v1/plans/staged/curve", json=body).get_json()
    response = client.post("/v1/plans/staged/curve", json=body,
                           headers={"Accept": SVG_TYPE})
    assert response.status_code == 200
    assert response.mimetype == SVG_TYPE
    assert "Accept" in response.headers["Vary"]
    root = ET.fromstring(response.get_data(as_text=True))  # noqa: S314 - our own answer
    assert root.tag == f"{SVG}svg"
    assert root[0].tag == f"{SVG}title"
    assert root[0].text == (
        "Staged plan of 2 stages, at most 135 items; stage 1: 66 items, accept ≤ 0, "
        "fail ≥ 2; stage 2: 135 items, accept ≤ 2, fail ≥ 3")
    # The description is the JSON answer's summary, without the caution (which the caption
    # carries).
    assert root[1].tag == f"{SVG}desc"
    assert root[1].text == document["summary"].removesuffix(CAUTION).strip()
    ids = _svg_ids(root)
    risk_over = f"{document['risk_of_overreliance'] * 100:.2f}".rstrip("0").rstrip(".")
    risk_under = f"{document['risk_of_underreliance'] * 100:.2f}".rstrip("0").rstrip(".")
    assert _svg_text(ids["label-tolerable"]) == (
        f"Tolerable rate 5%, risk of overreliance {risk_over}%")
    assert _svg_text(ids["label-expected"]) == (
        f"Expected rate 1%, risk of underreliance {risk_under}%")
    caption = _svg_text(ids["caption"])
    assert "hypergeometric model" in caption and "population 4,200" in caption
    assert f"{document['expected_sample_size_at_expected_rate']:,.1f} items" in caption
    assert caption.endswith(CAUTION)
    # One vertex per grid point, plus the two marked rates when they are off the grid.
    grid = {point["rate"] for point in document["points"]}
    extra = len({0.05, 0.01} - grid)
    for gid in ("acceptance-curve", "expected-size-curve"):
        d = next(ids[gid].iter(f"{SVG}path")).get("d", "")
        assert len(re.findall(r"[ML] ", d)) == len(document["points"]) + extra


def test_staged_curve_markdown_is_still_served(client: Any) -> None:
    response = client.post("/v1/plans/staged/curve", json={"stages": CURVE_STAGES},
                           headers={"Accept": "text/markdown"})
    assert response.status_code == 200
    assert response.get_data(as_text=True).rstrip().endswith(CAUTION)


def test_bad_staged_curve_with_svg_accepted_is_still_problem_json(client: Any) -> None:
    response = client.post("/v1/plans/staged/curve", json={"stages": [], "points": 1},
                           headers={"Accept": SVG_TYPE})
    assert response.status_code == 422
    assert response.mimetype == "application/problem+json"
    assert {"stages", "points"} <= set(response.get_json()["errors"])


def test_staged_plans_curve_request_posted_back_gives_the_plans_risks(client: Any) -> None:
    plan = client.post(PLAN, json={"tolerable_rate": 0.05, "expected_rate": 0.01,
                                   "population": {"size": 4200}}).get_json()
    assert plan["links"] == {"curve": "/v1/plans/staged/curve"}
    assert plan["curve_request"]["stages"] == plan["stages"]
    curve = client.post(plan["links"]["curve"], json=plan["curve_request"]).get_json()
    assert curve["method"] == plan["method"] == "hypergeometric"
    assert curve["population_size"] == 4200
    assert curve["risk_of_overreliance"] == pytest.approx(plan["risk_of_overreliance"],
                                                          rel=1e-12)
    assert curve["risk_of_underreliance"] == pytest.approx(plan["risk_of_underreliance"],
                                                           rel=1e-12)
    assert curve["expected_sample_size_at_expected_rate"] == pytest.approx(
        plan["expected_sample_size_at_expected_rate"], rel=1e-12)
