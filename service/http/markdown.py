"""Ticket-ready text: any operation's answer as a short Markdown block.

Every operation answers ``Accept: text/markdown`` with the same layout, built from the
validated request and the response document, so a new endpoint gets it without code of
its own:

- a heading (the operation's summary);
- **Inputs**: the scalar fields of the request as sent, nested ones by dotted path
  (``population.size``), then the defaults the service applied; a list of more than
  ``MAX_TABLE_ROWS`` values is shown by its length;
- **Answer**: the fields named by the operation's :class:`TicketLayout` (by default every
  scalar field of the document that is not an input); a list of objects becomes a table;
- **Method**: the method and its reference, when the layout says how to find them;
- any warnings, the service version and the request fingerprint;
- the caution sentence.

The request fingerprint is the SHA-256 of the canonical JSON of the validated request:
``json.dumps(payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False)`` encoded
as UTF-8. Key order and white space do not change it; any value does.

Text from the caller (a population label, an identifier) is escaped so that it cannot add
Markdown structure, links or HTML to the block.
"""

from __future__ import annotations

import hashlib
import json
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

from service.sampling.wording import CAUTION
from service.version import VERSION

MARKDOWN = "text/markdown"

# Rows of a table of objects shown before "… and N more rows".
MAX_TABLE_ROWS = 25
# Characters of one value shown before it is cut with an ellipsis.
MAX_VALUE_CHARS = 200
# Document fields that are never part of the answer table.
_NOT_ANSWERS = frozenset({"summary", "warnings", "links", "curve_request"})
# Backslash-escaped: emphasis, code, links and images, HTML, tables, strike-through, and
# the "." and ":" of web addresses (which some renderers turn into links on their own).
_MARKDOWN_SPECIAL = re.compile(r"([\\`*_\[\]<>#|~&$.:])")
_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f\u2028\u2029]")


@dataclass(frozen=True)
class TicketLayout:
    """Which fields of an operation's response document are its answer, and its method.

    ``answer`` names top-level document fields in the order shown; empty means every
    scalar field that is not an input. ``method`` turns the document into the method and
    its reference, in one line.
    """

    answer: tuple[str, ...] = ()
    method: Callable[[Mapping[str, Any]], str] | None = None


def request_fingerprint(payload: Any) -> str:
    """SHA-256 (hex) of the canonical JSON of ``payload``.

    >>> request_fingerprint({"b": 1, "a": [0.05]}) == request_fingerprint({"a": [0.05], "b": 1})
    True
    >>> request_fingerprint({"a": 1})[:16]
    '015abd7f5cc57a2d'
    """
    text = json.dumps(
        payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
    )
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def escape(text: str, limit: int | None = MAX_VALUE_CHARS) -> str:
    r"""``text`` as one line of literal Markdown: control characters become spaces.

    >>> escape("PO | 1 <b>*x*</b>\nnext")
    'PO \\| 1 \\<b\\>\\*x\\*\\</b\\> next'
    """
    one_line = _CONTROL.sub(" ", text)
    if limit is not None and len(one_line) > limit:
        one_line = one_line[:limit] + "…"
    return _MARKDOWN_SPECIAL.sub(r"\\\1", one_line)


def _value(value: Any) -> str:
    if value is None:
        return "none"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int | float):
        return repr(value)
    if isinstance(value, str):
        return escape(value)
    if isinstance(value, list):
        if len(value) <= MAX_TABLE_ROWS and not any(isinstance(v, Mapping | list) for v in value):
            return ", ".join(_value(v) for v in value) if value else "empty list"
        return f"list of {len(value):,}"
    if isinstance(value, Mapping):
        return f"object of {len(value):,} fields"
    return escape(str(value))


def _scalars(value: Any, prefix: str = "") -> list[tuple[str, Any]]:
    """The fields of ``value`` by dotted path; lists are kept whole (shown by length)."""
    if isinstance(value, Mapping):
        rows: list[tuple[str, Any]] = []
        for key, item in value.items():
            path = f"{prefix}.{key}" if prefix else str(key)
            rows.extend(_scalars(item, path))
        return rows
    return [(prefix or "body", value)]


def _pairs_table(rows: list[tuple[str, Any]]) -> list[str]:
    lines = ["| field | value |", "|---|---|"]
    lines += [f"| {escape(name)} | {_value(value)} |" for name, value in rows]
    return lines


def _objects_table(name: str, items: list[Any]) -> list[str]:
    columns: list[str] = []
    for item in items[:MAX_TABLE_ROWS]:
        for key, value in item.items():
            if key not in columns and not isinstance(value, Mapping | list):
                columns.append(key)
    lines = [f"{escape(name)}:", ""]
    lines.append("| " + " | ".join(escape(c) for c in columns) + " |")
    lines.append("|" + "---|" * len(columns))
    for item in items[:MAX_TABLE_ROWS]:
        lines.append("| " + " | ".join(_value(item.get(c)) for c in columns) + " |")
    if len(items) > MAX_TABLE_ROWS:
        lines.append(f"\n… and {len(items) - MAX_TABLE_ROWS:,} more rows in the JSON answer.")
    return lines


def _is_objects(value: Any) -> bool:
    return isinstance(value, list) and bool(value) and all(isinstance(v, Mapping) for v in value)


def render(
    title: str,
    layout: TicketLayout,
    payload: Any,
    document: Mapping[str, Any],
    request_fields: tuple[str, ...] = (),
) -> str:
    """The Markdown block for one answered request.

    ``request_fields`` are the request's top-level field names: one the caller left out
    whose value the document repeats is listed among the inputs as a default.
    """
    inputs = _scalars(payload)
    sent = payload if isinstance(payload, Mapping) else {}
    inputs += [
        (f"{name} (default)", document[name])
        for name in request_fields
        if name not in sent
        and name in document
        and document[name] is not None
        and not isinstance(document[name], Mapping | list)
    ]
    input_names = {name.removesuffix(" (default)") for name, _ in inputs}
    if layout.answer:
        names = [name for name in layout.answer if name in document]
    else:
        names = [
            name
            for name, value in document.items()
            if name not in _NOT_ANSWERS
            and name not in input_names
            and (not isinstance(value, Mapping | list) or _is_objects(value))
        ]
    scalar_answers = [
        row
        for name in names
        if not _is_objects(document[name])
        for row in _scalars(document[name], name)
    ]
    lines = [f"### {escape(title, limit=None)}", "", "**Inputs**", ""]
    lines += _pairs_table(inputs) if inputs else ["none"]
    lines += ["", "**Answer**"]
    if scalar_answers:
        lines += ["", *_pairs_table(scalar_answers)]
    for name in names:
        if _is_objects(document[name]):
            lines += ["", *_objects_table(name, document[name])]
    if layout.method is not None:
        lines += ["", f"**Method**: {escape(layout.method(document), limit=None)}"]
    warnings = document.get("warnings")
    if isinstance(warnings, list) and warnings:
        lines += ["", "**Warnings**", ""]
        lines += [f"- {_value(w)}" for w in warnings]
    lines += [
        "",
        f"Service version: `{VERSION}`  ",
        f"Request fingerprint (SHA-256): `{request_fingerprint(payload)}`",
        "",
        f"> {CAUTION}",
        "",
    ]
    return "\n".join(lines)
