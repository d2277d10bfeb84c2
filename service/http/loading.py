"""Request schemas turned into plain functions that load valid documents as ``Schema.load`` does.

``schema.load(document)`` runs every field through marshmallow's generic machinery: a
closure and an error store per field, the partial and unknown options weighed for each,
the set of known keys rebuilt on every call, the hooks found through a generic
dispatcher. For the small documents of sizing and evaluation that costs about a third of
the whole answer. :func:`loader` reads a schema once and returns a function that, for a
document it can take, makes the calls ``Schema.load`` makes in the same order: each
field's own ``deserialize`` with the document key and the document (so every type,
default and validator behaves as declared), nested schemas loaded the same way and
validated by their field, then the schema's ``validates_schema`` hooks (those that take
the collection first) and its ``post_load`` hooks, with the arguments marshmallow passes.

It answers only what cannot fail: a document that is not a plain object, a key the
schema does not declare, or any ``ValidationError`` along the way sends the document to
``schema.load`` itself, from the start, so every refusal and its messages are
marshmallow's. Schemas with what this does not reproduce (``pre_load`` or field
``validates`` hooks, ``many``, ``partial``, an ``unknown`` other than raise, dotted
attributes) are always loaded by ``schema.load``. ``tests/unit/http/test_loading.py``
compares both on every operation's examples and on variations of them.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from marshmallow import RAISE, Schema, ValidationError, fields, missing
from marshmallow.decorators import POST_LOAD, PRE_LOAD, VALIDATES, VALIDATES_SCHEMA

from service.http.per_schema import PerSchema

Loader = Callable[[Any], Any]


class _Declined(Exception):
    """The document is one for ``schema.load`` itself."""


def _compile(schema: Schema) -> Loader:
    fast = _fast(schema)
    if fast is None:
        return schema.load

    def load(document: Any) -> Any:
        try:
            return fast(document)
        except _Declined:
            return schema.load(document)

    return load


def _hooks_in_order(schema: Schema, tag: str) -> list[tuple[Callable[..., Any], bool]]:
    """(bound hook, pass_original) in the order ``Schema.load`` runs them for one document:
    the hooks that take the collection, then the others, each group as declared."""
    declared = schema._hooks[tag]
    ordered = [hook for hook in declared if hook[1]] + [hook for hook in declared if not hook[1]]
    return [(getattr(schema, name), bool(options.get("pass_original", False)))
            for name, _, options in ordered]


def _nested(field: fields.Field[Any]) -> Loader | None:
    """The loader of a plain nested document field, or None for ``field.deserialize``."""
    if type(field) is not fields.Nested or field.many or field.unknown is not None:
        return None
    nested_schema = field.schema
    if nested_schema.many:
        return None
    return loader(nested_schema)


def _fast(schema: Schema) -> Callable[[Any], Any] | None:
    """The loader of documents that cannot fail, or None when the schema needs ``load``."""
    hooks = schema._hooks
    if (
        hooks[PRE_LOAD] or hooks[VALIDATES] or schema.many or schema.partial
        or schema.unknown != RAISE
    ):
        return None
    plan: list[tuple[str, str, fields.Field[Any], Loader | None]] = []
    for name, field in schema.load_fields.items():
        key = field.data_key if field.data_key is not None else name
        attribute = field.attribute or name
        if "." in attribute:
            return None
        plan.append((key, attribute, field, _nested(field)))
    known = frozenset(key for key, _, _, _ in plan)
    validators = _hooks_in_order(schema, VALIDATES_SCHEMA)
    processors = _hooks_in_order(schema, POST_LOAD)
    partial, unknown, make_result = schema.partial, schema.unknown, schema.dict_class

    def load(document: Any) -> Any:
        if type(document) is not dict or not known.issuperset(document):
            raise _Declined
        result = make_result()
        try:
            for key, attribute, field, nested in plan:
                raw = document.get(key, missing)
                if nested is not None and raw is not missing and raw is not None:
                    # Field.deserialize for a nested document: the schema's load, then
                    # the field's validators
                    value = nested(raw)
                    field._validate(value)
                else:
                    value = field.deserialize(raw, key, document)
                if value is not missing:
                    result[attribute] = value
            for validate, original in validators:
                if original:
                    validate(result, document, partial=partial, many=False, unknown=unknown)
                else:
                    validate(result, partial=partial, many=False, unknown=unknown)
            for process, original in processors:
                if original:
                    result = process(result, document, many=False, partial=partial,
                                     unknown=unknown)
                else:
                    result = process(result, many=False, partial=partial, unknown=unknown)
        except ValidationError:
            raise _Declined from None
        return result

    return load


#: The function that loads documents as ``schema.load`` does (made once per instance).
loader = PerSchema(_compile)
