"""POST /v1/plans/curve through the Flask test client: JSON, SVG, the plan's own request.

Curve values are checked against scipy.stats (binom and hypergeom cdf) called directly;
risks against the plan that /v1/sample-size returns for the same inputs.
"""

from __future__ import annotations

import json
import math
import re
import xml.etree.ElementTree as ET
from fractions import Fraction
from typing import Any

import jsonschema
import pytest
import yaml
from openapi_schema_validator import OAS31Validator
from referencing import Registry, Resource
from referencing.jsonschema import DRAFT202012
from scipy import stats

from service.web.openapi import build_yaml

PATH = "/v1/plans/curve"
SIZE = "/v1/sample-size"
SVG_TYPE = "image/svg+xml"
SVG = "{http://www.w3.org/2000/svg}"

CAUTION = (
    "These figures support, and do not replace, professional judgement and the "
    "auditing standards and methodology that apply to the engagement."
)

PLAN = {"sample_size": 93, "allowed_deviations": 1, "tolerable_rate": 0.05,
        "expected_rate": 0.01}


def _post(client: Any, body: Any, path: str = PATH, **headers: str) -> Any:
    return client.post(path, json=body, headers=headers)


def _json(client: Any, body: Any, path: str = PATH) -> dict[str, Any]:
    response = _post(client, body, path)
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.mimetype == "application/json"
    document = json.loads(response.get_data(as_text=True))
    assert isinstance(document, dict)
    return document


def _svg(client: Any, body: Any) -> ET.Element:
    response = _post(client, body, Accept=SVG_TYPE)
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.mimetype == SVG_TYPE
    assert "Accept" in response.headers.get("Vary", "")
    return ET.fromstring(response.get_data(as_text=True))  # noqa: S314 - the service's own output


def _by_id(root: ET.Element) -> dict[str, ET.Element]:
    return {element.get("id", ""): element for element in root.iter() if element.get("id")}


def _text(element: ET.Element) -> str:
    return " ".join("".join(node.itertext()).strip() for node in element.iter(f"{SVG}text"))


def _problem(response: Any) -> dict[str, Any]:
    assert response.status_code == 422, response.get_data(as_text=True)
    assert response.mimetype == "application/problem+json"
    body = response.get_json()
    assert isinstance(body["errors"], dict)
    return body


# --- JSON ---------------------------------------------------------------------------------


def test_json_points_are_the_binomial_curve(client: Any) -> None:
    document = _json(client, PLAN)
    assert document["method"] == "binomial"
    assert document["population_size"] is None
    points = document["points"]
    assert len(points) == 101  # the default grid
    assert points[0] == {"rate": 0.0, "probability": 1.0}
    for point in points:
        # scipy.stats.binom.cdf(1, 93, p): P(at most 1 deviation in 93 items at rate p)
        assert point["probability"] == pytest.approx(
            float(stats.binom.cdf(1, 93, point["rate"])), rel=1e-12, abs=1e-300
        )
    probabilities = [point["probability"] for point in points]
    assert probabilities == sorted(probabilities, reverse=True)
    assert document["risk_of_overreliance"] == pytest.approx(float(stats.binom.cdf(1, 93, 0.05)))
    assert document["risk_of_underreliance"] == pytest.approx(float(stats.binom.sf(1, 93, 0.01)))
    assert document["summary"].endswith(CAUTION)
    assert document["warnings"] == []


def test_hypergeometric_points(client: Any) -> None:
    document = _json(client, {"sample_size": 93, "allowed_deviations": 1,
                              "population": {"size": 4200, "label": "POs Q3"}, "points": 41})
    assert document["method"] == "hypergeometric"
    assert document["population_label"] == "POs Q3"
    assert len(document["points"]) == 41
    for point in document["points"]:
        deviant = math.ceil(Fraction(repr(point["rate"])) * 4200)
        # scipy.stats.hypergeom.cdf(k, N, M, n) with M = ceil(p × N)
        expected = float(stats.hypergeom.cdf(1, 4200, deviant, 93))
        assert point["probability"] == pytest.approx(expected, rel=1e-12, abs=1e-300)
    assert "staircase" in document["summary"]


def test_optional_fields_are_absent_without_rates(client: Any) -> None:
    document = _json(client, {"sample_size": 59, "allowed_deviations": 0})
    assert set(document) == {"method", "sample_size", "allowed_deviations", "population_size",
                             "points", "summary", "warnings"}


def test_points_sets_the_grid(client: Any) -> None:
    rates = [point["rate"] for point in _json(client, {**PLAN, "points": 11})["points"]]
    assert len(rates) == 11
    step = rates[1]
    assert rates == pytest.approx([i * step for i in range(11)], rel=1e-12)
    assert rates[-1] > 0.05  # past the tolerable rate


# --- SVG ----------------------------------------------------------------------------------


def test_svg_has_the_curve_the_marks_and_the_axis_labels(client: Any) -> None:
    root = _svg(client, PLAN)
    assert root.tag == f"{SVG}svg"
    ids = _by_id(root)
    for gid in ("oc-curve", "mark-tolerable", "mark-expected", "risk-overreliance",
                "risk-underreliance", "axis-x-label", "axis-y-label", "plan-title", "caption"):
        assert gid in ids, gid
    assert _text(ids["axis-x-label"]) == "True deviation rate"
    assert _text(ids["axis-y-label"]) == "Probability the sample supports reliance"
    caption = _text(ids["caption"])
    assert caption.startswith("Plan: 93 items, up to 1 deviation, binomial model")
    assert "tolerable 5%, expected 1%" in caption
    assert caption.endswith(CAUTION)
    # One vertex per grid point, plus the two marked rates (0.05 and 0.01 are not on the
    # grid of step 0.00096), so that the line passes through the marks.
    document = _json(client, PLAN)
    grid = {point["rate"] for point in document["points"]}
    assert 0.05 not in grid and 0.01 not in grid
    (path,) = list(ids["oc-curve"].iter(f"{SVG}path"))
    assert len(re.findall(r"[ML]", path.get("d", ""))) == len(grid) + 2


def test_svg_without_rates_has_no_marks(client: Any) -> None:
    ids = _by_id(_svg(client, {"sample_size": 45, "allowed_deviations": 0,
                               "population": {"size": 100}}))
    assert "oc-curve" in ids
    for gid in ("mark-tolerable", "mark-expected", "risk-overreliance", "risk-underreliance"):
        assert gid not in ids
    assert "no deviation, hypergeometric model, population 100" in _text(ids["caption"])


def test_json_is_the_default_and_csv_is_not_acceptable(client: Any) -> None:
    assert _post(client, PLAN).mimetype == "application/json"
    assert _post(client, PLAN, Accept="*/*").mimetype == "application/json"
    assert _post(client, PLAN, Accept="image/*").mimetype == SVG_TYPE
    response = _post(client, PLAN, Accept="text/csv")
    assert response.status_code == 406
    assert response.mimetype == "application/problem+json"
    assert SVG_TYPE in response.get_json()["detail"]


def test_bad_input_with_svg_accepted_is_still_problem_json(client: Any) -> None:
    response = _post(client, {"sample_size": 10, "allowed_deviations": 11}, Accept=SVG_TYPE)
    assert "allowed_deviations" in _problem(response)["errors"]


# --- the plan's own request ------------------------------------------------------------------

SIZE_REQUESTS = [
    {"tolerable_rate": 0.05},
    {"tolerable_rate": 0.05, "expected_rate": 0.01},
    {"tolerable_rate": 0.05, "expected_rate": 0.01,
     "population": {"size": 4200, "label": "Purchase orders, Northwind Trading, Q3"}},
    {"tolerable_rate": 0.05, "population": {"size": 100}},
    {"tolerable_rate": 0.06, "expected_rate": 0.01, "method": "poisson"},
    {"tolerable_rate": 0.07, "expected_rate": 0.0125, "confidence": 0.9},
    # binomial from a small population: the sample can exceed it (with a warning)
    {"tolerable_rate": 0.05, "method": "binomial", "population": {"size": 50}},
]


@pytest.mark.parametrize("request_body", SIZE_REQUESTS)
def test_curve_request_posted_back_gives_the_plans_risks(
    client: Any, request_body: dict[str, Any]
) -> None:
    plan = _json(client, request_body, SIZE)
    assert plan["links"] == {"curve": PATH}
    body = plan["curve_request"]
    assert body["sample_size"] == plan["sample_size"]
    assert body["allowed_deviations"] == plan["allowed_deviations"]
    assert body["method"] == plan["method"]
    if "population" in request_body:
        assert body["population"] == request_body["population"]
    else:
        assert "population" not in body
    curve = _json(client, body, plan["links"]["curve"])
    assert curve["risk_of_overreliance"] == plan["risk_of_overreliance"]
    assert curve["risk_of_underreliance"] == plan["risk_of_underreliance"]
    assert curve["method"] == plan["method"]
    assert curve.get("population_label") == plan.get("population_label")
    # and the same body draws the chart
    assert "oc-curve" in _by_id(_svg(client, body))


# --- the contract ---------------------------------------------------------------------------


def _validator(component: str) -> OAS31Validator:
    spec = yaml.safe_load(build_yaml())
    uri = "urn:attribute-sampling:openapi"
    registry: Registry[Any] = Registry().with_resource(
        uri, Resource.from_contents(spec, default_specification=DRAFT202012)
    )
    return OAS31Validator({"$ref": f"{uri}#/components/schemas/{component}"}, registry=registry)


def test_responses_match_the_published_contract(client: Any) -> None:
    _validator("Curve").validate(_json(client, PLAN))
    plan = _json(client, {"tolerable_rate": 0.05, "population": {"size": 4200, "label": "x"}},
                 SIZE)
    validator = _validator("SampleSizePlan")
    validator.validate(plan)
    # curve_request is held to the curve endpoint's request schema: a field it does not
    # accept fails the check.
    with pytest.raises(jsonschema.ValidationError):
        validator.validate({**plan, "curve_request": {**plan["curve_request"], "x": 1}})


# --- bad input ------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("body", "field", "fragment"),
    [
        ({"sample_size": 10, "allowed_deviations": 11}, "allowed_deviations",
         "must not exceed sample_size 10"),
        ({**PLAN, "points": 2002}, "points", "from 2 to 2001"),
        ({**PLAN, "points": 1}, "points", "from 2 to 2001"),
        ({**PLAN, "points": 50.5}, "points", "whole number"),
        ({**PLAN, "expected_rate": 0.05}, "expected_rate", "below tolerable_rate"),
        ({**PLAN, "expected_rate": 0.07}, "expected_rate", "below tolerable_rate"),
        ({"allowed_deviations": 1}, "sample_size", "Missing"),
        ({"sample_size": 93}, "allowed_deviations", "Missing"),
        ({"sample_size": 0, "allowed_deviations": 0}, "sample_size", "at least 1"),
        ({"sample_size": "93", "allowed_deviations": 1}, "sample_size", "not a string"),
        ({"sample_size": 93, "allowed_deviations": -1}, "allowed_deviations", "at least 0"),
        ({**PLAN, "tolerable_rate": 5}, "tolerable_rate", "looks like a percentage"),
        ({**PLAN, "expected_rate": 1}, "expected_rate", "from 0 up to"),
        ({**PLAN, "method": "normal"}, "method", "must be one of"),
        ({**PLAN, "method": "hypergeometric"}, "population.size", "needs population.size"),
        ({"sample_size": 101, "allowed_deviations": 1, "population": {"size": 100}},
         "sample_size", "must not exceed population.size 100"),
        ({"sample_size": 10_000_001, "allowed_deviations": 1}, "sample_size",
         "from 1 to 10,000,000"),
        ({**PLAN, "population": {"size": 10**12}}, "population.size", "method binomial"),
        ({**PLAN, "population": {"size": 10**9}, "points": 2001}, "points",
         "at most 210 points"),
        ({**PLAN, "margin": 0.05}, "margin", "not a field"),
    ],
)
def test_bad_input_is_422_naming_the_field(
    client: Any, body: dict[str, Any], field: str, fragment: str
) -> None:
    problem = _problem(_post(client, body))
    assert field in problem["errors"], problem
    assert any(fragment in message for message in problem["errors"][field]), problem


def test_every_mistake_is_named_at_once(client: Any) -> None:
    problem = _problem(_post(client, {"sample_size": 60, "allowed_deviations": 61,
                                      "points": 5000, "tolerable_rate": 0.05,
                                      "expected_rate": 0.05}))
    assert set(problem["errors"]) == {"allowed_deviations", "points", "expected_rate"}
