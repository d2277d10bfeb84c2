"""Answers as text for people: aligned tables, and the CSV of a controls batch.

A single answer is a field/value table with readable labels, then its lists as tables of
their own, its summary paragraph, its warnings and, last, the caution sentence. Rates and
probabilities are shown as percentages to six significant digits; ``--json`` gives the
service's numbers at full precision.
"""

from __future__ import annotations

import csv
import io
import json
import re
import textwrap
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

WIDTH = 100


def caution() -> str:
    """The service's caution sentence (service.sampling.wording.CAUTION)."""
    # Imported when needed: the wording module loads the computation core (scipy), which
    # the commands that only ask a server for its health, or start one, do without.
    from service.sampling.wording import CAUTION

    return CAUTION


def csv_cell(item: int | str) -> int | str:
    """A CSV cell with the formula guard of the service's selection CSV."""
    from service.http.selection import csv_cell as guarded

    return guarded(item)

# Fields that are not shown in the table: links and ready-made bodies are for programs.
_NOT_SHOWN = frozenset({"summary", "warnings", "links", "curve_request"})

# Labels where turning the name into words would not read well. An evaluation's two-sided
# interval is ``confidence_interval`` (``interval`` on services before the rename).
_LABELS = {
    "interval.low": "Interval, lower bound",
    "interval.high": "Interval, upper bound",
    "confidence_interval.low": "Confidence interval, lower bound",
    "confidence_interval.high": "Confidence interval, upper bound",
    "upper_deviation_count": "Upper deviation count",
    "ratio_to_exact": "Ratio to exact",
    "finite_population_correction": "Finite population correction",
    "strata.strata": "Suggested amount strata",
}

# Rates and probabilities, shown as percentages.
_RATE_NAMES = frozenset({
    "confidence", "upper_deviation_limit", "allowance_for_sampling_risk", "margin",
    "rate", "probability", "miss_probability", "low", "high",
})

#: The columns of a controls batch, by operation, after the control id.
HEADLINES: dict[str, tuple[str, ...]] = {
    "sample-size": ("sample_size", "allowed_deviations"),
    "evaluation": ("sample_size", "deviations", "sample_deviation_rate",
                   "upper_deviation_limit", "conclusion"),
    "plan-curve": ("risk_of_overreliance", "risk_of_underreliance"),
    "estimation-sample-size": ("recommended",),
    "selection": ("population_size", "sample_size", "seed", "seed_generated",
                  "selection_fingerprint"),
    "population-profile": ("rows_read", "rows_kept", "distinct_ids", "repeated_ids",
                           "blank_ids", "amounts.total", "reconciliation.total_difference",
                           "reconciliation.count_difference", "reconciliation.reconciles"),
    "population-stratified-selection": ("sample_size", "seed", "seed_generated", "method",
                                        "allocation"),
}


def field_value(result: Mapping[str, Any], path: str) -> Any:
    """The value at ``path`` (``amounts.total``) of an answer, None where it has none.

    >>> field_value({"amounts": {"total": "12.50"}}, "amounts.total")
    '12.50'
    """
    value: Any = result
    for key in path.split("."):
        value = value.get(key) if isinstance(value, Mapping) else None
    return value


def label(path: str) -> str:
    """A field's label: ``risk_of_overreliance`` → "Risk of overreliance".

    >>> label("allowed_deviations"), label("population.size")
    ('Allowed deviations', 'Population size')
    """
    if path in _LABELS:
        return _LABELS[path]
    words = path.replace(".", " ").replace("_", " ")
    return words[:1].upper() + words[1:]


def is_rate(path: str) -> bool:
    """Whether a field holds a rate or a probability (shown as a percentage).

    An expected sample size at a rate is a number of items, whatever its name ends with.

    >>> is_rate("plan_risk_of_overreliance"), is_rate("expected_sample_size_at_expected_rate")
    (True, False)
    >>> is_rate("sizes.confidence_against_2_deviant"), is_rate("posterior_upper_limit")
    (True, True)
    """
    leaf = path.rsplit(".", 1)[-1]
    if "sample_size" in leaf:
        return False
    return (
        leaf in _RATE_NAMES
        or leaf.endswith(("_rate", "_probability", "_risk", "_limit"))
        or leaf.startswith("risk_")
        or "_risk_of_" in leaf
        or "confidence" in leaf
        or "upper_deviation_limit" in leaf
    )


def percent(value: float) -> str:
    """A fraction as a percentage to six significant digits.

    >>> percent(0.05), percent(0.951744182743937), percent(0.07), percent(0)
    ('5%', '95.1744%', '7%', '0%')
    """
    return f"{value * 100:.6g}%"


def value_text(path: str, value: Any) -> str:
    """How one value reads in a table."""
    if value is None:
        return "none"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return f"{value:,}"
    if isinstance(value, float):
        return percent(value) if is_rate(path) else f"{value:.6g}"
    if isinstance(value, list):
        return ", ".join(value_text(path, v) for v in value) if value else "none"
    return str(value)


def aligned(rows: Sequence[Sequence[str]], header: Sequence[str] | None = None) -> list[str]:
    """Rows as lines of left-aligned columns two spaces apart; a header is underlined."""
    table = [list(header)] if header else []
    table += [list(row) for row in rows]
    if not table:
        return []
    widths = [max(len(row[i]) for row in table) for i in range(len(table[0]))]
    lines = ["  ".join(cell.ljust(w) for cell, w in zip(row, widths, strict=True)).rstrip()
             for row in table]
    if header:
        lines.insert(1, "  ".join("-" * w for w in widths))
    return lines


def _pairs(document: Mapping[str, Any], prefix: str = "") -> list[tuple[str, Any]]:
    pairs: list[tuple[str, Any]] = []
    for key, value in document.items():
        path = f"{prefix}.{key}" if prefix else key
        if not prefix and key in _NOT_SHOWN:
            continue
        if isinstance(value, Mapping):
            pairs.extend(_pairs(value, path))
        else:
            pairs.append((path, value))
    return pairs


def _is_objects(value: Any) -> bool:
    return isinstance(value, list) and bool(value) and all(isinstance(v, Mapping) for v in value)


#: The columns of a list of objects whose full content is in ``--json``: the attributes of
#: a test sheet's evaluation, the strata of a stratified selection.
_LIST_COLUMNS = {
    "evaluations": ("attribute", "passed", "deviations_found", "not_tested",
                    "sample_deviation_rate", "upper_deviation_limit",
                    "allowance_for_sampling_risk", "tolerable_rate", "conclusion"),
    "strata": ("label", "population_size", "total", "standard_deviation", "sample_size",
               "taken_in_full", "seed"),
}


def _objects_table(name: str, items: list[Mapping[str, Any]]) -> list[str]:
    """A list of objects as a table; objects that carry a summary of their own (one
    evaluation per attribute) have it as a paragraph under the table, and objects with
    selected items (strata) their items, each after their first column's value."""
    summarised = any(isinstance(item.get("summary"), str) for item in items)
    columns: list[str] = []
    for item in items:
        columns += [k for k, v in item.items() if k not in columns and not isinstance(v, list)
                    and not (summarised and (k in _NOT_SHOWN or isinstance(v, Mapping)))]
    if name in _LIST_COLUMNS and set(_LIST_COLUMNS[name]) <= set(columns):
        columns = list(_LIST_COLUMNS[name])
    rows = [[value_text(c, item.get(c)) for c in columns] for item in items]
    # A file's records keep the file's own column names, and its cells are text as written.
    headers = columns if name == "records" else [label(c) for c in columns]
    if name == "records":
        rows = [[str(item.get(c) if item.get(c) is not None else "") for c in columns]
                for item in items]
    lines = [f"{label(name)}:", "", *aligned(rows, headers)]
    listed: list[str] = []
    for item in items:
        lead = f"{item.get(columns[0])}" if columns else ""
        summary, chosen = item.get("summary"), item.get("items")
        if isinstance(summary, str) and summary:
            lines += ["", *_paragraph(f"{lead}: {split_caution(summary)}")]
        elif isinstance(chosen, list) and chosen:
            text = f"{lead} ({len(chosen):,}): " + ", ".join(_item_text(i) for i in chosen)
            listed += textwrap.wrap(text, WIDTH, subsequent_indent="    ",
                                    break_on_hyphens=False)
    if listed:
        lines += ["", "Selected items, in draw order:", *listed]
    return lines


def _selected_items(document: Mapping[str, Any]) -> list[str] | None:
    """A selection's items with their draw and position, when the document has both lists."""
    items, positions = document.get("items"), document.get("positions")
    if not (isinstance(items, list) and isinstance(positions, list)
            and len(items) == len(positions)):
        return None
    rows = [[str(draw), str(item), str(position)]
            for draw, (item, position) in enumerate(zip(items, positions, strict=True), 1)]
    return ["Selected items:", "", *aligned(rows, ["Draw", "Item", "Position"])]


def split_caution(summary: str) -> str:
    """The summary without the caution sentence it ends with (shown on its own line)."""
    return summary.removesuffix(caution()).rstrip()


def _paragraph(text: str, indent: str = "") -> list[str]:
    return textwrap.wrap(text, WIDTH, initial_indent=indent, subsequent_indent=indent) or [""]


def _closing(document: Mapping[str, Any]) -> list[str]:
    lines: list[str] = []
    summary = document.get("summary")
    if isinstance(summary, str) and summary:
        lines += ["", *_paragraph(split_caution(summary))]
    warnings = document.get("warnings")
    if isinstance(warnings, list) and warnings:
        lines += ["", "Warnings:"]
        for warning in warnings:
            lines += textwrap.wrap(str(warning), WIDTH, initial_indent="- ",
                                   subsequent_indent="  ")
    return [*lines, "", *_paragraph(caution())]


def document_text(title: str, document: Mapping[str, Any]) -> str:
    """One answer as text: the title, the field/value table, its lists, summary, caution."""
    selected = _selected_items(document)
    skip = {"items", "positions"} if selected is not None else set()
    scalars: list[list[str]] = []
    tables: list[list[str]] = []
    for path, value in _pairs(document):
        if path in skip:
            continue
        if _is_objects(value):
            tables.append(_objects_table(path, value))
        else:
            scalars.append([label(path), value_text(path, value)])
    lines = [title, "", *aligned(scalars)]
    if selected is not None:
        tables.insert(0, selected)
    for table in tables:
        lines += ["", *table]
    lines += _closing(document)
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------- batches


def problem_text(problem: Mapping[str, Any], prefix: str = "") -> str:
    """A problem's reasons in one line, each field without the ``prefix`` of its path."""
    errors = problem.get("errors")
    if isinstance(errors, Mapping) and errors:
        parts = []
        for field, messages in errors.items():
            name = str(field).removeprefix(prefix) or "request"
            text = " ".join(messages) if isinstance(messages, list) else str(messages)
            parts.append(f"{name}: {text}")
        return "; ".join(parts)
    return str(problem.get("detail") or problem.get("title") or "refused")


def _item_prefix(index: int) -> str:
    return f"operations[{index}].request."


def headline(operation: str, result: Mapping[str, Any]) -> tuple[str, ...]:
    """The fields of ``result`` that a one-row answer shows, for ``operation``."""
    if operation in HEADLINES:
        return HEADLINES[operation]
    return tuple(k for k, v in result.items()
                 if k not in _NOT_SHOWN and not isinstance(v, Mapping | list))


#: How the warnings of one control are joined in the ``warnings`` cell of the controls CSV.
WARNING_SEPARATOR = " | "


def row_warnings(answer: Mapping[str, Any]) -> list[str]:
    """The warnings of one batch answer (none for a refused item)."""
    result = answer.get("result")
    warnings = result.get("warnings") if isinstance(result, Mapping) else None
    return [str(w) for w in warnings] if isinstance(warnings, list) else []


def _rows(ids: Sequence[str], results: Sequence[Mapping[str, Any]],
          columns: Sequence[str]) -> tuple[list[list[str]], list[str], bool]:
    """One row per control (its cells, note numbers, problem), the notes, whether refused."""
    rows: list[list[str]] = []
    notes: list[str] = []
    refused = False
    for index, (control, answer) in enumerate(zip(ids, results, strict=True)):
        result = answer.get("result")
        numbers = []
        for warning in row_warnings(answer):
            notes.append(f"{control}: {warning}")
            numbers.append(f"[{len(notes)}]")
        if isinstance(result, Mapping):
            cells = [value_text(c, field_value(result, c)) for c in columns]
            rows.append([control, *cells, " ".join(numbers), ""])
        else:
            refused = True
            problem = answer.get("problem") or {}
            rows.append([control, *([""] * len(columns)), "",
                         f"refused (HTTP {answer.get('status')}): "
                         + problem_text(problem, _item_prefix(index))])
    return rows, notes, refused


def _notes(notes: Sequence[str]) -> list[str]:
    """The numbered warnings under a controls table, each wrapped under its number."""
    lines = ["", "Warnings:"]
    width = len(f"[{len(notes)}] ")
    for number, note in enumerate(notes, 1):
        lines += textwrap.wrap(note, WIDTH, initial_indent=f"[{number}] ".ljust(width),
                               subsequent_indent=" " * width)
    return lines


def controls_text(
    ids: Sequence[str], operation: str, results: Sequence[Mapping[str, Any]],
    items_file: str | None = None,
) -> str:
    """One row per control: its id, the operation's headline fields, or why it was refused.

    Every warning of every control is listed, numbered, under the table; the Warnings
    column gives each row's note numbers. The selected items of selections follow the
    table, or, when ``items_file`` is given, a line saying that they were written there.
    """
    columns = _columns(operation, results)
    rows, notes, refused = _rows(ids, results, columns)
    header = ["Control", *(label(c) for c in columns), "Warnings", "Problem"]
    keep = [True] * (len(header) - 2) + [bool(notes), refused]
    lines = aligned([[c for c, k in zip(row, keep, strict=True) if k] for row in rows],
                    [c for c, k in zip(header, keep, strict=True) if k])
    done = sum(1 for r in results if isinstance(r.get("result"), Mapping))
    warned = sum(1 for r in results if row_warnings(r))
    lines += ["", f"{done} of {len(results)} answered; {len(results) - done} refused; "
              f"{warned} with warnings."]
    chosen = selected_items(ids, results)
    if items_file is not None:
        lines += ["", f"Selected items: {len(chosen):,} rows written to {items_file}."]
    elif chosen:
        lines += ["", *_items_paragraphs(ids, results)]
    if notes:
        lines += _notes(notes)
    lines += ["", *_paragraph(caution())]
    return "\n".join(lines) + "\n"


def selected_items(ids: Sequence[str], results: Sequence[Mapping[str, Any]]
                   ) -> list[tuple[str, int, Any, Any]]:
    """``(control, draw, item, position)`` for every item the answered selections chose."""
    rows: list[tuple[str, int, Any, Any]] = []
    for control, answer in zip(ids, results, strict=True):
        result = answer.get("result")
        if not isinstance(result, Mapping):
            continue
        items, positions = result.get("items"), result.get("positions")
        if not isinstance(items, list):
            continue
        if not (isinstance(positions, list) and len(positions) == len(items)):
            positions = [None] * len(items)
        rows += [(control, draw, item, position) for draw, (item, position)
                 in enumerate(zip(items, positions, strict=True), 1)]
    return rows


def _item_text(item: Any) -> str:
    # An identifier that holds a comma or starts or ends with a space is quoted, so that
    # the comma-separated list still reads one way.
    if isinstance(item, str) and ("," in item or item != item.strip() or not item):
        return json.dumps(item, ensure_ascii=False)
    return str(item)


def _items_paragraphs(ids: Sequence[str], results: Sequence[Mapping[str, Any]]) -> list[str]:
    lines = ["Selected items, in draw order:"]
    for control, answer in zip(ids, results, strict=True):
        result = answer.get("result")
        items = result.get("items") if isinstance(result, Mapping) else None
        if not isinstance(items, list):
            continue
        size = result.get("population_size") if isinstance(result, Mapping) else None
        of = f" of {size:,}" if isinstance(size, int) else ""
        text = f"{control} ({len(items):,}{of}): " + ", ".join(_item_text(i) for i in items)
        lines += textwrap.wrap(text, WIDTH, subsequent_indent="    ", break_on_hyphens=False)
    return lines


#: The columns of the selected-items CSV of ``selection --controls --items-out``.
ITEMS_COLUMNS = ("control_id", "draw", "item", "position")


def selected_items_csv(ids: Sequence[str], results: Sequence[Mapping[str, Any]]) -> str:
    """Every selected item, one row each: control id, draw (1 = first drawn), item, position.

    Controls in the order of the file, each control's items in draw order; written as the
    service writes its selection CSV (UTF-8 with a byte order mark, CRLF, RFC 4180, the
    formula guard on text cells).
    """
    out = io.StringIO()
    out.write("\ufeff")
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(ITEMS_COLUMNS)
    writer.writerows((csv_cell(control), draw, csv_cell(item), "" if position is None
                      else position)
                     for control, draw, item, position in selected_items(ids, results))
    return out.getvalue()


def _columns(operation: str, results: Iterable[Mapping[str, Any]]) -> tuple[str, ...]:
    for answer in results:
        result = answer.get("result")
        if isinstance(result, Mapping):
            return headline(operation, result)
    return HEADLINES.get(operation, ())


def controls_csv(
    ids: Sequence[str], operation: str, results: Sequence[Mapping[str, Any]]
) -> str:
    """The same rows as CSV, as the service writes its own (UTF-8 BOM, CRLF, RFC 4180).

    Numbers are written exactly as the service gave them; a text cell that a spreadsheet
    would run as a formula is guarded as in the selection CSV. The ``warnings`` cell holds
    every warning of the row, in the service's order, joined by :data:`WARNING_SEPARATOR`.
    """
    columns = _columns(operation, results)
    out = io.StringIO()
    out.write("\ufeff")
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(("control_id", "status", *columns, "warnings", "problem"))
    for index, (control, answer) in enumerate(zip(ids, results, strict=True)):
        result = answer.get("result")
        if isinstance(result, Mapping):
            cells = [_csv_value(field_value(result, c)) for c in columns]
            problem = ""
        else:
            cells = [""] * len(columns)
            problem = problem_text(answer.get("problem") or {}, _item_prefix(index))
        warnings = WARNING_SEPARATOR.join(row_warnings(answer))
        writer.writerow((csv_cell(control), answer.get("status"), *cells, csv_cell(warnings),
                         csv_cell(problem)))
    return out.getvalue()


# An exact amount of an answer (a string such as "-7.24"): a spreadsheet reads it as the
# number it is, never as a formula, so it is written without the guard's quote.
_PLAIN_AMOUNT = re.compile(r"-?[0-9]+(\.[0-9]+)?")


def _csv_value(value: Any) -> Any:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return value if _PLAIN_AMOUNT.fullmatch(value) else csv_cell(value)
    return value


def batch_text(operations: Sequence[Mapping[str, Any]],
               results: Sequence[Mapping[str, Any]]) -> str:
    """A batch of any operations: one row per item with its status and headline answer."""
    rows = []
    for index, (item, answer) in enumerate(zip(operations, results, strict=True)):
        result = answer.get("result")
        if isinstance(result, Mapping):
            names = headline(str(item.get("operation")), result)
            text = "; ".join(f"{label(n)} {value_text(n, result.get(n))}" for n in names)
        else:
            text = problem_text(answer.get("problem") or {}, _item_prefix(index))
        rows.append([str(answer.get("id")), str(item.get("operation")),
                     str(answer.get("status")), text])
    lines = aligned(rows, ["Id", "Operation", "Status", "Answer"])
    return "\n".join([*lines, "", *_paragraph(caution())]) + "\n"
