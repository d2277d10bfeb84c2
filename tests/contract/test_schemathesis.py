"""Contract fuzzing: generated requests against the spec the service publishes.

Every POST operation in ``/openapi.yaml`` gets requests that fit its request schema
(positive) and requests that break it (negative), sent through the WSGI application.
Each answer must not be a server error, must use a status code and a media type the
spec documents for the operation, and must match the documented response schema.
Negative requests must also be refused with a 4xx.

The run is deterministic (derandomised) and bounded by ``FUZZ_EXAMPLES`` examples per
operation and mode (25 by default; ``make fuzz`` runs more).
"""

from __future__ import annotations

import os
from typing import Any

import pytest
import schemathesis
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from schemathesis import GenerationMode
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    negative_data_rejection,
    response_schema_conformance,
    status_code_conformance,
)

from service import create_app
from service.http import all_operations
from service.settings import Settings

EXAMPLES = int(os.environ.get("FUZZ_EXAMPLES", "25"))
CHECKS = [
    not_a_server_error,
    status_code_conformance,
    content_type_conformance,
    response_schema_conformance,
]

APP = create_app(Settings())
SCHEMA = schemathesis.openapi.from_wsgi("/openapi.yaml", APP)


def _operation(path: str) -> Any:
    return SCHEMA["/" + path.lstrip("/")]["POST"]


@pytest.mark.parametrize("mode", [GenerationMode.POSITIVE, GenerationMode.NEGATIVE], ids=str)
@pytest.mark.parametrize("path", [op.path for op in all_operations()])
def test_operation_keeps_its_contract(path: str, mode: GenerationMode) -> None:
    operation = _operation(path)
    checks = [*CHECKS, negative_data_rejection] if mode is GenerationMode.NEGATIVE else CHECKS

    @settings(
        max_examples=EXAMPLES,
        derandomize=True,
        database=None,
        deadline=None,
        suppress_health_check=list(HealthCheck),
    )
    @given(data=st.data())
    def fuzz(data: st.DataObject) -> None:
        case = data.draw(operation.as_strategy(generation_mode=mode))
        response = case.call()
        case.validate_response(response, checks=checks)

    fuzz()
