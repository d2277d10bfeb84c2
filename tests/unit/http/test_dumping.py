"""The compiled dumpers write, byte for byte, what the response schemas' own dump writes."""

from __future__ import annotations

import json
import random
from pathlib import Path
from typing import Any

import pytest

from service.http import all_operations, dumping
from service.http.operations import Operation
from service.settings import Settings
from service.web import jsonio
from tests.unit.http.test_markdown_api import EXAMPLES

BENCH = Path(__file__).resolve().parents[3] / "bench"


def _results(operation: Operation, bodies: list[dict[str, Any]]) -> list[Any]:
    settings = Settings()
    found = []
    for body in bodies:
        inputs = operation.request_schema.load(body)
        if operation.accepts_file:
            inputs = {**inputs, "upload": None, "upload_name": ""}
        found.append(operation.run(inputs, settings))
    return found


def _same(operation: Operation, result: Any) -> None:
    schema = operation.schema_for(result)
    expected = jsonio.dumps(schema.dump(result))
    assert jsonio.dumps(dumping.dumper(schema)(result)) == expected


@pytest.mark.parametrize(
    "operation", [op for op in all_operations() if op.name in EXAMPLES], ids=lambda op: op.name
)
def test_each_operations_example_is_dumped_as_by_its_schema(operation: Operation) -> None:
    for result in _results(operation, [EXAMPLES[operation.name][0]]):
        _same(operation, result)


def _grid(name: str, count: int) -> list[dict[str, Any]]:
    """Bodies from the benchmark's grid of realistic requests (bench/echo_compare.py)."""
    import sys

    sys.path.insert(0, str(BENCH))
    try:
        import echo_compare
    finally:
        sys.path.remove(str(BENCH))
    grid = echo_compare._sizing_grid if name == "sizing" else echo_compare._evaluation_grid
    return [json.loads(body) for body in grid(random.Random(11), count)]


@pytest.mark.parametrize(("path", "grid"), [("/v1/sample-size", "sizing"),
                                            ("/v1/evaluation", "evaluation")])
def test_many_sizings_and_evaluations_are_dumped_as_by_their_schemas(path: str, grid: str) -> None:
    operation = next(op for op in all_operations() if op.path == path)
    for result in _results(operation, _grid(grid, 150)):
        _same(operation, result)


OTHER_BODIES = {
    "/v1/sample-size": [
        {"tolerable_rate": 0.05, "expected_rate": 0.0, "method": "binomial"},
        {"tolerable_rate": 0.05, "population": {"size": 40}},
        {"tolerable_rate": 0.06, "expected_rate": 0.01, "confidence": 0.9,
         "prior": {"type": "previous_sample", "sample_size": 60, "deviations": 0,
                   "weight": 0.5}},
    ],
    "/v1/evaluation": [
        {"sample_size": 60, "deviations": 0},
        {"sample_size": 40, "deviations": 40, "population": {"size": 40}},
        {"sample_size": 60, "deviations": 2, "tolerable_rate": 0.05, "expected_rate": 0.01,
         "method": "poisson"},
    ],
}


@pytest.mark.parametrize("path", sorted(OTHER_BODIES))
def test_answers_with_absent_and_optional_fields_are_dumped_alike(path: str) -> None:
    operation = next(op for op in all_operations() if op.path == path)
    for result in _results(operation, OTHER_BODIES[path]):
        _same(operation, result)
