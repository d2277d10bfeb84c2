"""POST /v1/batch: several single requests, each answered on its own, in order."""

from __future__ import annotations

from typing import Any

import pytest
from flask.testing import FlaskClient

from service import create_app
from service.http import all_operations
from service.http.batch import OPERATIONS as BATCH_OPERATIONS
from service.settings import Settings

PATH = "/v1/batch"

GOOD = {
    "sample-size": {"tolerable_rate": 0.05, "expected_rate": 0.01},
    "evaluation": {"sample_size": 100, "deviations": 2, "tolerable_rate": 0.07},
    "selection": {"population": {"size": 500}, "sample_size": 5, "seed": "fictional-1"},
    "estimation-sample-size": {"margin": 0.05},
    "plan-curve": {"sample_size": 60, "allowed_deviations": 1},
    "monetary-sample-size": {"book_value": "2500000.00", "tolerable_misstatement": 125000},
    "monetary-selection": {"population": [{"id": "KV-1", "amount": 10.5}], "sample_size": 1,
                           "seed": "fictional-1"},
    "monetary-evaluation": {"book_value": "600000.00", "sample_size": 60},
    "plan-periodic": {"frequency": "monthly", "tolerable_rate": 0.1},
    "staged-plan": {"tolerable_rate": 0.05, "expected_rate": 0.01},
    "staged-evaluation": {
        "stages": [
            {"cumulative_sample_size": 66, "accept_if_at_most": 0, "fail_if_at_least": 2},
            {"cumulative_sample_size": 135, "accept_if_at_most": 2, "fail_if_at_least": 3}],
        "stage_reached": 1, "deviations": 0, "tolerable_rate": 0.05},
    "staged-curve": {
        "stages": [{"cumulative_sample_size": 59, "accept_if_at_most": 0, "fail_if_at_least": 1}],
        "points": 5},
    "strata-evaluation": {"strata": [
        {"label": "A", "population_size": 100, "sample_size": 20, "deviations": 0}]},
    "sequence-evaluation": {"results": [0, 0, 1, 0]},
}
EVAL = {"sample_size": 60, "deviations": 0}
SINGLE = {
    op.name: op for op in all_operations() if op.name != "batch" and not op.file_required
}


def _batch(client: FlaskClient, operations: Any) -> Any:
    return client.post(PATH, json={"operations": operations})


def _envelope_errors(response: Any) -> dict[str, list[str]]:
    assert response.status_code == 422, response.get_data(as_text=True)
    assert response.headers["Content-Type"] == "application/problem+json"
    errors: dict[str, list[str]] = response.get_json()["errors"]
    return errors


def test_every_single_operation_is_reachable_and_answers_as_its_endpoint(
    client: FlaskClient,
) -> None:
    assert set(GOOD) == set(SINGLE)
    items = [{"id": name, "operation": name, "request": body} for name, body in GOOD.items()]
    response = _batch(client, items)
    assert response.status_code == 200, response.get_data(as_text=True)
    results = response.get_json()["results"]
    for item, answer in zip(items, results, strict=True):
        single = client.post(SINGLE[item["operation"]].path, json=item["request"])
        assert answer == {"id": item["id"], "status": 200, "result": single.get_json()}


def test_description_names_every_single_operation() -> None:
    for name in SINGLE:
        assert name in BATCH_OPERATIONS[0].description


def test_mixed_items_keep_their_order_and_ids_and_fail_alone(client: FlaskClient) -> None:
    items = [
        {"id": "z-last", "operation": "sample-size", "request": {"tolerable_rate": 0.05}},
        {"id": "bad-rate", "operation": "sample-size", "request": {"tolerable_rate": 5}},
        {"id": "ok-eval", "operation": "evaluation", "request": EVAL},
        {"id": "unknown", "operation": "sample-sizes", "request": {"tolerable_rate": 0.05}},
        {"id": "not-object", "operation": "evaluation", "request": [60, 0]},
        {"id": "a-first", "operation": "plan-curve",
         "request": {"sample_size": 10, "allowed_deviations": 11}},
    ]
    response = _batch(client, items)
    assert response.status_code == 200
    results = response.get_json()["results"]
    assert [r["id"] for r in results] == [i["id"] for i in items]
    assert [r["status"] for r in results] == [200, 422, 200, 422, 422, 422]
    assert results[0]["result"]["sample_size"] == 59
    assert results[2]["result"]["upper_deviation_limit"] > 0
    assert "problem" not in results[0] and "result" not in results[1]
    bad = results[1]["problem"]
    assert bad["status"] == 422 and bad["type"] == "/problems/invalid-input"
    assert "operations[1].request.tolerable_rate" in bad["errors"]
    assert "percentage" in " ".join(bad["errors"]["operations[1].request.tolerable_rate"])
    unknown = results[3]["problem"]["errors"]
    assert list(unknown) == ["operations[3].operation"]
    assert "'sample-sizes'" in unknown["operations[3].operation"][0]
    assert "sample-size" in unknown["operations[3].operation"][0]
    assert list(results[4]["problem"]["errors"]) == ["operations[4].request"]
    assert any(key.startswith("operations[5].request.") for key in results[5]["problem"]["errors"])


def test_a_non_string_operation_name_is_that_items_error(client: FlaskClient) -> None:
    items = [
        {"id": "x", "operation": 7, "request": {}},
        {"id": "y", "operation": None, "request": {}},
    ]
    results = _batch(client, items).get_json()["results"]
    assert list(results[0]["problem"]["errors"]) == ["operations[0].operation"]
    assert "not a string" in results[0]["problem"]["detail"]
    assert list(results[1]["problem"]["errors"]) == ["operations[1].operation"]


def test_the_batch_cannot_name_itself(client: FlaskClient) -> None:
    items = [{"id": "x", "operation": "batch", "request": {"operations": []}}]
    results = _batch(client, items).get_json()["results"]
    assert list(results[0]["problem"]["errors"]) == ["operations[0].operation"]


def test_empty_batch_answers_no_results(client: FlaskClient) -> None:
    response = _batch(client, [])
    assert response.status_code == 200
    assert response.get_json() == {"results": []}


def test_duplicate_ids_refuse_the_whole_call(client: FlaskClient) -> None:
    items = [
        {"id": "same", "operation": "sample-size", "request": {"tolerable_rate": 0.05}},
        {"id": "other", "operation": "sample-size", "request": {"tolerable_rate": 0.05}},
        {"id": "same", "operation": "sample-size", "request": {"tolerable_rate": 0.06}},
    ]
    errors = _envelope_errors(_batch(client, items))
    assert list(errors) == ["operations[2].id"]
    assert "operations[0]" in errors["operations[2].id"][0]


@pytest.mark.parametrize(
    ("body", "field", "fragment"),
    [
        ([{"operations": []}], "body", "JSON object"),
        ({}, "operations", "required"),
        ({"operations": {"id": "a"}}, "operations", "list"),
        ({"operations": "all"}, "operations", "list"),
        ({"operations": [5]}, "operations[0]", "JSON object"),
        ({"operations": [{"id": 5, "operation": "evaluation", "request": {}}]},
         "operations[0].id", "string"),
        ({"operations": [{"id": "", "operation": "evaluation", "request": {}}]},
         "operations[0].id", "from 1 to 200 characters"),
        ({"operations": [{"id": "x" * 201, "operation": "evaluation", "request": {}}]},
         "operations[0].id", "from 1 to 200 characters"),
        ({"operations": [{"operation": "evaluation", "request": {}}]}, "operations[0].id",
         "required"),
        ({"operations": [{"id": "a", "request": {}}]}, "operations[0].operation", "required"),
        ({"operations": [{"id": "a", "operation": "evaluation"}]}, "operations[0].request",
         "required"),
        ({"operations": [{"id": "a", "operation": "evaluation", "request": {}, "x": 1}]},
         "operations[0].x", "not a field"),
        ({"operations": [], "extra": True}, "extra", "not a field"),
    ],
)
def test_malformed_envelope_is_422_for_the_whole_call(
    client: FlaskClient, body: Any, field: str, fragment: str
) -> None:
    errors = _envelope_errors(client.post(PATH, json=body))
    assert field in errors, errors
    assert fragment in " ".join(errors[field])


def test_more_operations_than_allowed_refuse_the_whole_call() -> None:
    small = create_app(Settings(max_batch_operations=3)).test_client()
    item = {"operation": "evaluation", "request": EVAL}
    assert _batch(small, [{"id": str(i), **item} for i in range(3)]).status_code == 200
    errors = _envelope_errors(_batch(small, [{"id": str(i), **item} for i in range(4)]))
    assert "at most 3" in errors["operations"][0]


def test_default_allows_1000_operations_and_not_1001(client: FlaskClient) -> None:
    item = {"operation": "evaluation", "request": EVAL}
    errors = _envelope_errors(_batch(client, [{"id": str(i), **item} for i in range(1001)]))
    assert "1,001 operations" in errors["operations"][0]
    assert "at most 1,000" in errors["operations"][0]


def test_total_work_is_bounded() -> None:
    small = create_app(Settings(max_batch_work=100)).test_client()

    def selection(i: int, size: int) -> dict[str, Any]:
        request = {"population": {"size": 1000}, "sample_size": size, "seed": "s"}
        return {"id": str(i), "operation": "selection", "request": request}

    assert _batch(small, [selection(0, 60), selection(1, 40)]).status_code == 200
    errors = _envelope_errors(_batch(small, [selection(0, 60), selection(1, 41)]))
    assert "101 work units" in errors["operations"][0]
    listed = {"population": {"items": [f"A{i}" for i in range(99)]}, "sample_size": 2}
    errors = _envelope_errors(
        _batch(small, [{"id": "l", "operation": "selection", "request": listed}])
    )
    assert "101 work units" in errors["operations"][0]


def test_items_keep_the_caps_of_single_calls() -> None:
    small = create_app(Settings(max_items=10)).test_client()
    request = {"population": {"items": [f"A{i}" for i in range(11)]}, "sample_size": 2}
    items = [{"id": "big", "operation": "selection", "request": request}]
    answer = _batch(small, items).get_json()["results"][0]
    assert answer["status"] == 422
    assert "operations[0].request.population.items" in answer["problem"]["errors"]


def test_batch_takes_bodies_up_to_the_list_body_limit() -> None:
    limited = create_app(Settings(max_body_bytes=256, max_list_body_bytes=100_000)).test_client()
    items = [
        {"id": f"item-{i}", "operation": "evaluation", "request": EVAL}
        for i in range(20)
    ]
    assert _batch(limited, items).status_code == 200
    tiny = create_app(Settings(max_body_bytes=256, max_list_body_bytes=512)).test_client()
    response = _batch(tiny, items)
    assert response.status_code == 413
    assert response.headers["Content-Type"] == "application/problem+json"


def test_a_null_request_is_that_items_error(client: FlaskClient) -> None:
    items = [
        {"id": "n", "operation": "evaluation", "request": None},
        {"id": "ok", "operation": "evaluation", "request": EVAL},
    ]
    results = _batch(client, items).get_json()["results"]
    assert results[0]["status"] == 422
    assert list(results[0]["problem"]["errors"]) == ["operations[0].request"]
    assert results[1]["status"] == 200


def test_markdown_lists_each_items_status(client: FlaskClient) -> None:
    items = [
        {"id": "good", "operation": "evaluation", "request": EVAL},
        {"id": "bad", "operation": "evaluation", "request": {"sample_size": 0, "deviations": 0}},
    ]
    response = client.post(PATH, json={"operations": items}, headers={"Accept": "text/markdown"})
    assert response.status_code == 200
    text = response.get_data(as_text=True)
    assert "| 1 | good | evaluation | 200 |" in text and "| 2 | bad | evaluation | 422 |" in text


def test_batch_markdown_has_an_overview_and_one_complete_block_per_operation(
    client: FlaskClient,
) -> None:
    items = [
        {"id": "purchase approvals", "operation": "sample-size",
         "request": {"tolerable_rate": 0.05, "population": {"size": 4200}}},
        {"id": "three-way match", "operation": "evaluation",
         "request": {"sample_size": 60, "deviations": 2, "tolerable_rate": 0.05}},
        {"id": "picks", "operation": "selection",
         "request": {"population": {"size": 300}, "sample_size": 4, "seed": "fictional-4"}},
    ]
    json_answer = client.post(PATH, json={"operations": items}).get_json()["results"]
    text = client.post(
        PATH, json={"operations": items}, headers={"Accept": "text/markdown"}
    ).get_data(as_text=True)
    plan, evaluation, picks = (answer["result"] for answer in json_answer)
    overview = text.split("\n---\n")[0]
    assert f"sample size {plan['sample_size']}" in overview
    assert "does not support reliance on the control as tested" in overview
    # One block per operation, in order, each with its summary, inputs and answer.
    assert text.count("**Inputs**") == 3 and text.count("**Answer**") == 3
    assert text.index("**1. purchase approvals**") < text.index("**2. three-way match**")
    assert "| sample\\_size | " + str(plan["sample_size"]) + " |" in text
    assert "**Next steps**" in text and evaluation["next_steps"]
    for draw, item in enumerate(picks["items"], start=1):
        assert f"| {draw} | {item} |" in text
    assert text.rstrip().endswith("apply to the engagement.")
    assert text.count("> These figures support") == 1


def test_answer_matches_the_documented_schema(client: FlaskClient) -> None:
    import yaml
    from openapi_schema_validator import OAS31Validator
    from referencing import Registry, Resource
    from referencing.jsonschema import DRAFT202012

    from service.web.openapi import build_yaml

    spec = yaml.safe_load(build_yaml())
    registry: Registry[Any] = Registry().with_resource(
        "urn:spec", Resource.from_contents(spec, default_specification=DRAFT202012)
    )
    validator = OAS31Validator({"$ref": "urn:spec#/components/schemas/Batch"}, registry=registry)
    items = [
        {"id": "good", "operation": "evaluation", "request": EVAL},
        {"id": "bad", "operation": "nothing", "request": {}},
    ]
    validator.validate(_batch(client, items).get_json())
    assert not validator.is_valid({"results": [{"id": 1, "status": 200}]})


def test_an_unexpected_failure_fails_only_its_item(
    client: FlaskClient, monkeypatch: pytest.MonkeyPatch
) -> None:
    import dataclasses

    import service.http.batch as batch_module

    def boom(inputs: dict[str, Any], settings: Settings) -> Any:
        raise RuntimeError("unexpected")

    operations = dict(SINGLE)
    operations["evaluation"] = dataclasses.replace(SINGLE["evaluation"], run=boom)
    monkeypatch.setattr(batch_module, "single_operations", lambda: operations)
    items = [
        {"id": "broken", "operation": "evaluation", "request": EVAL},
        {"id": "fine", "operation": "sample-size", "request": {"tolerable_rate": 0.05}},
    ]
    response = _batch(client, items)
    assert response.status_code == 200
    broken, fine = response.get_json()["results"]
    assert broken["status"] == 500 and broken["problem"]["status"] == 500
    assert "unexpected" not in broken["problem"]["detail"]
    assert fine["status"] == 200
