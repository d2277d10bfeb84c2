"""The cost model: requests above the budget are refused before any work, naming inputs."""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import pytest
from flask.testing import FlaskClient
from marshmallow import ValidationError

from service import create_app
from service.http import all_operations
from service.http.costs import ESTIMATORS, estimate
from service.settings import Settings

README = Path(__file__).resolve().parents[3] / "README.md"
# The estimation that took 0.4 s in one call and 17 s as forty in one batch.
HOSTILE_ESTIMATION = {"margin": 0.0039, "confidence": 0.999999, "methods": ["exact"]}


def test_every_operation_has_a_cost_estimator() -> None:
    assert {op.name for op in all_operations()} <= set(ESTIMATORS)


def test_forty_hostile_estimations_in_one_batch_are_refused_as_a_whole(
    client: FlaskClient,
) -> None:
    operations = [
        {"id": f"e{i}", "operation": "estimation-sample-size", "request": HOSTILE_ESTIMATION}
        for i in range(40)
    ]
    response = client.post("/v1/batch", json={"operations": operations})
    assert response.status_code == 422
    assert response.mimetype == "application/problem+json"
    problem = response.get_json()
    assert problem["type"] == "/problems/too-much-work"
    assert list(problem["errors"]) == ["operations"]
    assert "operations[39]" in problem["detail"] and "2,000,000" in problem["detail"]


def test_one_hostile_estimation_alone_is_within_the_budget(client: FlaskClient) -> None:
    response = client.post("/v1/estimation/sample-size", json=HOSTILE_ESTIMATION)
    assert response.status_code == 200


def test_exact_sizing_without_replacement_of_a_huge_population_is_refused(
    client: FlaskClient,
) -> None:
    # Computed for 4.7 s before the cost model (margin 0.002 about a 10% rate in 10^9).
    body = {"margin": 0.002, "anticipated_rate": 0.1, "population": {"size": 10**9},
            "methods": ["exact"]}
    response = client.post("/v1/estimation/sample-size", json=body)
    assert response.status_code == 422
    problem = response.get_json()
    assert problem["type"] == "/problems/too-much-work"
    assert {"margin", "population.size"} <= set(problem["errors"])


def test_the_budget_is_a_setting() -> None:
    tight = create_app(Settings(max_request_cost=5_000)).test_client()
    small = tight.post("/v1/sample-size", json={"tolerable_rate": 0.05})
    large = tight.post("/v1/selection", json={
        "population": {"size": 10**6}, "sample_size": 5_000, "seed": "cost-test"})
    assert small.status_code == 200
    assert large.status_code == 422
    assert list(large.get_json()["errors"]) == ["sample_size"]


def test_a_batch_costs_the_sum_of_its_operations() -> None:
    body = {"population": {"size": 10**6}, "sample_size": 1_000, "seed": "cost-test"}
    one = estimate("selection", _load("selection", body))
    budget = 3 * one.units
    client = create_app(Settings(max_request_cost=budget)).test_client()

    def batch(count: int) -> int:
        items = [{"id": str(i), "operation": "selection", "request": body} for i in range(count)]
        return client.post("/v1/batch", json={"operations": items}).status_code

    assert batch(3) == 200
    assert batch(4) == 422


def _load(name: str, body: dict[str, Any]) -> Any:
    operation = next(op for op in all_operations() if op.name == name)
    return operation.request_schema.load(body)


def _readme_requests() -> list[tuple[str, dict[str, Any]]]:
    """Every ``curl ... /v1/... -d '{...}'`` example of the README with a JSON body, but
    those shown being refused for their cost."""
    text = README.read_text(encoding="utf-8")
    found = []
    for match in re.finditer(r"curl [^\n]*?(/v1/[a-z/-]+)[^`]*?-d '(\{[^']*\})'", text):
        path, body = match.group(1), match.group(2)
        answer = text[match.end():].split("```", 3)[2] if text.count("```") else ""
        if "/problems/too-much-work" in answer:
            continue
        try:
            found.append((path, json.loads(body)))
        except json.JSONDecodeError:
            continue
    return found


README_REQUESTS = _readme_requests()


def test_the_readme_has_examples_to_cost() -> None:
    assert len(README_REQUESTS) >= 20


@pytest.mark.parametrize(("path", "body"), README_REQUESTS)
def test_every_readme_example_costs_under_a_tenth_of_the_budget(
    path: str, body: dict[str, Any]
) -> None:
    operation = next((op for op in all_operations() if op.path == path), None)
    if operation is None or operation.name == "batch":
        pytest.skip(f"{path} is costed through its operations")
    try:
        inputs = operation.request_schema.load(body)
    except ValidationError:
        pytest.skip("an example of invalid input")
    if operation.accepts_file:
        inputs = {**inputs, "upload": None, "upload_name": ""}
    assert estimate(operation.name, inputs).units < Settings().max_request_cost // 10
