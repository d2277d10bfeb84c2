"""Reading a completed test sheet back: the recorded selection and the rows of results.

The workbook is read by :func:`~service.sampling.test_sheets.workbook.read_sheets` after a
check of its archive (size and compression-ratio bounds). Columns of the ``Tests`` sheet
are found by their headings, so a reviewer may add columns of their own or move them.
Numbers read back as whole numbers where the sheet holds whole numbers (the draw, a
numbered item); texts are kept exactly.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from service.sampling.errors import InvalidInput
from service.sampling.test_sheets.layout import (
    LAYOUT,
    RECORD_KEYS,
    RECORD_SHEET,
    TESTS_SHEET,
    notes_header,
    result_header,
)
from service.sampling.test_sheets.workbook import (
    FIELD,
    check_archive,
    column,
    copied_sheets,
    filled_rows,
    read_record,
    read_sheets,
)

__all__ = ["FIELD", "CompletedSheet", "RecordedSelection", "SheetRow", "check_archive",
           "read_test_sheet"]

Value = int | str


@dataclass(frozen=True)
class RecordedSelection:
    """The selection as the record sheet holds it."""

    selection_fingerprint: str
    population_fingerprint: str
    population_size: int
    sample_size: int
    seed: str
    method: str
    algorithm: str
    attributes: tuple[str, ...]
    population: dict[str, Any] | None
    items: tuple[tuple[int, Value, int], ...]
    """(draw, item, position) of each selected item, in draw order."""


@dataclass(frozen=True)
class SheetRow:
    """One row of the ``Tests`` sheet."""

    line: int
    """The row's number in the sheet (the heading is row 1)."""
    draw: Value | None
    item: Value | None
    results: tuple[str, ...]
    """The text of each attribute's result cell, as written ('' when blank)."""


@dataclass(frozen=True)
class CompletedSheet:
    """A test sheet as read back: the recorded selection and the rows of results."""

    recorded: RecordedSelection
    rows: tuple[SheetRow, ...]
    notes: tuple[tuple[str, ...], ...]
    """Each row's notes per attribute ('' when blank), in the order of ``rows``."""
    extra_columns: tuple[str, ...]
    """The record columns of the ``Tests`` sheet between ``position`` and the first
    attribute's columns (a file population's own columns)."""
    sheets: tuple[tuple[str, tuple[tuple[int | float | str | None, ...], ...]], ...] = ()
    """Every sheet but an earlier evaluation's, by name, as the values of its cells, so
    that the workbook can be written again with an evaluation added."""


def _value(cell: Any) -> Value | None:
    """A cell as a whole number, a text, or None when blank."""
    if cell is None or cell == "":
        return None
    if isinstance(cell, bool):
        return str(cell).upper()
    if isinstance(cell, float) and cell.is_integer():
        return int(cell)
    if isinstance(cell, int | str):
        return cell
    return str(cell)


def _copied(cell: Any) -> int | float | str | None:
    """A cell as copied into a rewritten workbook: numbers stay numbers."""
    if isinstance(cell, float) and not cell.is_integer():
        return cell
    return _value(cell)


def _text(cell: Any) -> str:
    value = _value(cell)
    return "" if value is None else str(value)


def _item(cells: list[Any]) -> tuple[int, Value, int] | None:
    draw, item, position = (_value(cell) for cell in cells)
    if isinstance(draw, int) and item is not None and isinstance(position, int):
        return draw, item, position
    if draw is not None or item is not None:
        raise InvalidInput(FIELD, "the record sheet's list of items is damaged")
    return None


def _recorded(rows: list[list[Any]]) -> RecordedSelection:
    facts, items = read_record(
        rows, 3, _value, _item, LAYOUT, f"this service reads {LAYOUT!r}", RECORD_KEYS
    )
    try:
        attributes = json.loads(_text(facts["attributes"]))
        population = json.loads(_text(facts["population"])) if facts["population"] else None
    except json.JSONDecodeError:
        raise InvalidInput(
            FIELD, "the record sheet's attributes or population is damaged"
        ) from None
    population_size, sample_size = facts["population_size"], facts["sample_size"]
    if not (
        isinstance(population_size, int)
        and isinstance(sample_size, int)
        and isinstance(attributes, list)
    ):
        raise InvalidInput(FIELD, "the record sheet's sizes or attributes are damaged")
    if population is not None and not isinstance(population, dict):
        raise InvalidInput(FIELD, "the record sheet's population is damaged")
    return RecordedSelection(
        selection_fingerprint=_text(facts["selection_fingerprint"]),
        population_fingerprint=_text(facts["population_fingerprint"]),
        population_size=population_size,
        sample_size=sample_size,
        seed=_text(facts["seed"]),
        method=_text(facts["method"]),
        algorithm=_text(facts["algorithm"]),
        attributes=tuple(str(name) for name in attributes),
        population=population,
        items=tuple(items),
    )


def read_test_sheet(path: Path) -> CompletedSheet:
    """Read a completed test sheet from ``path``.

    Raises
    ------
    InvalidInput
        On ``file``: not an XLSX workbook, out of the archive bounds, not a test sheet of
        this layout, or a sheet without the columns of the recorded attributes.
    """
    raw = read_sheets(path, (RECORD_SHEET, TESTS_SHEET), "test sheet")
    recorded = _recorded(raw[RECORD_SHEET])
    table = raw[TESTS_SHEET]
    heading = [_text(cell) for cell in (table[0] if table else [])]
    draw_at, item_at = column(heading, "draw"), column(heading, "item")
    results_at = [column(heading, result_header(a)) for a in recorded.attributes]
    notes_at = [heading.index(notes_header(a)) if notes_header(a) in heading else None
                for a in recorded.attributes]
    first_attribute = min(results_at, default=len(heading))
    extra = tuple(heading[3:first_attribute]) if heading[:3] == ["draw", "item", "position"] else ()
    rows: list[SheetRow] = []
    notes: list[tuple[str, ...]] = []
    for line, padded in filled_rows(table, len(heading), _value):
        rows.append(
            SheetRow(
                line=line,
                draw=_value(padded[draw_at]),
                item=_value(padded[item_at]),
                results=tuple(_text(padded[k]) for k in results_at),
            )
        )
        notes.append(tuple("" if k is None else _text(padded[k]) for k in notes_at))
    return CompletedSheet(
        recorded, tuple(rows), tuple(notes), extra, copied_sheets(raw, _copied)
    )
