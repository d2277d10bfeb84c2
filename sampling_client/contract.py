"""The service's contract as the command line needs it, read from its OpenAPI document.

The document is the one the service serves (``GET /openapi.json``); this package ships a
copy as ``openapi.json``, generated beside ``openapi.yaml`` by ``python -m service.web.openapi``,
so the command knows the operations without importing the service. From it come:

- the operations (:func:`operations`): operationId, path, summary, description, the media
  types each form of the request is answered with, and whether the operation takes a file
  as ``multipart/form-data``: the same request beside a population file (``accepts_file``),
  or another form with its own request (``file_form``, a completed test sheet or a ledger
  file);
- the request fields as :class:`~sampling_client.flags.FieldSpec` (:func:`field_specs`),
  read from the JSON Schema of the request (JSON Schema 2020-12, as OpenAPI 3.1 uses it):
  ``type`` gives the kind, ``enum`` the choices, ``default`` the service default, a nested
  object (a ``$ref`` to an object with ``properties``) its dotted fields, an ``array`` its
  list kind, a ``oneOf``/``anyOf`` with one branch besides ``null`` that branch;
- the caution sentence (:func:`caution`) and the CSV formula guard (:func:`formula_guard`).

What OpenAPI has no keyword for is in the document's vendor extensions, described in the
service's generator (``service/web/openapi.py``): ``x-caution``, ``x-csv-formula-guard``,
``x-required-unless``, ``x-accepts-text`` (an exact amount, which takes the number written
as text), ``x-file-required``, ``x-answers`` and ``x-file-form``.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cache
from importlib import resources
from typing import Any

from sampling_client.flags import (
    BOOLEAN,
    CHOICES,
    NUMBER,
    NUMBERS,
    PAIRS,
    RAW_JSON,
    RECORDS,
    STRING,
    STRINGS,
    FieldSpec,
)

#: The package data file that holds the document.
DOCUMENT_FILE = "openapi.json"

JSON = "application/json"
MULTIPART = "multipart/form-data"
_REF_PREFIX = "#/"
# The generator joins a file form's description to the operation's after this text.
_FORM_DESCRIPTION = "\n\nAs multipart/form-data ("

Node = Mapping[str, Any]


class ContractError(ValueError):
    """The document does not say what the command needs; the message names the place."""


@cache
def document() -> dict[str, Any]:
    """The OpenAPI document shipped with this package (read once per process)."""
    text = resources.files(__package__).joinpath(DOCUMENT_FILE).read_text(encoding="utf-8")
    loaded = json.loads(text)
    if not isinstance(loaded, dict):
        raise ContractError(f"{DOCUMENT_FILE} does not hold a JSON object")
    return loaded


@dataclass(frozen=True, eq=False)
class Schema:
    """A JSON Schema of an OpenAPI document, with the document its ``$ref``s point into."""

    node: Node
    document: Node = field(repr=False)

    def resolve(self, node: Node) -> Node:
        """``node`` with ``$ref``s followed (``#/components/schemas/Range`` → its schema)."""
        seen: set[str] = set()
        while "$ref" in node:
            ref = str(node["$ref"])
            if not ref.startswith(_REF_PREFIX) or ref in seen:
                raise ContractError(f"cannot follow $ref {ref!r}")
            seen.add(ref)
            target: Any = self.document
            for key in ref[len(_REF_PREFIX):].split("/"):
                if not isinstance(target, Mapping) or key not in target:
                    raise ContractError(f"$ref {ref!r} points nowhere")
                target = target[key]
            node = target
        return node

    @property
    def properties(self) -> Mapping[str, Node]:
        return dict(self.resolve(self.node).get("properties") or {})

    @property
    def required(self) -> frozenset[str]:
        return frozenset(self.resolve(self.node).get("required") or ())

    def at(self, node: Node) -> Schema:
        """Another schema of the same document."""
        return Schema(node, self.document)


def component(name: str, spec: Node | None = None) -> Schema:
    """``#/components/schemas/<name>`` of ``spec`` (default: the shipped document)."""
    spec = document() if spec is None else spec
    return Schema({"$ref": f"#/components/schemas/{name}"}, spec)


# --------------------------------------------------------------------------- fields


def _types(node: Node) -> frozenset[str]:
    """The JSON types ``node`` allows, ``null`` left out."""
    declared = node.get("type")
    names = [declared] if isinstance(declared, str) else list(declared or ())
    return frozenset(str(name) for name in names) - {"null"}


def _not_null(schema: Schema, node: Node) -> Node:
    """``node`` resolved, a ``oneOf``/``anyOf`` of one branch and ``null`` taken as the branch."""
    node = schema.resolve(node)
    for keyword in ("oneOf", "anyOf"):
        branches = [schema.resolve(b) for b in node.get(keyword) or ()]
        others = [b for b in branches if b.get("type") != "null"]
        if len(branches) == 2 and len(others) == 1:
            return others[0]
    return node


def _leaf_kind(node: Node) -> str | None:
    types = _types(node)
    if types == {"boolean"}:
        return BOOLEAN
    if types and types <= {"integer", "number"}:
        return NUMBER
    if types == {"string"}:
        return STRING
    return None


def _is_amount(node: Node) -> bool:
    """An exact amount: a number that may be written as text."""
    return bool(node.get("x-accepts-text"))


def _is_object(node: Node) -> bool:
    return "properties" in node and _types(node) <= {"object"}


def _choices(node: Node) -> tuple[str, ...]:
    """The ``enum`` values as text (``null``, which a nullable field lists, left out)."""
    return tuple(str(choice) for choice in node.get("enum") or () if choice is not None)


def _list_kind(schema: Schema, items: Node) -> str:
    inner = _not_null(schema, items)
    types = _types(inner)
    if types and types <= {"integer", "number"}:
        return NUMBERS
    if types == {"string"}:
        return CHOICES if _choices(inner) else STRINGS
    if _is_object(inner):
        members = [schema.resolve(m) for m in inner["properties"].values()]
        if len(members) == 2 and all(_types(m) == {"integer"} for m in members):
            return PAIRS
        if members and all(_leaf_kind(m) or _is_amount(m) for m in members):
            return RECORDS
    return RAW_JSON


def _list_spec(schema: Schema, path: tuple[str, ...], node: Node, required: bool) -> FieldSpec:
    items = _not_null(schema, node.get("items") or {})
    kind = _list_kind(schema, items)
    description = str(node.get("description", ""))
    if kind == PAIRS:
        first, last = items["properties"]
        return FieldSpec(path, kind, required, description, pair=(first, last))
    if kind == RECORDS:
        columns = tuple(
            (name, STRING if _is_amount(m) else _leaf_kind(m) or STRING)
            for name, m in ((n, schema.resolve(m)) for n, m in items["properties"].items())
        )
        return FieldSpec(path, kind, required, description, columns=columns)
    return FieldSpec(path, kind, required, description,
                     _choices(items) if kind == CHOICES else ())


def field_specs(schema: Schema, prefix: tuple[str, ...] = ()) -> list[FieldSpec]:
    """Every leaf field of ``schema`` that a request sends, nested objects flattened into
    dotted paths, in the document's order (the schema's declaration order).

    A ``readOnly`` property (one the service only answers) is left out.
    """
    specs: list[FieldSpec] = []
    required = schema.required
    for name, declared in schema.properties.items():
        if declared.get("readOnly"):
            continue
        path = (*prefix, name)
        node = _not_null(schema, declared)
        if _is_object(node):
            specs.extend(field_specs(schema.at(node), path))
            continue
        if "array" in _types(node):
            specs.append(_list_spec(schema, path, node, name in required))
            continue
        description = str(declared.get("description", node.get("description", "")))
        unless = declared.get("x-required-unless")
        specs.append(FieldSpec(
            path, _leaf_kind(node) or RAW_JSON, name in required, description,
            _choices(node), declared.get("default", node.get("default")),
            required_unless=() if unless is None else tuple(str(name) for name in unless),
            amount=_is_amount(node),
        ))
    return specs


def group_descriptions(schema: Schema, prefix: tuple[str, ...] = ()
                       ) -> dict[tuple[str, ...], str]:
    """The description of each nested object, by its path (for help groups): the one
    written beside its ``$ref``, where the request says what the object is for."""
    found: dict[tuple[str, ...], str] = {}
    for name, declared in schema.properties.items():
        node = _not_null(schema, declared)
        if _is_object(node) and not declared.get("readOnly"):
            path = (*prefix, name)
            found[path] = str(declared.get("description", ""))
            found.update(group_descriptions(schema.at(node), path))
    return found


# --------------------------------------------------------------------------- operations


@dataclass(frozen=True, eq=False)
class Operation:
    """One ``POST`` operation of the service, as the command line offers it.

    ``media_types`` are the answers of this form of the request, JSON first.
    ``accepts_file``: the same request may come with a population file
    (``multipart/form-data``); ``file_required``: it means nothing without one;
    ``file_form``: another form of the operation, at the same path, for a file (its own
    request, summary and answers).
    """

    name: str
    path: str
    summary: str
    description: str
    media_types: tuple[str, ...]
    request_schema: Schema
    accepts_file: bool = False
    file_required: bool = False
    file_form: Operation | None = None


def _operation(path: str, post: Node, spec: Node) -> Operation:
    name = str(post.get("operationId", path))
    try:
        content = post["requestBody"]["content"]
        request = Schema(content[JSON]["schema"], spec)
        answers = tuple(post.get("x-answers") or post["responses"]["200"]["content"])
    except (KeyError, TypeError):
        raise ContractError(f"POST {path} ({name}) has no JSON request or 200 answer") from None
    description = str(post.get("description", ""))
    multipart = content.get(MULTIPART)
    form = post.get("x-file-form")
    file_form = None
    if form is not None:
        try:
            form_request = Schema(multipart["schema"]["properties"]["request"], spec)
            file_form = Operation(
                str(form["operationId"]), path, str(form["summary"]),
                str(form["description"]), tuple(form["answers"]), form_request,
                accepts_file=True)
        except (KeyError, TypeError):
            raise ContractError(f"POST {path} ({name}): x-file-form without its "
                                f"{MULTIPART} request, summary, description or answers") from None
        description = description.split(_FORM_DESCRIPTION)[0]
    return Operation(
        name, path, str(post.get("summary", "")), description, answers, request,
        accepts_file=multipart is not None and file_form is None,
        file_required=bool(post.get("x-file-required")),
        file_form=file_form,
    )


def operations(spec: Node | None = None) -> list[Operation]:
    """Every ``POST`` operation of ``spec`` (default: the shipped document), in its order."""
    spec = document() if spec is None else spec
    return [_operation(path, item["post"], spec)
            for path, item in (spec.get("paths") or {}).items()
            if isinstance(item, Mapping) and isinstance(item.get("post"), Mapping)]


# --------------------------------------------------------------------------- texts


def caution(spec: Node | None = None) -> str:
    """The caution sentence that ends every text answer (``info.x-caution``)."""
    spec = document() if spec is None else spec
    return str(spec["info"]["x-caution"])


def formula_guard(spec: Node | None = None) -> tuple[tuple[str, ...], str]:
    """The starts of a CSV text cell that a spreadsheet runs as a formula, and the prefix
    that makes such a cell text (``info.x-csv-formula-guard``)."""
    spec = document() if spec is None else spec
    guard = spec["info"]["x-csv-formula-guard"]
    return tuple(str(start) for start in guard["starts"]), str(guard["prefix"])
