"""Response schemas turned into plain functions that write the same documents.

``schema.dump(result)`` reaches every field through marshmallow's generic accessor
(which tries the result as a mapping, then as an object) and runs the schema's hooks
through a generic dispatcher; for a result of twenty-odd fields that costs more than the
rest of the answer's writing. :func:`dumper` reads a schema's declared fields once and
returns a function that makes, for each field, the calls ``Schema.dump`` would make:
the attribute read with ``getattr``, the field's ``dump_default`` when it is absent,
the field's own ``_serialize`` (so every format, function and method field behaves as
declared), nested schemas and lists of them dumped the same way, and the one hook the
result schemas have, which leaves out the fields named in ``absent_when_none`` when
they are None.

The schemas stay the single source of the contract: anything this does not reproduce
(other hooks, ``many`` schemas, dotted attributes, ``only`` or ``exclude`` on a nested
field, a result that is a mapping) is left to ``schema.dump`` itself, and
``tests/unit/http/test_dumping.py`` compares both on the answers of every operation.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from marshmallow import Schema, fields, missing
from marshmallow.decorators import POST_DUMP, PRE_DUMP

from schemas.common import ResultSchema
from service.http.per_schema import PerSchema

Dumper = Callable[[Any], Any]


def _only_absent_hook(schema: Schema) -> bool | None:
    """True when the schema's one dump hook is ResultSchema's, False when it has none,
    None when it has others."""
    if schema._hooks[PRE_DUMP]:
        return None
    hooks = schema._hooks[POST_DUMP]
    if not hooks:
        return False
    if (
        isinstance(schema, ResultSchema)
        and len(hooks) == 1
        and hooks[0][0] == "_drop_absent"
        and not hooks[0][1]
    ):
        return True
    return None


def _nested(field: fields.Nested) -> Callable[..., Any] | None:
    if field.only or field.exclude:
        return None
    inner = dumper(field.schema)
    many = field.schema.many or field.many

    def serialize(value: Any, attr: str, obj: Any) -> Any:
        if value is None:
            return None
        return [inner(item) for item in value] if many else inner(value)

    return serialize


def _list_of_nested(field: fields.List[Any]) -> Callable[..., Any] | None:
    element = field.inner
    if type(element) is not fields.Nested:
        return None
    inner = _nested(element)
    if inner is None:
        return None

    def serialize(value: Any, attr: str, obj: Any) -> Any:
        if value is None:
            return None
        return [inner(item, attr, obj) for item in value]

    return serialize


def _compile(schema: Schema) -> Dumper:
    drop_absent = _only_absent_hook(schema)
    if drop_absent is None or schema.many:
        return schema.dump
    steps = []
    for name, field in schema.dump_fields.items():
        key = field.data_key if field.data_key is not None else name
        attribute = field.attribute if field.attribute is not None else name
        if "." in attribute:
            return schema.dump
        serialize: Callable[..., Any] | None = None
        if type(field) is fields.Nested:
            serialize = _nested(field)
        elif type(field) is fields.List:
            serialize = _list_of_nested(field)
        steps.append(
            (key, name, attribute, field, serialize or field._serialize, field._CHECK_ATTRIBUTE)
        )
    absent = frozenset(getattr(schema, "absent_when_none", ())) if drop_absent else frozenset()

    def dump(obj: Any) -> Any:
        if hasattr(obj, "__getitem__"):
            return schema.dump(obj)
        document: dict[str, Any] = {}
        for key, name, attribute, field, serialize, check in steps:
            if check:
                value = getattr(obj, attribute, missing)
                if value is missing:
                    default = field.dump_default
                    value = default() if callable(default) else default
                    if value is missing:
                        continue
            else:
                value = None
            written = serialize(value, name, obj)
            if written is missing:
                continue
            if written is None and key in absent:
                continue
            document[key] = written
        return document

    return dump


#: The function that dumps results as ``schema.dump`` does (made once per instance).
dumper = PerSchema(_compile)
