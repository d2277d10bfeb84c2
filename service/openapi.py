"""Generate the OpenAPI 3.1 document from the operations and their schemas.

``python -m service.openapi`` prints it; ``make spec`` writes it to
``openapi.yaml``, and a test fails when the committed file differs.
"""

from __future__ import annotations

from typing import Any

import yaml
from apispec import APISpec
from apispec.ext.marshmallow import MarshmallowPlugin

from schemas.common import HealthSchema, ProblemSchema, ReadySchema
from schemas.fields import StrictFloat, StrictInteger, StrictString
from service.http import all_operations
from service.http.markdown import MARKDOWN
from service.version import VERSION

OPENAPI_VERSION = "3.1.0"

UNAUTHORIZED_DESCRIPTION = (
    "Only when API keys are configured: no key, or one the service does not accept, "
    "was sent. The WWW-Authenticate header carries the Bearer challenge."
)
# Keys are optional per deployment: either no credentials (keys off) or a bearer key.
_SECURITY: list[dict[str, list[str]]] = [{}, {"apiKey": []}]
_UNAUTHORIZED_HEADERS = {
    "WWW-Authenticate": {
        "description": 'Bearer challenge, e.g. `Bearer realm="attribute-sampling"`.',
        "schema": {"type": "string"},
    }
}

_PROBLEM_STATUSES = {
    "401": UNAUTHORIZED_DESCRIPTION,
    "400": "Malformed body: not UTF-8, not strict JSON, or duplicate keys.",
    "406": "None of the media types this endpoint answers is acceptable.",
    "413": "Body larger than the configured limit.",
    "415": "Body not sent as application/json.",
    "422": "Invalid input; `errors` names each field and what is wrong with it.",
}

DESCRIPTION = (
    "Sizes, evaluates and documents statistical samples for tests of controls. "
    "Rates are fractions (5% is 0.05). Every error is application/problem+json "
    "(RFC 9457). Every answer carries an X-Request-ID header: the one sent (1 to 128 "
    "letters, digits, '.', '_', ':' or '-') or a new one, repeated as request_id in "
    "problem details. Results support, and do not replace, professional judgement "
    "and the applicable auditing standards."
)


METRICS_DESCRIPTION = (
    "Requests by endpoint, method and status (sampling_http_requests_total), latency "
    "(sampling_http_request_duration_seconds, a histogram) and requests in flight "
    "(sampling_http_requests_in_flight), in the Prometheus text format 0.0.4, or "
    "OpenMetrics when Accept asks for application/openmetrics-text."
)

MARKDOWN_DESCRIPTION = (
    "A short block for a ticket or workpaper: heading, inputs, answer, method and its "
    "reference, warnings, service version, request fingerprint (SHA-256 of the canonical "
    'JSON of the request: keys sorted, separators "," and ":", UTF-8) and the caution.'
)


def _problem_response(description: str, status: str = "") -> dict[str, Any]:
    response: dict[str, Any] = {
        "description": description,
        "content": {"application/problem+json": {"schema": "Problem"}},
    }
    if status == "401":
        response["headers"] = _UNAUTHORIZED_HEADERS
    return response


def build_spec() -> APISpec:
    """The spec object for every operation of the service."""
    plugin = MarshmallowPlugin(schema_name_resolver=lambda schema: _schema_name(schema))
    spec = APISpec(
        title="Attribute sampling service",
        version=VERSION,
        openapi_version=OPENAPI_VERSION,
        plugins=[plugin],
        info={"description": DESCRIPTION},
    )
    plugin.converter.map_to_openapi_type(StrictFloat, "number", None)  # type: ignore[union-attr]
    plugin.converter.map_to_openapi_type(StrictInteger, "integer", None)  # type: ignore[union-attr]
    plugin.converter.map_to_openapi_type(StrictString, "string", None)  # type: ignore[union-attr]
    spec.components.schema("Problem", schema=ProblemSchema)
    spec.components.schema("Health", schema=HealthSchema)
    spec.components.schema("Ready", schema=ReadySchema)
    spec.components.security_scheme(
        "apiKey",
        {
            "type": "http",
            "scheme": "bearer",
            "description": "An API key, required only when the deployment configures keys "
            "(SAMPLING_API_KEYS). Health, readiness and this document never need one.",
        },
    )

    for operation in all_operations():
        content: dict[str, Any] = {"application/json": {"schema": operation.response}}
        for media_type in operation.media_types[1:]:
            content[media_type] = {"schema": {"type": "string"}}
        if MARKDOWN in content and MARKDOWN not in operation.renderers:
            content[MARKDOWN]["schema"]["description"] = MARKDOWN_DESCRIPTION
        responses: dict[str, Any] = {"200": {"description": operation.summary, "content": content}}
        responses.update(
            {code: _problem_response(text, code) for code, text in _PROBLEM_STATUSES.items()}
        )
        spec.path(
            path=operation.path,
            operations={
                "post": {
                    "operationId": operation.name,
                    "summary": operation.summary,
                    "description": operation.description,
                    "tags": [operation.tag],
                    "security": _SECURITY,
                    "requestBody": {
                        "required": True,
                        "content": {"application/json": {"schema": operation.request}},
                    },
                    "responses": responses,
                }
            },
        )

    spec.path(
        path="/v1/health",
        operations={
            "get": {
                "operationId": "health",
                "summary": "Liveness and version",
                "tags": ["service"],
                "responses": {
                    "200": {
                        "description": "The service is up.",
                        "content": {"application/json": {"schema": "Health"}},
                    }
                },
            }
        },
    )
    spec.path(
        path="/v1/ready",
        operations={
            "get": {
                "operationId": "ready",
                "summary": "Readiness",
                "description": "200 once the application is built and can answer requests.",
                "tags": ["service"],
                "responses": {
                    "200": {
                        "description": "The service is ready.",
                        "content": {"application/json": {"schema": "Ready"}},
                    },
                    "503": {
                        "description": "The service is starting.",
                        "content": {"application/json": {"schema": "Ready"}},
                    },
                },
            }
        },
    )
    spec.path(
        path="/metrics",
        operations={
            "get": {
                "operationId": "metrics",
                "summary": "Prometheus metrics",
                "description": METRICS_DESCRIPTION,
                "tags": ["service"],
                "security": _SECURITY,
                "responses": {
                    "200": {
                        "description": "The metrics, summed over every worker process.",
                        "content": {
                            "text/plain": {"schema": {"type": "string"}},
                            "application/openmetrics-text": {"schema": {"type": "string"}},
                        },
                    },
                    "401": _problem_response(UNAUTHORIZED_DESCRIPTION, "401"),
                },
            }
        },
    )
    spec.path(
        path="/openapi.yaml",
        operations={
            "get": {
                "operationId": "openapi",
                "summary": "This document",
                "tags": ["service"],
                "responses": {
                    "200": {
                        "description": "The OpenAPI 3.1 document.",
                        "content": {"application/yaml": {"schema": {"type": "string"}}},
                    }
                },
            }
        },
    )
    return spec


def _schema_name(schema: Any) -> str:
    cls = schema if isinstance(schema, type) else type(schema)
    name = cls.__name__
    return name[: -len("Schema")] if name.endswith("Schema") and name != "Schema" else name


def build_yaml() -> str:
    """The document as YAML text, keys in declaration order."""
    document = build_spec().to_dict()
    return str(yaml.safe_dump(document, sort_keys=False, allow_unicode=True, width=100))


if __name__ == "__main__":
    print(build_yaml(), end="")
