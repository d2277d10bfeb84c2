"""Accept: text/markdown on every result endpoint: the ticket-ready block."""

from __future__ import annotations

import hashlib
import json
from typing import Any

import pytest
from flask.testing import FlaskClient

from service.http import all_operations
from service.http.markdown import escape
from service.version import VERSION

CAUTION = (
    "These figures support, and do not replace, professional judgement and the "
    "auditing standards and methodology that apply to the engagement."
)
MARKDOWN = {"Accept": "text/markdown"}

# One ordinary request per operation, with the JSON field whose value the block must show.
EXAMPLES: dict[str, tuple[dict[str, Any], str]] = {
    "sample-size": (
        {"tolerable_rate": 0.05, "expected_rate": 0.01, "population": {"size": 4200}},
        "sample_size",
    ),
    "evaluation": ({"sample_size": 100, "deviations": 2, "tolerable_rate": 0.07},
                   "upper_deviation_limit"),
    "selection": ({"population": {"size": 500}, "sample_size": 5, "seed": "fictional-1"},
                  "selection_fingerprint"),
    "estimation-sample-size": ({"margin": 0.02, "confidence": 0.9}, "recommended"),
    "plan-curve": ({"sample_size": 60, "allowed_deviations": 1, "tolerable_rate": 0.05},
                   "risk_of_overreliance"),
    "monetary-sample-size": ({"book_value": "2500000.00", "tolerable_misstatement": 125000},
                             "sample_size"),
    "monetary-selection": ({"population": [{"id": "KV-1", "amount": "10.00"},
                                           {"id": "KV-2", "amount": "12.00"}],
                            "sample_size": 1, "seed": "fictional-1"},
                           "selection_fingerprint"),
    "monetary-evaluation": ({"book_value": "600000.00", "sample_size": 60}, "sample_size"),
    "plan-periodic": ({"frequency": "weekly", "tolerable_rate": 0.1},
                      "tolerable_deviant_items"),
    "staged-plan": ({"tolerable_rate": 0.05, "expected_rate": 0.01}, "risk_of_overreliance"),
    "staged-evaluation": (
        {"stages": [
            {"cumulative_sample_size": 66, "accept_if_at_most": 0, "fail_if_at_least": 2},
            {"cumulative_sample_size": 135, "accept_if_at_most": 2, "fail_if_at_least": 3}],
         "stage_reached": 2, "deviations": 2, "tolerable_rate": 0.05},
        "plan_risk_of_overreliance",
    ),
    "staged-curve": (
        {"stages": [
            {"cumulative_sample_size": 66, "accept_if_at_most": 0, "fail_if_at_least": 2},
            {"cumulative_sample_size": 135, "accept_if_at_most": 2, "fail_if_at_least": 3}],
         "tolerable_rate": 0.05, "points": 5},
        "risk_of_overreliance",
    ),
    "strata-evaluation": (
        {"strata": [{"label": "Plant A", "population_size": 1200, "sample_size": 40,
                     "deviations": 0},
                    {"label": "Plant B", "population_size": 800, "sample_size": 30,
                     "deviations": 1}], "tolerable_rate": 0.1},
        "upper_deviation_limit",
    ),
    "sequence-evaluation": ({"results": [False] * 30 + [True] + [False] * 69,
                             "tolerable_rate": 0.2}, "upper_deviation_limit"),
}


def _shown(name: str, value: Any) -> str:
    """How the block shows an answer: a rate as a two-decimal percentage, else as is."""
    if isinstance(value, float):
        percent = f"{value * 100:.2f}".rstrip("0").rstrip(".")
        return escape(f"{percent}%")
    return escape(str(value))


def _canonical_sha256(payload: Any) -> str:
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _operations() -> list[Any]:
    # Endpoints that need an uploaded file have their Markdown checked with an upload, in
    # test_populations_api.py.
    return [op for op in all_operations() if op.name != "batch" and not op.file_required]


def test_every_operation_has_an_example_here() -> None:
    assert {op.name for op in _operations()} <= set(EXAMPLES)


@pytest.mark.parametrize("operation", _operations(), ids=lambda op: op.name)
def test_markdown_block_for_each_endpoint(client: FlaskClient, operation: Any) -> None:
    body, answer_field = EXAMPLES[operation.name]
    document = client.post(operation.path, json=body).get_json()
    response = client.post(operation.path, json=body, headers=MARKDOWN)
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.headers["Content-Type"] == "text/markdown; charset=utf-8"
    assert "Accept" in response.headers["Vary"]
    text = response.get_data(as_text=True)
    assert text.startswith(f"### {operation.summary.split()[0]}")
    answer = document[answer_field]
    shown_name = answer_field.replace("_", chr(92) + "_")
    assert f"| {shown_name} | {_shown(answer_field, answer)} |" in text
    # The summary sentence follows the heading, without its caution (which closes the block).
    summary = document["summary"].removesuffix(CAUTION).strip()
    assert text.splitlines()[2] == escape(summary, limit=None)
    assert "**Inputs**" in text and "**Answer**" in text and "**Method**: " in text
    assert f"Service version: `{VERSION}`" in text
    assert f"`{_canonical_sha256(body)}`" in text
    assert text.rstrip().endswith(f"> {CAUTION}")


def test_inputs_are_listed_by_dotted_path(client: FlaskClient) -> None:
    body, _ = EXAMPLES["sample-size"]
    text = client.post("/v1/sample-size", json=body, headers=MARKDOWN).get_data(as_text=True)
    assert "| population\\.size | 4200 |" in text
    assert "| tolerable\\_rate | 0\\.05 (5%) |" in text
    assert "hypergeometric model; hypergeometric distribution; Wright (1991)" in text


def test_fingerprint_is_stable_across_key_order_and_changes_with_a_value(
    client: FlaskClient,
) -> None:
    one = '{"tolerable_rate": 0.05, "population": {"size": 600, "label": "Q3"}}'
    two = '{"population":{"label":"Q3","size":600},\n "tolerable_rate":5e-2}'
    other = '{"tolerable_rate": 0.05, "population": {"size": 601, "label": "Q3"}}'
    texts = [
        client.post("/v1/sample-size", data=data, content_type="application/json",
                    headers=MARKDOWN).get_data(as_text=True)
        for data in (one, two, other)
    ]
    fingerprint = _canonical_sha256(json.loads(one))
    assert f"`{fingerprint}`" in texts[0]
    assert f"`{fingerprint}`" in texts[1]
    assert fingerprint not in texts[2]


def test_caller_text_cannot_add_markdown_structure(client: FlaskClient) -> None:
    label = "POs | Q3\n### <img src=x> [link](https://example.test) *bold*"
    body = {"tolerable_rate": 0.05, "population": {"size": 600, "label": label}}
    text = client.post("/v1/sample-size", json=body, headers=MARKDOWN).get_data(as_text=True)
    row = next(line for line in text.splitlines() if line.startswith("| population\\.label"))
    assert row == (
        "| population\\.label | POs \\| Q3 \\#\\#\\# \\<img src=x\\> \\[link\\]"
        "(https\\://example\\.test) \\*bold\\* |"
    )
    assert text.count("### ") == 1


def test_selection_block_lists_the_population_and_every_selected_item(
    client: FlaskClient,
) -> None:
    items = [f"INV-{i:05d}" for i in range(200)]
    body = {"population": {"items": items}, "sample_size": 30, "seed": "fictional-2"}
    document = client.post("/v1/selection", json=body).get_json()
    text = client.post("/v1/selection", json=body, headers=MARKDOWN).get_data(as_text=True)
    assert "list of" not in text
    assert "| population\\.items | 200 values, listed below |" in text
    listed = next(line for line in text.splitlines() if line.startswith("population\\.items (200)"))
    assert listed.count("INV") == 200
    assert "**Selected items** (30, in draw order)" in text
    for draw, (item, position) in enumerate(
        zip(document["items"], document["positions"], strict=True), start=1
    ):
        assert f"| {draw} | {escape(item)} | {position} |" in text
    assert f"`{document['selection_fingerprint']}`" in text or document[
        "selection_fingerprint"
    ] in text


def test_ranges_and_exclusions_are_listed(client: FlaskClient) -> None:
    body = {
        "population": {
            "ranges": [{"first": 1001, "last": 1500}, {"first": 2001, "last": 2100}],
            "exclude": [1007, 2050],
        },
        "sample_size": 3,
        "seed": "fictional-3",
    }
    response = client.post("/v1/selection", json=body, headers=MARKDOWN)
    assert response.status_code == 200, response.get_data(as_text=True)
    text = response.get_data(as_text=True)
    assert "population\\.ranges (2): first 1001, last 1500; first 2001, last 2100" in text
    assert "population\\.exclude (2): 1007; 2050" in text


def test_evaluation_block_reads_in_words(client: FlaskClient) -> None:
    body = {"sample_size": 104, "deviations": 3, "tolerable_rate": 0.05}
    document = client.post("/v1/evaluation", json=body).get_json()
    text = client.post("/v1/evaluation", json=body, headers=MARKDOWN).get_data(as_text=True)
    assert document["conclusion"] == "does_not_support_reliance"
    assert "does_not_support" not in text and "does\\_not" not in text
    assert "does not support reliance on the control as tested" in text
    # No float printed to 17 digits: every rate is a rounded percentage.
    assert repr(document["upper_deviation_limit"]) not in text
    assert "**Next steps**" in text and len(document["next_steps"]) >= 3


def test_q_values_choose_markdown_when_preferred(client: FlaskClient) -> None:
    body = EXAMPLES["evaluation"][0]
    for accept, expected in [
        ("application/json;q=0.5, text/markdown", "text/markdown"),
        ("text/markdown;q=0.9, application/json;q=0.8", "text/markdown"),
        ("text/markdown;q=0.4, application/json;q=0.8", "application/json"),
        ("text/*", "text/markdown"),
        ("*/*", "application/json"),
        ("text/markdown, application/json", "application/json"),  # a tie goes to JSON
    ]:
        response = client.post("/v1/evaluation", json=body, headers={"Accept": accept})
        assert response.status_code == 200
        assert response.mimetype == expected, accept


def test_svg_and_csv_still_served_beside_markdown(client: FlaskClient) -> None:
    curve = EXAMPLES["plan-curve"][0]
    svg = client.post("/v1/plans/curve", json=curve, headers={"Accept": "image/svg+xml"})
    assert svg.mimetype == "image/svg+xml"
    selection = EXAMPLES["selection"][0]
    csv = client.post("/v1/selection", json=selection, headers={"Accept": "text/csv"})
    assert csv.mimetype == "text/csv"


@pytest.mark.parametrize("operation", _operations(), ids=lambda op: op.name)
def test_xml_is_not_acceptable(client: FlaskClient, operation: Any) -> None:
    body = EXAMPLES[operation.name][0]
    response = client.post(operation.path, json=body, headers={"Accept": "application/xml"})
    assert response.status_code == 406
    assert response.headers["Content-Type"] == "application/problem+json"
    assert "text/markdown" in response.get_json()["detail"]


def test_bad_input_with_markdown_accepted_is_still_problem_json(client: FlaskClient) -> None:
    response = client.post("/v1/sample-size", json={"tolerable_rate": 5}, headers=MARKDOWN)
    assert response.status_code == 422
    assert response.headers["Content-Type"] == "application/problem+json"
    assert "tolerable_rate" in response.get_json()["errors"]


def test_spec_documents_markdown_for_every_operation() -> None:
    import yaml

    from service.web.openapi import build_yaml

    spec = yaml.safe_load(build_yaml())
    for operation in _operations():
        content = spec["paths"][operation.path]["post"]["responses"]["200"]["content"]
        assert "text/markdown" in content, operation.path


def test_defaults_the_service_applied_are_listed_as_inputs(client: FlaskClient) -> None:
    text = client.post("/v1/sample-size", json={"tolerable_rate": 0.05}, headers=MARKDOWN)
    lines = text.get_data(as_text=True).splitlines()
    assert "| confidence (default) | 0\\.95 (95%) |" in lines
    assert "| expected\\_rate (default) | 0\\.0 (0%) |" in lines
    assert "| method (default) | binomial |" in lines
    sent = client.post(
        "/v1/sample-size", json={"tolerable_rate": 0.05, "confidence": 0.9}, headers=MARKDOWN
    ).get_data(as_text=True)
    assert "| confidence | 0\\.9 (90%) |" in sent and "confidence (default)" not in sent
