"""Reading a completed monetary-unit test sheet: the recorded selection and the rows.

The archive is checked first (:func:`~service.sampling.test_sheets.reading.check_archive`:
size and compression-ratio bounds), then the workbook is read with python-calamine.
Columns of the ``Tests`` sheet are found by their headings, so a reviewer may add columns
of their own or move them. Texts are kept exactly; numbers are read back as the shortest
decimal that gives the same binary number, which is the decimal a person typed for any
amount of up to 15 significant digits.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from service.sampling.errors import InvalidInput
from service.sampling.test_sheets.layout import EVALUATION_SHEET
from service.sampling.test_sheets.monetary_layout import (
    AUDITED,
    BOOK,
    HITS,
    ITEM,
    ITEMS_MARKER,
    KINDS,
    LAYOUT,
    LINE,
    NOTES,
    RECORD_KEYS,
)
from service.sampling.test_sheets.reading import FIELD, check_archive

TESTS_SHEET = "Tests"
RECORD_SHEET = "record"

Cell = int | float | str | None


@dataclass(frozen=True)
class RecordedItem:
    """An item as the record sheet holds it (amount in smallest currency units)."""

    line: int
    kind: str
    id: str
    book_amount: int
    hits: int


@dataclass(frozen=True)
class RecordedMonetarySelection:
    """The selection as the record sheet holds it (amounts in smallest currency units)."""

    selection_fingerprint: str
    population_fingerprint: str
    population_items: int
    sample_size: int
    units_drawn: int
    seed: str
    method: str
    algorithm: str
    scale: int
    book_value: int
    sampled_value: int
    excluded_count: int
    excluded_total: int
    items: tuple[RecordedItem, ...]


@dataclass(frozen=True)
class MonetarySheetRow:
    """One row of the ``Tests`` sheet, as written ('' or None when blank)."""

    row: int
    """The row's number in the sheet (the heading is row 1)."""
    line: Cell
    item: Cell
    book_amount: Cell
    hits: Cell
    audited_amount: Cell
    notes: str


@dataclass(frozen=True)
class CompletedMonetarySheet:
    """A monetary-unit test sheet as read back."""

    recorded: RecordedMonetarySelection
    rows: tuple[MonetarySheetRow, ...]
    sheets: tuple[tuple[str, tuple[tuple[Cell, ...], ...]], ...]
    """Every sheet but an earlier evaluation's, by name, as the values of its cells."""


def cell_value(cell: Any) -> Cell:
    """A cell as a whole number, a float, a text, or None when blank.

    >>> cell_value(1250.0), cell_value(0.1), cell_value(""), cell_value(True)
    (1250, 0.1, None, 'TRUE')
    """
    if cell is None or cell == "":
        return None
    if isinstance(cell, bool):
        return str(cell).upper()
    if isinstance(cell, float) and cell.is_integer() and abs(cell) < 2**53:
        return int(cell)
    if isinstance(cell, int | float | str):
        return cell
    return str(cell)


def _text(cell: Any) -> str:
    value = cell_value(cell)
    return "" if value is None else str(value)


def _whole(facts: dict[str, Cell], key: str) -> int:
    value = facts.get(key)
    try:
        return int(str(value))
    except ValueError:
        raise InvalidInput(FIELD, f"the record sheet's {key} is damaged") from None


def _item(cells: list[Any]) -> RecordedItem:
    try:
        line, kind, identifier, amount, hits = (_text(c) for c in cells)
        item = RecordedItem(int(line), kind, identifier, int(amount), int(hits))
    except ValueError:
        raise InvalidInput(FIELD, "the record sheet's list of items is damaged") from None
    if kind not in KINDS or not identifier:
        raise InvalidInput(FIELD, "the record sheet's list of items is damaged")
    return item


def _recorded(rows: list[list[Any]]) -> RecordedMonetarySelection:
    facts: dict[str, Cell] = {}
    listed: list[list[Any]] = []
    in_items = False
    for raw in rows:
        cells = [*raw, "", "", "", "", ""][:5]
        if in_items:
            if any(cell_value(c) is not None for c in cells):
                listed.append(cells)
        elif _text(cells[0]) == ITEMS_MARKER:
            in_items = True
        elif _text(cells[0]):
            facts[_text(cells[0])] = cell_value(cells[1])
    if facts.get("layout") != LAYOUT:
        raise InvalidInput(
            FIELD,
            f"the record sheet is of layout {facts.get('layout')!r}; this endpoint reads "
            f"{LAYOUT!r} (a monetary-unit test sheet made by /v1/monetary/selection)",
        )
    missing = [key for key in RECORD_KEYS if key not in facts]
    if missing or not in_items:
        raise InvalidInput(
            FIELD, f"the record sheet lacks {', '.join(missing) or 'its items'}; it is damaged"
        )
    return RecordedMonetarySelection(
        selection_fingerprint=_text(facts["selection_fingerprint"]),
        population_fingerprint=_text(facts["population_fingerprint"]),
        population_items=_whole(facts, "population_items"),
        sample_size=_whole(facts, "sample_size"),
        units_drawn=_whole(facts, "units_drawn"),
        seed=_text(facts["seed"]),
        method=_text(facts["method"]),
        algorithm=_text(facts["algorithm"]),
        scale=_whole(facts, "currency_decimals"),
        book_value=_whole(facts, "book_value"),
        sampled_value=_whole(facts, "sampled_value"),
        excluded_count=_whole(facts, "excluded_count"),
        excluded_total=_whole(facts, "excluded_total"),
        items=tuple(_item(cells) for cells in listed),
    )


def _column(heading: list[str], name: str, required: bool = True) -> int | None:
    if heading.count(name) > 1:
        raise InvalidInput(FIELD, f"the {TESTS_SHEET} sheet has two columns {name!r}")
    if name in heading:
        return heading.index(name)
    if not required:
        return None
    raise InvalidInput(
        FIELD,
        f"the {TESTS_SHEET} sheet has no column {name!r} in its first row "
        f"(columns: {', '.join(repr(h) for h in heading if h)})",
    )


def read_monetary_test_sheet(path: Path) -> CompletedMonetarySheet:
    """Read a completed monetary-unit test sheet from ``path``.

    Raises
    ------
    InvalidInput
        On ``file``: not an XLSX workbook, out of the archive bounds, not a monetary-unit
        test sheet of this layout, or a ``Tests`` sheet without its columns.
    """
    check_archive(path)
    from python_calamine import CalamineError, CalamineWorkbook

    try:
        workbook = CalamineWorkbook.from_path(str(path))
    except (CalamineError, OSError, ValueError) as exc:
        raise InvalidInput(FIELD, f"is not a readable XLSX workbook ({exc})") from None
    try:
        names = list(workbook.sheet_names)
        for needed in (RECORD_SHEET, TESTS_SHEET):
            if needed not in names:
                raise InvalidInput(
                    FIELD,
                    f"has no sheet named {needed!r}; it is not a monetary-unit test sheet "
                    f"made by this service (sheets: {', '.join(names)})",
                )
        try:
            raw: dict[str, list[list[Any]]] = {
                name: workbook.get_sheet_by_name(name).to_python(skip_empty_area=False)
                for name in names
                if name != EVALUATION_SHEET
            }
        except CalamineError as exc:
            raise InvalidInput(FIELD, f"is not a readable XLSX workbook ({exc})") from None
    finally:
        workbook.close()
    recorded = _recorded(raw[RECORD_SHEET])
    table = raw[TESTS_SHEET]
    heading = [_text(cell) for cell in (table[0] if table else [])]
    at = {name: _column(heading, name) for name in (LINE, ITEM, BOOK, HITS, AUDITED)}
    notes_at = _column(heading, NOTES, required=False)
    rows: list[MonetarySheetRow] = []
    for number, cells in enumerate(table[1:], start=2):
        if all(cell_value(cell) is None for cell in cells):
            continue
        padded = [*cells, *([""] * len(heading))]
        value = {name: cell_value(padded[k]) for name, k in at.items() if k is not None}
        rows.append(
            MonetarySheetRow(
                row=number,
                line=value[LINE],
                item=value[ITEM],
                book_amount=value[BOOK],
                hits=value[HITS],
                audited_amount=value[AUDITED],
                notes="" if notes_at is None else _text(padded[notes_at]),
            )
        )
    sheets = tuple(
        (name, tuple(tuple(cell_value(c) for c in row) for row in cells))
        for name, cells in raw.items()
    )
    return CompletedMonetarySheet(recorded, tuple(rows), sheets)
