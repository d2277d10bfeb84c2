"""Answers fit to file: small and whole populations, plans compared, names, charts.

The populations are a fictional food wholesaler's periodic controls (monthly bank
reconciliations, weekly payroll approvals). Expected values come from the definitions
in the README, worked out in the comments.
"""

from __future__ import annotations

import hashlib
import re
import xml.etree.ElementTree as ET
from fractions import Fraction
from typing import Any

import pytest
from flask.testing import FlaskClient

from service.sampling.wording import NEXT_STEPS

MARKDOWN = {"Accept": "text/markdown"}
SVG = {"Accept": "image/svg+xml"}
SVG_NS = "{http://www.w3.org/2000/svg}"


def _post(client: FlaskClient, path: str, body: dict[str, Any], **kwargs: Any) -> Any:
    response = client.post(path, json=body, **kwargs)
    assert response.status_code == 200, response.get_data(as_text=True)
    return response


def _texts(document: dict[str, Any]) -> str:
    return " ".join([document["summary"], *document["warnings"]])


# --- point 6: populations of one, whole populations, counts for small populations --------


def test_a_population_of_one_reads_as_testing_the_one_item(client: FlaskClient) -> None:
    plan = _post(client, "/v1/sample-size",
                 {"tolerable_rate": 0.05, "population": {"size": 1}}).get_json()
    assert plan["sample_size"] == 1 and plan["whole_population"] is True
    text = _texts(plan)
    assert "more than half" not in text
    assert "1 items" not in text
    assert "no sampling risk" in text
    assert "Test every item (1 of 1)" in plan["summary"]


def test_messages_use_the_singular_for_one_item(client: FlaskClient) -> None:
    selection = _post(client, "/v1/selection",
                      {"population": {"size": 1}, "sample_size": 1, "seed": "fictional-x"})
    text = _texts(selection.get_json())
    assert "1 items" not in text and "the first item" in text


def test_whole_population_evaluation_reports_the_exact_rate(client: FlaskClient) -> None:
    # 52 weekly payroll approvals, every one tested, 1 deviation: the rate is exactly 1/52
    # and there is no sampling risk. At 5% the population may hold ceil(0.05 × 52) = 3
    # deviant items, and 1 is fewer, so the test supports reliance.
    body = {"sample_size": 52, "deviations": 1, "tolerable_rate": 0.05,
            "population": {"size": 52, "label": "Weekly payroll approvals, FY2026"}}
    result = _post(client, "/v1/evaluation", body).get_json()
    assert result["whole_population"] is True
    assert result["upper_deviation_limit"] == float(Fraction(1, 52))
    assert result["allowance_for_sampling_risk"] == 0.0
    assert result["confidence_interval"] == {"low": 1 / 52, "high": 1 / 52}
    assert result["tolerable_deviant_items"] == 3
    assert result["conclusion"] == "supports_reliance"
    assert "Every item (52 of 52)" in result["summary"]
    assert "no sampling risk" in result["summary"]
    assert "exactly 1.92%" in result["summary"]


def test_whole_population_with_a_with_replacement_model_says_why_the_rate_is_exact(
    client: FlaskClient,
) -> None:
    body = {"sample_size": 52, "deviations": 1, "method": "binomial",
            "population": {"size": 52}}
    result = _post(client, "/v1/evaluation", body).get_json()
    assert result["upper_deviation_limit"] == 1 / 52
    assert result["allowance_for_sampling_risk"] == 0.0
    assert any("does not apply" in w for w in result["warnings"])


def test_whole_population_with_too_many_deviations_does_not_support_reliance(
    client: FlaskClient,
) -> None:
    # 3 deviations reach the ceil(0.05 × 52) = 3 deviant items allowed at 5%.
    body = {"sample_size": 52, "deviations": 3, "tolerable_rate": 0.05,
            "population": {"size": 52}}
    result = _post(client, "/v1/evaluation", body).get_json()
    assert result["conclusion"] == "does_not_support_reliance"
    assert result["next_steps"] == list(NEXT_STEPS)


def test_a_small_population_states_the_tolerable_rate_as_a_count(client: FlaskClient) -> None:
    # 5% of 12 monthly reconciliations is 0.6, rounded up to 1 deviant item.
    plan = _post(client, "/v1/sample-size",
                 {"tolerable_rate": 0.05, "population": {"size": 40}}).get_json()
    assert plan["tolerable_deviant_items"] == 2  # ceil(0.05 × 40)
    assert "5% of 40 items is 2 deviant items" in plan["summary"]
    whole = _post(client, "/v1/sample-size",
                  {"tolerable_rate": 0.05, "population": {"size": 12}}).get_json()
    assert whole["tolerable_deviant_items"] == 1
    assert "5% of 12 items is 1 deviant item" in whole["summary"]
    large = _post(client, "/v1/sample-size",
                  {"tolerable_rate": 0.05, "population": {"size": 4200}}).get_json()
    assert "deviant item" not in large["summary"]


def test_a_whole_population_curve_is_one_step(client: FlaskClient) -> None:
    body = {"sample_size": 12, "allowed_deviations": 0, "tolerable_rate": 0.05,
            "population": {"size": 12, "label": "Monthly bank reconciliations"}}
    svg = _post(client, "/v1/plans/curve", body, headers=SVG).get_data(as_text=True)
    root = ET.fromstring(svg)  # noqa: S314 - the service's own output
    desc = root.find(f"{SVG_NS}desc")
    assert desc is not None and desc.text is not None
    assert "single step" in desc.text and "no sampling risk" in desc.text
    curve = root.find(".//*[@id='oc-curve']")
    assert curve is not None
    path = curve.find(f".//{SVG_NS}path")
    assert path is not None
    # Four vertices: (0, 100%), the step down at 0 deviant items, and the flat 0% beyond.
    assert len(re.findall(r"[ML]", path.attrib["d"])) <= 4


# --- point 7: the chart names the plan and the population -------------------------------


def test_chart_has_title_description_and_the_population_label(client: FlaskClient) -> None:
    label = "Purchase orders PO-70001 to PO-74200 & credit notes, Q3"
    body = {"sample_size": 60, "allowed_deviations": 1, "tolerable_rate": 0.05,
            "expected_rate": 0.01, "population": {"size": 4200, "label": label}}
    svg = _post(client, "/v1/plans/curve", body, headers=SVG).get_data(as_text=True)
    root = ET.fromstring(svg)  # noqa: S314 - the service's own output
    children = list(root)
    assert children[0].tag == f"{SVG_NS}title" and children[1].tag == f"{SVG_NS}desc"
    assert children[0].text is not None and label in children[0].text
    assert "Sample of 60 items" in children[0].text
    assert children[1].text is not None and "risk of overreliance" in children[1].text
    shown = root.find(".//*[@id='population-label']")
    assert shown is not None
    assert label in "".join(shown.itertext())


# --- point 8: method names ---------------------------------------------------------------


def test_systematic_selection_has_its_own_algorithm_and_fingerprint(
    client: FlaskClient,
) -> None:
    body = {"population": {"size": 4201}, "sample_size": 60, "seed": "fictional-co-sys",
            "method": "systematic"}
    result = _post(client, "/v1/selection", body).get_json()
    assert result["algorithm"] == "hmac-sha256-systematic/v1"
    # Step 7 of the documented algorithm, computed here from its text.
    population = hashlib.sha256(b"numbered\x00" + (4201).to_bytes(8, "big")).digest()
    seed = b"fictional-co-sys"
    expected = hashlib.sha256(
        b"selection\x00hmac-sha256-systematic/v1\x00" + population + b"systematic\x00"
        + (60).to_bytes(8, "big") + len(seed).to_bytes(8, "big") + seed
    ).hexdigest()
    assert result["selection_fingerprint"] == expected
    random = _post(client, "/v1/selection", {**body, "method": "random"}).get_json()
    assert random["algorithm"] == "sha256-counter-fisher-yates/v1"


def test_markdown_names_the_hmac_stream(client: FlaskClient) -> None:
    body = {"population": {"size": 500}, "sample_size": 5, "seed": "fictional-1"}
    text = _post(client, "/v1/selection", body, headers=MARKDOWN).get_data(as_text=True)
    method = next(line for line in text.splitlines() if line.startswith("**Method**"))
    assert "HMAC-SHA256" in method
    assert "from SHA-256" not in method


# --- point 9: one body through sizing and evaluation; names that do not collide -----------


def test_one_body_goes_through_sizing_then_evaluation(client: FlaskClient) -> None:
    body = {"tolerable_rate": 0.05, "expected_rate": 0.01, "confidence": 0.95,
            "population": {"size": 4200, "label": "Purchase orders, Q3"}}
    plan = _post(client, "/v1/sample-size", body).get_json()
    found = {**body, "sample_size": plan["sample_size"], "deviations": 2}
    result = _post(client, "/v1/evaluation", found).get_json()
    # ceil(0.01 × 93) = 1 deviation allowed by the plan.
    assert result["planned_allowed_deviations"] == plan["allowed_deviations"] == 1
    assert result["comparison_with_plan"] == "Planned to allow 1 deviation; found 2."
    assert "Planned to allow 1 deviation; found 2." in result["summary"]


def test_expected_rate_must_be_below_the_tolerable_rate_in_evaluation(
    client: FlaskClient,
) -> None:
    body = {"sample_size": 60, "deviations": 0, "tolerable_rate": 0.05, "expected_rate": 0.05}
    response = client.post("/v1/evaluation", json=body)
    assert response.status_code == 422
    assert response.mimetype == "application/problem+json"
    assert "expected_rate" in response.get_json()["errors"]


def test_interval_names_say_what_they_are(client: FlaskClient) -> None:
    evaluation = _post(client, "/v1/evaluation", {"sample_size": 60, "deviations": 1}).get_json()
    assert "confidence_interval" in evaluation and "interval" not in evaluation
    body = {"population": {"size": 4201}, "sample_size": 60, "seed": "s", "method": "systematic"}
    selection = _post(client, "/v1/selection", body).get_json()
    assert selection["sampling_interval_exact"] == "4201/60"
    assert "interval" not in selection and "interval_exact" not in selection


# --- point 10: a percentage written as a string ------------------------------------------


@pytest.mark.parametrize("value", ["5%", "5"])
def test_a_rate_written_as_a_percentage_string_gets_the_hint(
    client: FlaskClient, value: str
) -> None:
    response = client.post("/v1/sample-size", json={"tolerable_rate": value})
    assert response.status_code == 422
    (message,) = response.get_json()["errors"]["tolerable_rate"]
    assert "not a string" in message and "looks like a percentage" in message
    assert "send 0.05" in message


# --- point 12: words after deviations -----------------------------------------------------


def test_next_steps_follow_a_result_that_does_not_support_reliance(
    client: FlaskClient,
) -> None:
    failing = _post(client, "/v1/evaluation",
                    {"sample_size": 60, "deviations": 3, "tolerable_rate": 0.05}).get_json()
    assert failing["conclusion"] == "does_not_support_reliance"
    assert failing["next_steps"] == list(NEXT_STEPS)
    assert "Do not simply test more items" in failing["summary"]
    passing = _post(client, "/v1/evaluation",
                    {"sample_size": 60, "deviations": 0, "tolerable_rate": 0.05}).get_json()
    assert passing["next_steps"] == []
    assert "Next steps" not in passing["summary"]
