"""Generate the OpenAPI 3.1 document from the operations and their schemas.

``python -m service.web.openapi`` prints it and writes the same document as JSON to
``sampling_client/openapi.json``, the copy the client and its command ship as package data
and read their operations, flags and texts from; ``make spec`` writes the printed text to
``openapi.yaml``, and a test fails when either committed file differs.

Facts the command line needs that OpenAPI has no keyword for are vendor extensions:

- ``info.x-caution``: the caution sentence every text answer ends with;
- ``info.x-csv-formula-guard``: how a CSV text cell that a spreadsheet would run as a
  formula is written (``prefix`` put before a text starting with one of ``starts``);
- on a request field, ``x-required-unless``: the list fields whose presence makes it
  optional; ``x-accepts-text``: the field takes a number written as text (an exact amount),
  so a table cell is sent as written;
- on an operation, ``x-file-required``: the operation means nothing without a file;
- on an operation with another form for a file (a completed test sheet, a ledger file),
  ``x-answers``: the media types its JSON form answers, and ``x-file-form``: the file
  form's ``operationId``, ``summary``, ``description`` and ``answers``.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import Any

import yaml
from apispec import APISpec
from apispec.ext.marshmallow import MarshmallowPlugin

from schemas.common import HealthSchema, ProblemSchema, ReadySchema
from schemas.fields import StrictFloat, StrictInteger, StrictString
from service.http import all_operations
from service.http.markdown import MARKDOWN
from service.http.operations import Operation
from service.render.cells import FORMULA_STARTS
from service.sampling.wording import CAUTION
from service.version import VERSION

#: The copy of the document the client ships (see the module's docstring).
CLIENT_COPY = Path(__file__).resolve().parents[2] / "sampling_client" / "openapi.json"

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

_RETRY_AFTER_HEADERS = {
    "Retry-After": {
        "description": "Seconds to wait before trying again.",
        "schema": {"type": "integer"},
    }
}

_PROBLEM_STATUSES = {
    "401": UNAUTHORIZED_DESCRIPTION,
    "400": "Malformed body: not UTF-8, not strict JSON, or duplicate keys.",
    "406": "None of the media types this endpoint answers is acceptable.",
    "413": "Body larger than the configured limit.",
    "415": "Body not sent as application/json, or sent with a Content-Encoding.",
    "422": "Invalid input; `errors` names each field and what is wrong with it. Type "
    "/problems/too-much-work: the estimated work is above SAMPLING_MAX_REQUEST_COST; "
    "`errors` names the inputs that make it large.",
    "503": "The request was still computing at its deadline (SAMPLING_REQUEST_DEADLINE) "
    "and was stopped (type /problems/deadline-exceeded); try again after Retry-After.",
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
    "(sampling_http_requests_in_flight), answers the HTTP server wrote itself by status "
    "(sampling_server_answers_total) and workers stopped by the master's timeout "
    "(sampling_worker_aborts_total), in the Prometheus text format 0.0.4, or "
    "OpenMetrics when Accept asks for application/openmetrics-text."
)

MARKDOWN_DESCRIPTION = (
    "A complete block for a ticket or workpaper: heading, summary sentence, inputs as "
    "written (lists in full), answer with rates as rounded percentages and conclusions in "
    "words, the selected items (selections), method and its reference, every warning, next "
    "steps, service version, request fingerprint (SHA-256 of the canonical JSON of the "
    'request: keys sorted, separators "," and ":", UTF-8) and the caution last. A batch '
    "answers one overview table, then one such block per operation."
)


UPLOAD_DESCRIPTION = (
    "A population file and its request in one body: the part file holds the file, streamed "
    "to a temporary file that is removed once the answer is made (at most "
    "SAMPLING_MAX_FILE_BYTES, 2 GiB by default); the part request holds the JSON request, "
    "the same document the application/json body would be."
)
_UPLOAD_STATUSES = {
    "400": "Malformed body: not UTF-8, not strict JSON, duplicate keys, an unreadable "
    "multipart body, or a request part that is not strict JSON.",
    "413": "Body larger than the configured limit, or an uploaded file larger than "
    "SAMPLING_MAX_FILE_BYTES.",
    "415": "Body sent neither as application/json nor as multipart/form-data, or sent "
    "with a Content-Encoding.",
    "503": "The request was still computing at its deadline (SAMPLING_UPLOAD_DEADLINE with "
    "a file) and was stopped; try again after Retry-After.",
    "507": "The service has no room to store the uploaded file for this request.",
}


def _upload_content(
    operation: Operation,
    file_description: str = "The population file.",
    description: str = UPLOAD_DESCRIPTION,
) -> dict[str, Any]:
    """The ``multipart/form-data`` request body of an operation that accepts files."""
    return {
        "schema": {
            "type": "object",
            "description": description,
            "required": ["file", "request"],
            "properties": {
                "file": {
                    "type": "string",
                    "format": "binary",
                    "description": file_description,
                },
                "request": {"$ref": f"#/components/schemas/{_schema_name(operation.request)}"},
            },
        },
        "encoding": {"request": {"contentType": "application/json"}},
    }


def _add_file_form(
    spec: APISpec,
    operation: Operation,
    form: Operation,
    content: dict[str, Any],
    body: dict[str, Any],
    statuses: dict[str, str],
) -> str:
    """Declare an operation's multipart form beside its JSON form, at the same path: the
    multipart request body, the JSON answer as one of the two documents, the form's own
    media types; returns the combined description."""
    for schema in (operation.response, form.request, form.response):
        name = _schema_name(schema)
        if name not in spec.components.schemas:
            spec.components.schema(name, schema=schema)
    statuses.update(_UPLOAD_STATUSES)
    body["multipart/form-data"] = _upload_content(
        form,
        f"The file to {form.summary.lower()}.",
        "A file and its request in one body: the part file holds the file, streamed to a "
        "temporary file that is removed once the answer is made (at most "
        "SAMPLING_MAX_FILE_BYTES, 2 GiB by default); the part request holds the JSON request "
        "of this form, given by the schema named here.",
    )
    for media_type in form.media_types[1:]:
        content.setdefault(media_type, {"schema": {"type": "string"}})
    return (
        f"{operation.description}\n\nAs multipart/form-data ({form.summary.lower()}): "
        f"{form.description}"
    )


def _client_facts(self: Any, field: Any, **kwargs: Any) -> dict[str, Any]:
    """``x-required-unless`` from a field's ``required_unless`` metadata, and
    ``x-accepts-text`` on a field that takes a number written as text (an exact amount)."""
    facts: dict[str, Any] = {}
    other = field.metadata.get("required_unless")
    if other:
        # Always a list of field names, whether the metadata names one or several.
        facts["x-required-unless"] = [other] if isinstance(other, str) else list(other)
    if getattr(field, "accepts_text", False):
        facts["x-accepts-text"] = True
    return facts


def _extensions(operation: Operation) -> dict[str, Any]:
    """The vendor extensions of an operation (see the module's docstring)."""
    found: dict[str, Any] = {}
    if operation.file_required:
        found["x-file-required"] = True
    form = operation.file_form
    if form is not None:
        found["x-answers"] = list(operation.media_types)
        found["x-file-form"] = {
            "operationId": form.name,
            "summary": form.summary,
            "description": form.description,
            "answers": list(form.media_types),
        }
    return found


def _problem_response(description: str, status: str = "") -> dict[str, Any]:
    response: dict[str, Any] = {
        "description": description,
        "content": {"application/problem+json": {"schema": "Problem"}},
    }
    if status == "401":
        response["headers"] = _UNAUTHORIZED_HEADERS
    if status == "503":
        response["headers"] = _RETRY_AFTER_HEADERS
    return response


def build_spec() -> APISpec:
    """The spec object for every operation of the service."""
    plugin = MarshmallowPlugin(schema_name_resolver=lambda schema: _schema_name(schema))
    spec = APISpec(
        title="Attribute sampling service",
        version=VERSION,
        openapi_version=OPENAPI_VERSION,
        plugins=[plugin],
        info={
            "description": DESCRIPTION,
            "x-caution": CAUTION,
            "x-csv-formula-guard": {"starts": list(FORMULA_STARTS), "prefix": "'"},
        },
    )
    plugin.converter.map_to_openapi_type(StrictFloat, "number", None)  # type: ignore[union-attr]
    plugin.converter.map_to_openapi_type(StrictInteger, "integer", None)  # type: ignore[union-attr]
    plugin.converter.map_to_openapi_type(StrictString, "string", None)  # type: ignore[union-attr]
    plugin.converter.add_attribute_function(_client_facts)  # type: ignore[union-attr]
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
        answer: Any = operation.response
        if operation.variants or operation.file_form is not None:
            answer = _answer_component(spec, operation)
        content: dict[str, Any] = {"application/json": {"schema": answer}}
        for media_type in operation.media_types[1:]:
            content[media_type] = {"schema": {"type": "string"}}
        if MARKDOWN in content and MARKDOWN not in operation.renderers:
            content[MARKDOWN]["schema"]["description"] = MARKDOWN_DESCRIPTION
        responses: dict[str, Any] = {"200": {"description": operation.summary, "content": content}}
        statuses = dict(_PROBLEM_STATUSES)
        body: dict[str, Any] = {"application/json": {"schema": operation.request}}
        if operation.accepts_file:
            statuses.update(_UPLOAD_STATUSES)
            body["multipart/form-data"] = _upload_content(operation)
        description = operation.description
        if operation.file_form is not None:
            description = _add_file_form(
                spec, operation, operation.file_form, content, body, statuses
            )
        responses.update({code: _problem_response(text, code) for code, text in statuses.items()})
        post: dict[str, Any] = {
            "operationId": operation.name,
            "summary": operation.summary,
            "description": description,
            "tags": [operation.tag],
            "security": _SECURITY,
            "requestBody": {
                "required": True,
                "content": body,
            },
            "responses": responses,
        }
        post.update(_extensions(operation))
        spec.path(path=operation.path, operations={"post": post})

    _service_get(spec, "/v1/health", "health", "Liveness and version", {
        "200": _answer("The service is up.", "application/json", "Health"),
    })
    _service_get(spec, "/v1/ready", "ready", "Readiness", {
        "200": _answer("The service is ready.", "application/json", "Ready"),
        "503": _answer("The service is starting.", "application/json", "Ready"),
    }, description="200 once the application is built and can answer requests.")
    metrics = _answer("The metrics, summed over every worker process.", "text/plain")
    metrics["content"]["application/openmetrics-text"] = {"schema": {"type": "string"}}
    _service_get(spec, "/metrics", "metrics", "Prometheus metrics", {
        "200": metrics,
        "401": _problem_response(UNAUTHORIZED_DESCRIPTION, "401"),
    }, description=METRICS_DESCRIPTION, security=_SECURITY)
    _service_get(spec, "/openapi.yaml", "openapi", "This document", {
        "200": _answer("The OpenAPI 3.1 document.", "application/yaml"),
    })
    _service_get(spec, "/openapi.json", "openapi-json", "This document as JSON", {
        "200": _answer("The same OpenAPI 3.1 document, as JSON.", "application/json"),
    })
    return spec


def _answer(description: str, media_type: str, schema: str | None = None) -> dict[str, Any]:
    """A response of one media type: a named component schema, or plain text."""
    body: Any = schema if schema is not None else {"type": "string"}
    return {"description": description, "content": {media_type: {"schema": body}}}


def _service_get(
    spec: APISpec,
    path: str,
    operation_id: str,
    summary: str,
    responses: dict[str, Any],
    description: str | None = None,
    security: list[dict[str, list[str]]] | None = None,
) -> None:
    """One ``GET`` endpoint of the service itself (health, readiness, metrics, spec)."""
    operation: dict[str, Any] = {"operationId": operation_id, "summary": summary}
    if description is not None:
        operation["description"] = description
    operation["tags"] = ["service"]
    if security is not None:
        operation["security"] = security
    operation["responses"] = responses
    spec.path(path=path, operations={"get": operation})


def _answer_component(spec: APISpec, operation: Any) -> str:
    """A component naming every answer of an operation that has variants or a file form
    (its answers for a JSON request and for a multipart one), as ``oneOf``."""
    names: list[str] = []
    forms = [] if operation.file_form is None else [operation.file_form.response]
    for schema in (operation.response, *operation.variants.values(), *forms):
        name = _schema_name(schema)
        if name not in spec.components.schemas:
            spec.components.schema(name, schema=schema)
        if name not in names:
            names.append(name)
    if len(names) == 1:
        # Both forms answer with the same schema: a oneOf of it twice would match every
        # answer twice, which oneOf forbids.
        return names[0]
    refs = [{"$ref": f"#/components/schemas/{name}"} for name in names]
    name = "".join(part.title() for part in operation.name.split("-")) + "Answer"
    spec.components.schema(
        name, {"oneOf": refs, "description": f"The answers of {operation.path}."}
    )
    return name


def _schema_name(schema: Any) -> str:
    cls = schema if isinstance(schema, type) else type(schema)
    name = cls.__name__
    return name[: -len("Schema")] if name.endswith("Schema") and name != "Schema" else name


def build_yaml() -> str:
    """The document as YAML text, keys in declaration order."""
    document = build_spec().to_dict()
    return str(yaml.safe_dump(document, sort_keys=False, allow_unicode=True, width=100))


def build_json() -> str:
    """The document as JSON text (the client's copy), keys in declaration order."""
    document = build_spec().to_dict()
    return json.dumps(document, indent=1, ensure_ascii=False) + "\n"


def write_client_copy(path: Path = CLIENT_COPY) -> None:
    """Write :func:`build_json` to ``path`` when it differs (a source tree's client copy)."""
    text = build_json()
    try:
        if not path.exists() or path.read_text(encoding="utf-8") != text:
            path.write_text(text, encoding="utf-8")
    except OSError as exc:  # an installed copy in a read-only folder: the print still stands
        print(f"service.web.openapi: {path} not written: {exc.strerror}", file=sys.stderr)


if __name__ == "__main__":
    print(build_yaml(), end="")
    write_client_copy()
