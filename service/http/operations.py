"""Operations: one declaration per endpoint, from which views and the spec are built.

An :class:`Operation` names its path, its request and response schemas and
the one core call it makes. :func:`blueprint` turns a list of them into a
Flask blueprint whose views all follow the same steps: check the media type,
read strict JSON, load the request schema, call the core once, dump the
response schema. An operation that ``accepts_file`` also takes a ``multipart/form-data``
upload (:mod:`service.http.uploads`): its ``request`` part is loaded as the body would be,
and the core call gets the file's temporary path as ``inputs["upload"]``. The OpenAPI
document (:mod:`service.web.openapi`) is generated from the same declarations, so the contract
and the behaviour cannot drift. The usual JSON requests are answered ahead of these views,
with the same steps, by :mod:`service.http.direct`.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Any

from flask import Blueprint, Response, current_app, request
from marshmallow import Schema, ValidationError
from werkzeug.exceptions import RequestEntityTooLarge

from service.http import costs, dumping, loading, markdown, uploads
from service.http.markdown import MARKDOWN, TicketLayout
from service.sampling.errors import SamplingError
from service.settings import Settings
from service.web import deadline, jsonio
from service.web.problems import (
    MALFORMED_BODY,
    UNSUPPORTED_MEDIA_TYPE,
    Problem,
    from_sampling_error,
    from_validation_error,
    invalid_input,
)

JSON = "application/json"

# Renders the response document (and the core result it came from) as text, or as bytes
# for binary formats such as XLSX.
Renderer = Callable[[dict[str, Any], Any], str | bytes]


@dataclass(frozen=True)
class Operation:
    """One JSON-in endpoint; JSON out by default, other media types through ``renderers``."""

    name: str
    path: str
    summary: str
    description: str
    request: type[Schema]
    response: type[Schema]
    run: Callable[[dict[str, Any], Settings], Any]
    tag: str
    renderers: Mapping[str, Renderer] = field(default_factory=dict)
    # Endpoints that take item lists accept bodies up to max_list_body_bytes.
    takes_item_lists: bool = False
    # The answer fields and method of the text/markdown block every operation serves.
    ticket: TicketLayout = field(default_factory=TicketLayout)
    # Cheap checks of the raw payload against the settings, before the schema loads it
    # (so that an oversized list is refused without validating every element).
    precheck: Callable[[Any, Settings], None] | None = None
    # Also takes a multipart/form-data upload: a `file` part and the JSON `request` part.
    # The core call then finds the file's temporary path in inputs["upload"] (None when
    # the request came as plain JSON).
    accepts_file: bool = False
    # The endpoint means nothing without a file (a profile): the batch leaves it out.
    file_required: bool = False
    # Another form of the same endpoint for a multipart/form-data upload, when the file
    # changes what the request says and what the answer holds (a completed test sheet sent
    # to the evaluation): its own request and response schemas, core call and renderers,
    # with accepts_file set. Plain JSON requests keep this operation's own form.
    file_form: Operation | None = None
    # Other answers the operation gives: a core result of one of these types is dumped with
    # its schema instead of ``response`` (the spec lists them all as ``oneOf``).
    variants: Mapping[type, type[Schema]] = field(default_factory=dict)
    # The payload carries other operations' requests (a batch): the text check for lone
    # surrogates is left to the precheck and to each carried operation.
    carries_requests: bool = False
    # The JSON answer depends on the body alone: no generated seed, clock or file enters
    # it, so an answer may be kept and given again for the same body (service.http.direct).
    repeatable: bool = False

    @cached_property
    def request_schema(self) -> Schema:
        """One instance per operation and process: building a schema costs more than
        loading a body with it, and loading keeps no state in the instance."""
        return self.request()

    @cached_property
    def response_schema(self) -> Schema:
        return self.response()

    def schema_for(self, result: Any) -> Schema:
        """The response schema that dumps ``result``."""
        for kind, schema in self.variants.items():
            if isinstance(result, kind):
                return _instance(schema)
        return self.response_schema

    @property
    def media_types(self) -> list[str]:
        """JSON first (it wins ties), then the operation's own types, then Markdown."""
        extra = [] if MARKDOWN in self.renderers else [MARKDOWN]
        return [JSON, *self.renderers, *extra]

    def render(
        self, media_type: str, payload: Any, document: dict[str, Any], result: Any
    ) -> str | bytes:
        """The answer as ``media_type`` (one of :attr:`media_types`)."""
        if media_type == JSON:
            return jsonio.dumps(document)
        if media_type in self.renderers:
            return self.renderers[media_type](document, result)
        # A field required unless a list is given has no default: when it is left out, the
        # list took its place and the answer's value of that name is a total, not an input.
        fields = tuple(
            name
            for name, declared in self.request_schema.fields.items()
            if not declared.metadata.get("required_unless")
        )
        return markdown.render(self.summary, self.ticket, payload, document, fields)


_SCHEMAS: dict[type[Schema], Schema] = {}


def _instance(schema: type[Schema]) -> Schema:
    """One instance per schema class and process, as for ``Operation.response_schema``."""
    if schema not in _SCHEMAS:
        _SCHEMAS[schema] = schema()
    return _SCHEMAS[schema]


def is_json(mimetype: str) -> bool:
    """Whether ``mimetype`` is JSON: application/json or an application/…+json type."""
    return mimetype == "application/json" or (
        mimetype.startswith("application/") and mimetype.endswith("+json")
    )


def read_json_body(accepts_file: bool = False) -> Any:
    """The request body as strict JSON, or a Problem (415, 400, 413)."""
    if not is_json(request.mimetype):
        got = request.mimetype or "no Content-Type"
        also = f" or {uploads.MULTIPART} (a file and a request part)" if accepts_file else ""
        raise Problem(
            415,
            "Unsupported Media Type",
            f"send the body as application/json{also} (got {got})",
            UNSUPPORTED_MEDIA_TYPE,
        )
    try:
        return jsonio.loads(_read_body())
    except jsonio.JSONDecodeProblem as exc:
        raise Problem(400, "Malformed body", str(exc), MALFORMED_BODY) from None


def _read_body() -> bytes:
    """The raw body; one over the limit is refused (413) even when it has no Content-Length.

    Werkzeug refuses a declared Content-Length over the limit, but a streamed (chunked)
    body is only cut at the limit; whether more follows is read from the server's stream.
    """
    data = request.get_data(cache=False)
    limit = request.max_content_length
    if (
        limit is not None
        and request.content_length is None
        and len(data) >= limit
        and request.environ["wsgi.input"].read(1)
    ):
        raise RequestEntityTooLarge()
    return data


def negotiate(operation: Operation) -> str:
    """The media type to answer with, from the Accept header (406 when none is acceptable)."""
    offered = operation.media_types
    # The usual header names one offered type alone: no need to parse and rank it.
    sent = request.headers.get("Accept", "")
    if sent in offered:
        return sent
    if not request.accept_mimetypes:
        return JSON
    best = request.accept_mimetypes.best_match(offered)
    if best is None:
        raise Problem(
            406,
            "Not Acceptable",
            f"this endpoint answers {', '.join(offered)}; the Accept header allows none of them",
        )
    return best


def run(
    operation: Operation,
    payload: Any,
    settings: Settings,
    upload: Path | None = None,
    upload_name: str = "",
    *,
    escaped: bool = True,
) -> tuple[dict[str, Any], Any]:
    """Validate ``payload`` and run the operation: the response document and the core result.

    ``upload`` is the uploaded file's temporary path and ``upload_name`` the name the
    client gave it, passed on as ``inputs["upload"]`` and ``inputs["upload_name"]`` to an
    operation that accepts files. ``escaped`` False says that the JSON text held no
    ``\\u`` escape, the only way a body read as UTF-8 can spell a lone surrogate, so
    the payload is not searched for one.
    """
    if operation.precheck is not None:
        try:
            operation.precheck(payload, settings)
        except SamplingError as exc:
            raise from_sampling_error(exc) from None
    if (
        escaped
        and not operation.carries_requests
        and (unencodable := jsonio.lone_surrogates(payload))
    ):
        raise invalid_input(unencodable)
    try:
        inputs = loading.loader(operation.request_schema)(payload)
    except ValidationError as exc:
        raise from_validation_error(exc) from None
    if operation.accepts_file:
        inputs = {**inputs, "upload": upload, "upload_name": upload_name}
    if upload is None:
        # A file is bounded by the file limits and the upload deadline instead.
        costs.check(costs.estimate(operation.name, inputs), settings.max_request_cost)
    try:
        result = operation.run(inputs, settings)
    except SamplingError as exc:
        raise from_sampling_error(exc) from None
    document: dict[str, Any] = dumping.dumper(operation.schema_for(result))(result)
    return document, result


def cost(operation: Operation, payload: Any, settings: Settings) -> costs.Cost:
    """The estimated cost of ``payload``; nothing when it is invalid (it will be refused)."""
    try:
        if operation.precheck is not None:
            operation.precheck(payload, settings)
        inputs = operation.request_schema.load(payload)
    except (SamplingError, ValidationError):
        return costs.Cost(0)
    if operation.accepts_file:
        inputs = {**inputs, "upload": None, "upload_name": ""}
    return costs.estimate(operation.name, inputs)


def execute(operation: Operation, payload: Any, settings: Settings) -> dict[str, Any]:
    """Validate ``payload``, run the operation and return the response document."""
    return run(operation, payload, settings)[0]


def refuse_content_encoding() -> None:
    """Refuse (415) a body sent with a content coding: bodies are read as sent, and a
    compressed body would otherwise be refused as malformed, or, with a coding named
    but not applied, read as if the label were absent."""
    coding = request.headers.get("Content-Encoding", "").strip().lower()
    if coding not in ("", "identity"):
        raise Problem(
            415,
            "Unsupported Media Type",
            f"send the body without a content coding (got Content-Encoding: {coding[:40]}); "
            "this service reads bodies as sent",
            UNSUPPORTED_MEDIA_TYPE,
            errors={"Content-Encoding": ["must be absent or identity"]},
            headers={"Accept-Encoding": "identity"},
        )


def _view(declared: Operation) -> Callable[[], Response]:
    def view() -> Response:
        settings: Settings = current_app.config["SETTINGS"]
        refuse_content_encoding()
        operation = declared
        if declared.file_form is not None and uploads.is_multipart():
            operation = declared.file_form
        media_type = negotiate(operation)
        if operation.accepts_file and uploads.is_multipart():
            # Rendered inside the block: the temporary file lives until the answer is made.
            with deadline.guard(settings.upload_deadline), uploads.received(settings) as upload:
                document, result = run(
                    operation, upload.payload, settings, upload.path, upload.filename
                )
                body = operation.render(media_type, upload.payload, document, result)
        else:
            if operation.takes_item_lists:
                request.max_content_length = settings.max_list_body_bytes
            with deadline.guard(settings.request_deadline):
                payload = read_json_body(
                    operation.accepts_file or operation.file_form is not None
                )
                document, result = run(operation, payload, settings)
                body = operation.render(media_type, payload, document, result)
        response = current_app.response_class(body, status=200, mimetype=media_type)
        response.vary.add("Accept")
        return response

    view.__name__ = declared.name.replace("-", "_")
    view.__doc__ = declared.summary
    return view


def blueprint(name: str, operations: list[Operation]) -> Blueprint:
    """A blueprint serving each operation at ``POST operation.path``."""
    bp = Blueprint(name, __name__)
    for operation in operations:
        bp.add_url_rule(operation.path, view_func=_view(operation), methods=["POST"])
    return bp
