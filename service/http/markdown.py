"""Ticket-ready text: any operation's answer as a complete Markdown workpaper block.

Every operation answers ``Accept: text/markdown`` with the same layout, built from the
validated request and the response document, so that a reviewer reading the block alone
can tell the population, the items, the findings, their meaning and every warning:

- a heading (the operation's summary), then the answer's summary sentence (without its
  caution, which closes the block);
- **Inputs**: the scalar fields of the request as sent, nested ones by dotted path
  (``population.size``), rates also as percentages, then the defaults the service applied;
  lists follow the table in full (identifiers, ranges and exclusions), up to
  ``MAX_LISTED_VALUES`` values, beyond which their count is given;
- **Answer**: the fields named by the operation's :class:`TicketLayout`, rates and
  probabilities as percentages (see :func:`number`), coded conclusions in words; a list of
  objects becomes a table;
- **Selected items** for a selection: draw order, item and position, every item up to
  ``MAX_TABLE_ROWS``; beyond that the count and a pointer to the CSV answer;
- **Method**: the method and its reference, when the layout says how to find them;
- **Warnings**, every one; **Next steps** when the answer lists them;
- the service version and the request fingerprint, and the caution last.

Percentages are rounded for reading, to two decimals (``8.1%``) or, below 1%, to two
significant digits (``0.012%``); the JSON answer keeps full precision. Other decimals are
shown to six significant digits.

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

from service.sampling.wording import CAUTION, percent
from service.version import VERSION

MARKDOWN = "text/markdown"

# Rows of a table shown before "… and N more rows".
MAX_TABLE_ROWS = 500
# Values of one input list shown before only its count is given.
MAX_LISTED_VALUES = 1_000
# Fields (by their last name) that hold rates or probabilities: shown as percentages.
RATE_FIELDS = frozenset({
    "confidence", "tolerable_rate", "expected_rate", "achieved_confidence",
    "risk_of_overreliance", "risk_of_underreliance", "sample_deviation_rate",
    "upper_deviation_limit", "allowance_for_sampling_risk", "risk_at_tolerable_rate",
    "low", "high", "margin", "anticipated_rate", "miss_probability", "rate",
    "probability", "achieved_miss_probability",
    "underreliance_risk", "posterior_probability", "posterior_upper_limit",
    "confidence_against_1_deviant", "confidence_against_2_deviant",
    "confidence_against_3_deviant", "upper_deviation_limit_if_none_found",
    "achieved_confidence_at_tolerable",
    "plan_risk_of_overreliance", "fixed_risk_of_underreliance", "risk_share",
    "estimated_deviation_rate", "fixed_size_upper_deviation_limit",
})
# Coded values shown in words.
CODE_WORDS = {
    "supports_reliance": "supports reliance on the control as tested",
    "does_not_support_reliance": "does not support reliance on the control as tested",
}
# Characters of one value shown before it is cut with an ellipsis.
MAX_VALUE_CHARS = 200
# Document fields that are never part of the answer table.
_NOT_ANSWERS = frozenset({"summary", "warnings", "links", "curve_request", "next_steps"})
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
    # Parallel lists of the document listed as one table, in order (e.g. a selection's
    # items and positions), under "Selected items"; the CSV answer holds them all.
    listed: tuple[str, ...] = ()


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


def number(name: str, value: float) -> str:
    """A number for reading: a rate field as a percentage, other decimals to 6 digits.

    >>> number("upper_deviation_limit", 0.08100961538461539), number("interval", 70.01666)
    ('8.1%', '70.0167')
    """
    if name.rsplit(".", 1)[-1] in RATE_FIELDS and 0.0 <= value <= 1.0:
        return percent(value)
    if float(value).is_integer():
        return repr(value)
    return f"{value:.6g}"


def _value(value: Any, name: str = "") -> str:
    if value is None:
        return "none"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return escape(number(name, value))
    if isinstance(value, str):
        return escape(CODE_WORDS.get(value, value))
    if isinstance(value, list):
        if not value:
            return "empty list"
        return f"{len(value):,} values, listed below"
    if isinstance(value, Mapping):
        return ", ".join(f"{escape(str(k))} {_value(v, str(k))}" for k, v in value.items())
    return escape(str(value))


def _input_value(name: str, value: Any) -> str:
    """An input as written; a rate also as a percentage."""
    if isinstance(value, float) and not isinstance(value, bool):
        shown = repr(value)
        field = name.removesuffix(" (default)").rsplit(".", 1)[-1]
        if field in RATE_FIELDS and 0.0 <= value <= 1.0:
            shown += f" ({percent(value)})"
        return escape(shown)
    return _value(value, name)


def _scalars(value: Any, prefix: str = "") -> list[tuple[str, Any]]:
    """The fields of ``value`` by dotted path; lists are kept whole (shown by length)."""
    if isinstance(value, Mapping):
        rows: list[tuple[str, Any]] = []
        for key, item in value.items():
            path = f"{prefix}.{key}" if prefix else str(key)
            rows.extend(_scalars(item, path))
        return rows
    return [(prefix or "body", value)]


def _pairs_table(rows: list[tuple[str, Any]], inputs: bool = False) -> list[str]:
    show = _input_value if inputs else (lambda name, value: _value(value, name))
    lines = ["| field | value |", "|---|---|"]
    lines += [f"| {escape(name)} | {show(name, value)} |" for name, value in rows]
    return lines


def _listed_inputs(rows: list[tuple[str, Any]]) -> list[str]:
    """Each input list in full (up to MAX_LISTED_VALUES values): identifiers, ranges..."""
    lines: list[str] = []
    for name, value in rows:
        if not isinstance(value, list) or not value:
            continue
        shown = value[:MAX_LISTED_VALUES]
        text = "; ".join(_value(v, name) for v in shown)
        more = len(value) - len(shown)
        tail = f"; … and {more:,} more (the request holds them all)" if more else ""
        lines += ["", f"{escape(name)} ({len(value):,}): {text}{tail}"]
    return lines


def _listed_table(layout: TicketLayout, document: Mapping[str, Any]) -> list[str]:
    columns = [name for name in layout.listed if isinstance(document.get(name), list)]
    if not columns:
        return []
    count = len(document[columns[0]])
    lines = ["", f"**Selected items** ({count:,}, in draw order)", ""]
    lines.append("| draw | " + " | ".join(escape(c.removesuffix("s")) for c in columns) + " |")
    lines.append("|---|" + "---|" * len(columns))
    for row in range(min(count, MAX_TABLE_ROWS)):
        cells = [escape(str(document[c][row])) for c in columns]
        lines.append(f"| {row + 1} | " + " | ".join(cells) + " |")
    if count > MAX_TABLE_ROWS:
        lines.append(
            f"\n… and {count - MAX_TABLE_ROWS:,} more items: ask for Accept: text/csv for "
            "the whole list."
        )
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
        lines.append("| " + " | ".join(_value(item.get(c), c) for c in columns) + " |")
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
    *,
    caution: bool = True,
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
        if not _is_objects(document[name]) and name not in layout.listed
        for row in _scalars(document[name], name)
    ]
    lines = [f"### {escape(title, limit=None)}", ""]
    summary = document.get("summary")
    if isinstance(summary, str) and summary:
        lines += [escape(summary.removesuffix(CAUTION).strip(), limit=None), ""]
    lines += ["**Inputs**", ""]
    lines += _pairs_table(inputs, inputs=True) if inputs else ["none"]
    lines += _listed_inputs(inputs)
    lines += ["", "**Answer**"]
    if scalar_answers:
        lines += ["", *_pairs_table(scalar_answers)]
    for name in names:
        if _is_objects(document[name]):
            lines += ["", *_objects_table(name, document[name])]
    lines += _listed_table(layout, document)
    if layout.method is not None:
        lines += ["", f"**Method**: {escape(layout.method(document), limit=None)}"]
    warnings = document.get("warnings")
    if isinstance(warnings, list) and warnings:
        lines += ["", "**Warnings**", ""]
        lines += [f"- {escape(str(w), limit=None)}" for w in warnings]
    steps = document.get("next_steps")
    if isinstance(steps, list) and steps:
        lines += ["", "**Next steps**", ""]
        lines += [f"- {escape(str(step), limit=None)}" for step in steps]
    lines += [
        "",
        f"Service version: `{VERSION}`  ",
        f"Request fingerprint (SHA-256): `{request_fingerprint(payload)}`",
        "",
    ]
    if caution:
        lines += [f"> {CAUTION}", ""]
    return "\n".join(lines)
