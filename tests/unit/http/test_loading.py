"""The compiled loaders give what the request schemas' own load gives, value for value and
refusal for refusal."""

from __future__ import annotations

import dataclasses
from decimal import Decimal
from typing import Any

import pytest
from marshmallow import Schema, ValidationError, fields, post_load, validates, validates_schema

from service.http import all_operations, loading
from service.http.operations import Operation
from service.web import jsonio
from tests.unit.http.test_markdown_api import EXAMPLES

REPLACEMENTS: list[Any] = [None, "x", -1, 0, 1, 1.5, 0.05, [], {}, True, "0.05", 10**40]


def _canonical(value: Any) -> Any:
    """``value`` with every type spelled out, and the decimal a number was written as."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return (type(value).__name__,
                tuple((f.name, _canonical(getattr(value, f.name)))
                      for f in dataclasses.fields(value)))
    if isinstance(value, dict):
        return ("dict", tuple((key, _canonical(item)) for key, item in value.items()))
    if isinstance(value, list | tuple):
        return (type(value).__name__, tuple(_canonical(item) for item in value))
    if isinstance(value, float):
        written = getattr(value, "decimal", None)
        return (type(value).__name__, repr(value),
                str(written) if isinstance(written, Decimal) else None)
    return (type(value).__name__, repr(value))


def _outcome(load: Any, document: Any) -> tuple[str, Any]:
    try:
        return "loaded", _canonical(load(document))
    except ValidationError as exc:
        return "refused", exc.messages


def _variations(body: dict[str, Any]) -> list[Any]:
    """The body, and the body with one member left out, added or changed (also inside
    nested objects), as JSON reading gives them."""
    found: list[Any] = [body, [body], "body", None, {**body, "unknown_member": 1}]
    for key in body:
        found.append({name: value for name, value in body.items() if name != key})
        found.extend({**body, key: replacement} for replacement in REPLACEMENTS)
        if isinstance(body[key], dict):
            inner = body[key]
            for inner_key in inner:
                found.append({**body, key: {n: v for n, v in inner.items() if n != inner_key}})
                found.extend({**body, key: {**inner, inner_key: replacement}}
                             for replacement in REPLACEMENTS)
            found.append({**body, key: {**inner, "unknown_member": 1}})
    # numbers as the service's JSON reader makes them (written decimals, not plain floats)
    return [jsonio.loads(jsonio.dumps(document).encode("utf-8")) for document in found]


OPERATIONS = [op for op in all_operations() if op.name in EXAMPLES and not op.accepts_file]


@pytest.mark.parametrize("operation", OPERATIONS, ids=lambda op: op.name)
def test_every_variation_loads_or_is_refused_as_by_the_schema(operation: Operation) -> None:
    schema = operation.request_schema
    body, _ = EXAMPLES[operation.name]
    compiled = loading.loader(schema)
    variations = _variations(body)
    outcomes = [_outcome(compiled, document) for document in variations]
    assert outcomes == [_outcome(schema.load, document) for document in variations]
    assert ("loaded", _canonical(schema.load(variations[0]))) == outcomes[0]


@pytest.mark.parametrize("name", ["sample-size", "evaluation"])
def test_sizing_and_evaluation_examples_load_without_the_schema(
    name: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    # The two operations the compiled loaders are for: their examples never reach load.
    operation = next(op for op in all_operations() if op.name == name)
    schema = operation.request_schema
    compiled = loading.loader(schema)
    body = jsonio.loads(jsonio.dumps(EXAMPLES[name][0]).encode("utf-8"))
    expected = _canonical(schema.load(body))

    def refuse(*args: Any, **kwargs: Any) -> None:
        raise AssertionError("Schema.load was called")

    monkeypatch.setattr(schema, "load", refuse)
    for field in schema.load_fields.values():
        if isinstance(field, fields.Nested):
            monkeypatch.setattr(field.schema, "load", refuse)
    assert _canonical(compiled(body)) == expected


class _Point(Schema):
    x = fields.Integer(required=True)
    label = fields.String(load_default="none")


class _Pair(Schema):
    first = fields.Nested(_Point, required=True)
    second = fields.Nested(_Point, allow_none=True, validate=lambda p: p["x"] > 0)
    seen: list[str]

    def __init__(self) -> None:
        super().__init__()
        self.seen = []

    @validates_schema
    def _second(self, data: dict[str, Any], **kwargs: Any) -> None:
        self.seen.append(f"one:{sorted(kwargs)}")
        if data.get("second") and data["second"]["x"] == data["first"]["x"]:
            raise ValidationError("the two points must differ", "second")

    @validates_schema(pass_collection=True, pass_original=True)
    def _collection(self, data: dict[str, Any], original: Any, **kwargs: Any) -> None:
        self.seen.append("collection")

    @post_load
    def _made(self, data: dict[str, Any], **kwargs: Any) -> tuple[Any, ...]:
        return tuple(sorted(data.items()))


@pytest.mark.parametrize("document", [
    {"first": {"x": 1}},
    {"first": {"x": 1}, "second": {"x": 2, "label": "b"}},
    {"first": {"x": 1}, "second": None},
    {"first": {"x": 1}, "second": {"x": 1}},
    {"first": {"x": 1}, "second": {"x": -2}},
    {"first": {"x": "1"}},
    {"first": {}},
    {"second": {"x": 2}},
    {"first": {"x": 1}, "third": 3},
    {"first": {"x": 1, "y": 2}},
    {"first": [{"x": 1}]},
])
def test_hooks_run_in_the_order_and_with_the_arguments_of_load(document: dict[str, Any]) -> None:
    compiled_schema, plain_schema = _Pair(), _Pair()
    assert _outcome(loading.loader(compiled_schema), document) == _outcome(plain_schema.load,
                                                                            document)
    if _outcome(plain_schema.load, document)[0] == "loaded":
        # the collection validator first, then the other, with partial, many and unknown
        assert compiled_schema.seen == plain_schema.seen[len(plain_schema.seen) // 2:]


def test_schemas_with_other_hooks_are_left_to_load() -> None:
    class Checked(Schema):
        x = fields.Integer()

        @validates("x")
        def _x(self, value: int, **kwargs: Any) -> None:
            if value < 0:
                raise ValidationError("negative")

    checked = Checked()
    assert loading.loader(checked) == checked.load
    many = _Point(many=True)
    assert loading.loader(many) == many.load
