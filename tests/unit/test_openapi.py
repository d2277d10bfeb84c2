"""The OpenAPI 3.1 contract: committed, valid, served, complete, and true to the responses."""

from __future__ import annotations

import json
import tomllib
from pathlib import Path
from typing import Any

import jsonschema
import pytest
import yaml
from openapi_schema_validator import OAS31Validator
from openapi_spec_validator import validate
from referencing import Registry, Resource
from referencing.jsonschema import DRAFT202012

from service.http import all_operations
from service.web.openapi import CLIENT_COPY, build_json, build_yaml

ROOT = Path(__file__).resolve().parents[2]
SPEC_FILE = ROOT / "openapi.yaml"
SPEC_URI = "urn:attribute-sampling:openapi"
PROBLEM_STATUSES = ("400", "413", "415", "422")


@pytest.fixture(scope="module")
def spec() -> dict[str, Any]:
    document = yaml.safe_load(build_yaml())
    assert isinstance(document, dict)
    return document


def _validator(spec: dict[str, Any], component: str) -> OAS31Validator:
    """A validator for ``#/components/schemas/<component>``, its $refs resolved in ``spec``."""
    resource = Resource.from_contents(spec, default_specification=DRAFT202012)
    registry: Registry[Any] = Registry().with_resource(SPEC_URI, resource)
    return OAS31Validator(
        {"$ref": f"{SPEC_URI}#/components/schemas/{component}"}, registry=registry
    )


def _response_component(spec: dict[str, Any], path: str, status: str, media: str) -> str:
    operation = spec["paths"][path]["post"]
    ref = operation["responses"][status]["content"][media]["schema"]["$ref"]
    prefix = "#/components/schemas/"
    assert ref.startswith(prefix)
    return str(ref[len(prefix):])


# --- the document itself ----------------------------------------------------------


def test_committed_document_is_up_to_date() -> None:
    assert SPEC_FILE.exists(), "openapi.yaml is missing: run `make spec`"
    assert SPEC_FILE.read_text(encoding="utf-8") == build_yaml(), (
        "openapi.yaml differs from the schemas: run `make spec` and commit the result"
    )


def test_the_client_copy_is_up_to_date_and_the_same_document() -> None:
    # sampling_client/openapi.json is what the command builds its subcommands from.
    assert CLIENT_COPY.exists(), "sampling_client/openapi.json is missing: run `make spec`"
    assert CLIENT_COPY.read_text(encoding="utf-8") == build_json(), (
        "sampling_client/openapi.json differs from the schemas: run `make spec` and commit it"
    )
    committed = yaml.safe_load(SPEC_FILE.read_text(encoding="utf-8"))
    assert json.loads(CLIENT_COPY.read_text(encoding="utf-8")) == committed


def test_the_client_copy_is_package_data() -> None:
    # The command reads it through importlib.resources, from a wheel as from the source tree.
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    assert CLIENT_COPY.name in project["tool"]["setuptools"]["package-data"]["sampling_client"]


def test_generation_is_deterministic() -> None:
    assert build_yaml() == build_yaml()


def test_document_is_valid_openapi_3_1(spec: dict[str, Any]) -> None:
    assert spec["openapi"].startswith("3.1")
    validate(spec)


def test_served_document_is_the_generated_one(client: Any) -> None:
    response = client.get("/openapi.yaml")
    assert response.status_code == 200
    assert response.mimetype == "application/yaml"
    assert response.get_data(as_text=True) == build_yaml()


def test_every_operation_is_documented_with_its_statuses(spec: dict[str, Any]) -> None:
    operations = all_operations()
    assert operations
    for operation in operations:
        documented = spec["paths"][operation.path]["post"]
        assert documented["operationId"] == operation.name
        assert "requestBody" in documented
        responses = documented["responses"]
        for status in ("200", *PROBLEM_STATUSES):
            assert status in responses, f"{operation.path}: {status} is not documented"
        assert "application/json" in responses["200"]["content"]
        for status in PROBLEM_STATUSES:
            assert "application/problem+json" in responses[status]["content"]


def test_service_endpoints_are_documented(spec: dict[str, Any]) -> None:
    assert "get" in spec["paths"]["/v1/health"]
    assert "get" in spec["paths"]["/openapi.yaml"]


# --- responses conform to the document ----------------------------------------------

HAPPY = [
    ("/v1/sample-size", {"tolerable_rate": 0.05}),
    ("/v1/sample-size", {"tolerable_rate": 0.05, "expected_rate": 0.01, "confidence": 0.9}),
    ("/v1/sample-size", {"tolerable_rate": 0.05, "population": {"size": 600}}),
    ("/v1/sample-size",
     {"tolerable_rate": 0.05, "expected_rate": 0.01,
      "population": {"size": 4200, "label": "Purchase orders, Northwind Trading, Q3"}}),
    ("/v1/sample-size", {"tolerable_rate": 0.06, "expected_rate": 0.01, "method": "poisson"}),
    ("/v1/sample-size", {"tolerable_rate": 0.05, "method": "binomial", "population": {"size": 90}}),
    ("/v1/evaluation", {"sample_size": 100, "deviations": 2}),
    ("/v1/evaluation", {"sample_size": 100, "deviations": 2, "tolerable_rate": 0.07}),
    ("/v1/evaluation",
     {"sample_size": 100, "deviations": 2, "tolerable_rate": 0.05,
      "population": {"size": 1000, "label": "PO-41000 to PO-41999"}}),
    ("/v1/evaluation", {"sample_size": 30, "deviations": 30, "method": "poisson"}),
    ("/v1/evaluation", {"sample_size": 50, "deviations": 0, "population": {"size": 50}}),
    ("/v1/sample-size", {"attributes": [{"name": "approval", "tolerable_rate": 0.05},
                                        {"name": "amount", "tolerable_rate": 0.06,
                                         "expected_rate": 0.01}]}),
    ("/v1/sample-size", {"tolerable_rate": 0.05, "expected_rate": 0.01,
                         "underreliance_risk": 0.1}),
    ("/v1/evaluation", {"sample_size": 60, "population": {"size": 900},
                        "attributes": [{"name": "approval", "deviations": 0,
                                        "tolerable_rate": 0.05}]}),
    ("/v1/plans/periodic", {"frequency": "quarterly", "tolerable_rate": 0.2}),
    ("/v1/sample-size", {"tolerable_rate": 0.05, "prior": {"type": "uniform"}}),
]


@pytest.mark.parametrize(("path", "body"), HAPPY)
def test_success_responses_match_their_schema(
    client: Any, spec: dict[str, Any], path: str, body: dict[str, Any]
) -> None:
    response = client.post(path, json=body)
    assert response.status_code == 200, response.get_data(as_text=True)
    validator = _validator(spec, _response_component(spec, path, "200", "application/json"))
    validator.validate(json.loads(response.get_data(as_text=True)))


@pytest.mark.parametrize(
    ("path", "data", "status"),
    [
        ("/v1/sample-size", "{", "400"),
        ("/v1/sample-size", '{"tolerable_rate": 5}', "422"),
        ("/v1/evaluation", '{"sample_size": 10, "deviations": 11, "x": 1}', "422"),
    ],
)
def test_problem_responses_match_their_schema(
    client: Any, spec: dict[str, Any], path: str, data: str, status: str
) -> None:
    response = client.post(path, data=data, content_type="application/json")
    assert str(response.status_code) == status
    component = _response_component(spec, path, status, "application/problem+json")
    _validator(spec, component).validate(json.loads(response.get_data(as_text=True)))


def test_health_matches_its_schema(client: Any, spec: dict[str, Any]) -> None:
    response = client.get("/v1/health")
    assert response.status_code == 200
    _validator(spec, "Health").validate(response.get_json())


def test_schema_check_rejects_a_response_that_breaks_the_contract(
    client: Any, spec: dict[str, Any]
) -> None:
    # The check above is only worth something if it can fail: a plan with a missing
    # required field, an extra field or a mistyped count must be rejected.
    plan = client.post("/v1/sample-size", json={"tolerable_rate": 0.05}).get_json()
    validator = _validator(spec, "SampleSizePlan")
    validator.validate(plan)
    broken = [
        {k: v for k, v in plan.items() if k != "sample_size"},
        {**plan, "unexpected": 1},
        {**plan, "sample_size": "59"},
        {**plan, "population_size": 1.5},
    ]
    for document in broken:
        with pytest.raises(jsonschema.ValidationError):
            validator.validate(document)


def _one_ofs(node: Any) -> list[list[Any]]:
    found = []
    if isinstance(node, dict):
        if "oneOf" in node:
            found.append(node["oneOf"])
        for value in node.values():
            found.extend(_one_ofs(value))
    elif isinstance(node, list):
        for value in node:
            found.extend(_one_ofs(value))
    return found


def test_no_one_of_names_the_same_schema_twice(spec: dict[str, Any]) -> None:
    # An answer valid under a schema listed twice is valid under two branches, which
    # oneOf forbids (JSON Schema 2020-12, 10.2.1.3): every answer would break the contract.
    for branches in _one_ofs(spec):
        texts = [json.dumps(branch, sort_keys=True) for branch in branches]
        assert len(texts) == len(set(texts)), texts
