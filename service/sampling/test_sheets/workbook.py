"""Reading the workbook of any test sheet: archive bounds, sheets, record sheet, headings.

The attribute and the monetary-unit test sheets are read the same way, each by its own
rules for cells and items: the archive is checked first, so that a crafted file cannot
make the reader inflate gigabytes (the uncompressed parts together must not exceed
:data:`MAX_UNCOMPRESSED_BYTES`, nor any part inflate more than
:data:`MAX_COMPRESSION_RATIO` times; a worksheet of text compresses about ten times, far
beyond that is a decompression bomb); then every sheet but an earlier evaluation's is read
with python-calamine (a streaming reader of Office Open XML). The record sheet holds a key
in column A and its value in column B, then, after the row ``items``, one row per item.
Columns of the ``Tests`` sheet are found by their headings.
"""

from __future__ import annotations

import zipfile
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import Any, Final, TypeVar

from service.sampling.errors import InvalidInput
from service.sampling.test_sheets.layout import EVALUATION_SHEET, ITEMS_MARKER, TESTS_SHEET

MAX_UNCOMPRESSED_BYTES: Final = 256 * 1024 * 1024
MAX_COMPRESSION_RATIO: Final = 200

FIELD: Final = "file"

Rows = list[list[Any]]
V = TypeVar("V")
T = TypeVar("T")


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


def read_sheets(path: Path, required: Sequence[str], kind: str) -> dict[str, Rows]:
    """The values of every sheet of the workbook at ``path`` but an earlier evaluation's,
    by name, in the workbook's order.

    ``required`` are the sheets a ``kind`` (say "test sheet") must have; a workbook without
    one of them is refused before any sheet is read.
    """
    check_archive(path)
    from python_calamine import CalamineError, CalamineWorkbook

    try:
        workbook = CalamineWorkbook.from_path(str(path))
    except (CalamineError, OSError, ValueError) as exc:
        raise InvalidInput(FIELD, f"is not a readable XLSX workbook ({exc})") from None
    try:
        names = list(workbook.sheet_names)
        for needed in required:
            if needed not in names:
                raise InvalidInput(
                    FIELD,
                    f"has no sheet named {needed!r}; it is not a {kind} made by this "
                    f"service (sheets: {', '.join(names)})",
                )
        try:
            return {
                name: workbook.get_sheet_by_name(name).to_python(skip_empty_area=False)
                for name in names
                if name != EVALUATION_SHEET
            }
        except CalamineError as exc:
            raise InvalidInput(FIELD, f"is not a readable XLSX workbook ({exc})") from None
    finally:
        workbook.close()


def read_record(
    rows: Rows,
    width: int,
    value: Callable[[Any], V],
    item: Callable[[list[Any]], T | None],
    layout: str,
    reads: str,
    keys: Sequence[str],
) -> tuple[dict[str, V], list[T]]:
    """The facts of a record sheet (key → ``value`` of column B) and its items.

    Each row after ``items``, cut or padded to ``width`` cells, is read by ``item``, in
    order, which returns None for a row to skip and raises on a damaged one. Then a record
    sheet of another ``layout`` is refused, saying what this reader ``reads`` (for
    example "this service reads 'test-sheet/1'"), and one without every key of ``keys``
    or the row ``items``.
    """
    facts: dict[str, V] = {}
    items: list[T] = []
    in_items = False
    for row in rows:
        cells = [*row, *([""] * width)][:width]
        key = value(cells[0])
        key_text = "" if key is None else str(key)
        if in_items:
            read = item(cells)
            if read is not None:
                items.append(read)
        elif key_text == ITEMS_MARKER:
            in_items = True
        elif key_text:
            facts[key_text] = value(cells[1])
    if facts.get("layout") != layout:
        raise InvalidInput(
            FIELD,
            f"the record sheet is of layout {facts.get('layout')!r}; {reads}",
        )
    missing = [key for key in keys if key not in facts]
    if missing or not in_items:
        raise InvalidInput(
            FIELD, f"the record sheet lacks {', '.join(missing) or 'its items'}; it is damaged"
        )
    return facts, items


def column(heading: Sequence[str], name: str) -> int:
    """Where the column headed ``name`` is in the ``Tests`` sheet; refused when absent or
    repeated."""
    found = optional_column(heading, name)
    if found is None:
        raise InvalidInput(
            FIELD,
            f"the {TESTS_SHEET} sheet has no column {name!r} in its first row "
            f"(columns: {', '.join(repr(h) for h in heading if h)})",
        )
    return found


def optional_column(heading: Sequence[str], name: str) -> int | None:
    """Where the column headed ``name`` is, or None; refused when repeated."""
    if heading.count(name) > 1:
        raise InvalidInput(FIELD, f"the {TESTS_SHEET} sheet has two columns {name!r}")
    return heading.index(name) if name in heading else None


def filled_rows(
    table: Rows, width: int, value: Callable[[Any], object]
) -> Iterator[tuple[int, list[Any]]]:
    """Each row of ``table`` after its heading that is not blank, with its row number in the
    sheet (the heading is row 1), padded with blank cells to at least ``width``."""
    for number, cells in enumerate(table[1:], start=2):
        if all(value(cell) is None for cell in cells):
            continue
        yield number, [*cells, *([""] * width)]


def copied_sheets(
    sheets: dict[str, Rows], value: Callable[[Any], V]
) -> tuple[tuple[str, tuple[tuple[V, ...], ...]], ...]:
    """Every sheet by name as the ``value`` of each of its cells, to write the workbook
    again."""
    return tuple(
        (name, tuple(tuple(value(cell) for cell in row) for row in cells))
        for name, cells in sheets.items()
    )
