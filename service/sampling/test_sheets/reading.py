"""Reading a completed test sheet back: the recorded selection and the rows of results.

The workbook is read with python-calamine (a streaming reader of Office Open XML) after a
check of its archive, so that a crafted file cannot make the reader inflate gigabytes: the
uncompressed parts together must not exceed :data:`MAX_UNCOMPRESSED_BYTES`, nor any part
inflate more than :data:`MAX_COMPRESSION_RATIO` times (a worksheet of text compresses
about ten times; far beyond that is a decompression bomb).

Columns of the ``Tests`` sheet are found by their headings, so a reviewer may add columns
of their own or move them. Numbers read back as whole numbers where the sheet holds whole
numbers (the draw, a numbered item); texts are kept exactly.
"""

from __future__ import annotations

import json
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Final

from service.sampling.errors import InvalidInput
from service.sampling.test_sheets.layout import (
    EVALUATION_SHEET,
    ITEMS_MARKER,
    LAYOUT,
    RECORD_KEYS,
    RECORD_SHEET,
    TESTS_SHEET,
    result_header,
)

MAX_UNCOMPRESSED_BYTES: Final = 256 * 1024 * 1024
MAX_COMPRESSION_RATIO: Final = 200

FIELD: Final = "file"

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


def check_archive(path: Path) -> None:
    """Refuse a file that is not a ZIP archive or that would inflate beyond the bounds."""
    try:
        with zipfile.ZipFile(path) as archive:
            members = archive.infolist()
    except (zipfile.BadZipFile, OSError) as exc:
        raise InvalidInput(FIELD, f"is not an XLSX workbook (not a ZIP archive: {exc})") from None
    total = sum(member.file_size for member in members)
    if total > MAX_UNCOMPRESSED_BYTES:
        raise InvalidInput(
            FIELD,
            f"would inflate to {total:,} bytes; a test sheet may hold at most "
            f"{MAX_UNCOMPRESSED_BYTES:,} bytes uncompressed",
        )
    for member in members:
        if member.file_size > MAX_COMPRESSION_RATIO * max(member.compress_size, 1) and (
            member.file_size > 1024 * 1024
        ):
            raise InvalidInput(
                FIELD,
                f"part {member.filename!r} inflates {member.file_size:,} bytes from "
                f"{member.compress_size:,}, more than {MAX_COMPRESSION_RATIO} times",
            )


def _sheet_rows(
    workbook: Any, name: str, read: dict[str, list[list[Any]]] | None = None
) -> list[list[Any]]:
    """The values of sheet ``name``, from ``read`` when it holds them already."""
    if read is not None and name in read:
        return read[name]
    if name not in workbook.sheet_names:
        raise InvalidInput(
            FIELD,
            f"has no sheet named {name!r}; it is not a test sheet made by this service "
            f"(sheets: {', '.join(workbook.sheet_names)})",
        )
    rows: list[list[Any]] = workbook.get_sheet_by_name(name).to_python(skip_empty_area=False)
    return rows


def _recorded(rows: list[list[Any]]) -> RecordedSelection:
    facts: dict[str, Any] = {}
    items: list[tuple[int, Value, int]] = []
    in_items = False
    for row in rows:
        cells = [*row, "", "", ""][:3]
        if in_items:
            draw, item, position = (_value(cell) for cell in cells)
            if isinstance(draw, int) and item is not None and isinstance(position, int):
                items.append((draw, item, position))
            elif draw is not None or item is not None:
                raise InvalidInput(FIELD, "the record sheet's list of items is damaged")
        elif _text(cells[0]) == ITEMS_MARKER:
            in_items = True
        elif _text(cells[0]):
            facts[_text(cells[0])] = _value(cells[1])
    if facts.get("layout") != LAYOUT:
        raise InvalidInput(
            FIELD,
            f"the record sheet is of layout {facts.get('layout')!r}; this service reads "
            f"{LAYOUT!r}",
        )
    missing = [key for key in RECORD_KEYS if key not in facts]
    if missing or not in_items:
        raise InvalidInput(
            FIELD, f"the record sheet lacks {', '.join(missing) or 'its items'}; it is damaged"
        )
    try:
        attributes = json.loads(_text(facts["attributes"]))
        population = json.loads(_text(facts["population"])) if facts["population"] else None
    except json.JSONDecodeError:
        raise InvalidInput(
            FIELD, "the record sheet's attributes or population is damaged"
        ) from None
    sizes = facts["population_size"], facts["sample_size"]
    if not all(isinstance(size, int) for size in sizes) or not isinstance(attributes, list):
        raise InvalidInput(FIELD, "the record sheet's sizes or attributes are damaged")
    if population is not None and not isinstance(population, dict):
        raise InvalidInput(FIELD, "the record sheet's population is damaged")
    return RecordedSelection(
        selection_fingerprint=_text(facts["selection_fingerprint"]),
        population_fingerprint=_text(facts["population_fingerprint"]),
        population_size=int(facts["population_size"]),
        sample_size=int(facts["sample_size"]),
        seed=_text(facts["seed"]),
        method=_text(facts["method"]),
        algorithm=_text(facts["algorithm"]),
        attributes=tuple(str(name) for name in attributes),
        population=population,
        items=tuple(items),
    )


def _column(heading: list[str], name: str) -> int:
    if name not in heading:
        raise InvalidInput(
            FIELD,
            f"the {TESTS_SHEET} sheet has no column {name!r} in its first row "
            f"(columns: {', '.join(repr(h) for h in heading if h)})",
        )
    if heading.count(name) > 1:
        raise InvalidInput(FIELD, f"the {TESTS_SHEET} sheet has two columns {name!r}")
    return heading.index(name)


def read_test_sheet(path: Path) -> CompletedSheet:
    """Read a completed test sheet from ``path``.

    Raises
    ------
    InvalidInput
        On ``file``: not an XLSX workbook, out of the archive bounds, not a test sheet of
        this layout, or a sheet without the columns of the recorded attributes.
    """
    check_archive(path)
    from python_calamine import CalamineError, CalamineWorkbook

    try:
        workbook = CalamineWorkbook.from_path(str(path))
    except (CalamineError, OSError, ValueError) as exc:
        raise InvalidInput(FIELD, f"is not a readable XLSX workbook ({exc})") from None
    try:
        try:
            raw = {
                name: _sheet_rows(workbook, name)
                for name in workbook.sheet_names
                if name != EVALUATION_SHEET
            }
            recorded = _recorded(_sheet_rows(workbook, RECORD_SHEET, raw))
            table = _sheet_rows(workbook, TESTS_SHEET, raw)
        except CalamineError as exc:
            raise InvalidInput(FIELD, f"is not a readable XLSX workbook ({exc})") from None
    finally:
        workbook.close()
    heading = [_text(cell) for cell in (table[0] if table else [])]
    draw_at, item_at = _column(heading, "draw"), _column(heading, "item")
    results_at = [_column(heading, result_header(a)) for a in recorded.attributes]
    notes_at = [heading.index(f"{a}: notes") if f"{a}: notes" in heading else None
                for a in recorded.attributes]
    first_attribute = min(results_at, default=len(heading))
    extra = tuple(heading[3:first_attribute]) if heading[:3] == ["draw", "item", "position"] else ()
    rows: list[SheetRow] = []
    notes: list[tuple[str, ...]] = []
    for line, cells in enumerate(table[1:], start=2):
        if all(_value(cell) is None for cell in cells):
            continue
        padded = [*cells, *([""] * len(heading))]
        rows.append(
            SheetRow(
                line=line,
                draw=_value(padded[draw_at]),
                item=_value(padded[item_at]),
                results=tuple(_text(padded[k]) for k in results_at),
            )
        )
        notes.append(tuple("" if k is None else _text(padded[k]) for k in notes_at))
    sheets = tuple(
        (name, tuple(tuple(map(_copied, row)) for row in cells)) for name, cells in raw.items()
    )
    return CompletedSheet(recorded, tuple(rows), tuple(notes), extra, sheets)
