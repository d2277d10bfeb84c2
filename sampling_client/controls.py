"""A controls file: one row per control, read into the requests of one batch.

The file is CSV (RFC 4180, comma-separated, UTF-8 with or without a byte order mark).
Its first row names the columns: ``control_id`` and the request fields of the operation,
a nested field by its flag name with underscores (``population_size`` for
``population.size``). Each later row is one control; fully blank rows are skipped.

Nothing is sent unless the whole file reads cleanly. A file is refused, naming the line
and the column, when a column is unknown or missing, a control id is blank or repeated, a
required cell is blank, or a number cell is not a plain decimal: ``0.05`` and ``4200``
are numbers; ``5%``, ``0,05``, ``1e-2`` and ``4,200`` are not. A blank optional cell
leaves the field out, so the service applies its default.
"""

from __future__ import annotations

import csv
import re
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sampling_client.flags import BOOLEAN, NUMBER, STRING, FieldSpec, put

ID_COLUMN = "control_id"
CELL_KINDS = frozenset({NUMBER, STRING, BOOLEAN})

_DECIMAL = re.compile(r"-?[0-9]+(\.[0-9]+)?")


class ControlsFileError(ValueError):
    """The controls file cannot be sent; the message names the file, line and column.

    ``line`` is the file's own line number, 1-based: where the row starts, so a quoted cell
    that holds a line break does not shift the rows after it.
    """

    def __init__(self, path: str, message: str, line: int | None = None,
                 column: str | None = None) -> None:
        self.path, self.line, self.column = path, line, column
        where = path
        if line is not None:
            where += f", line {line}"
        if column is not None:
            where += f", column {column}"
        super().__init__(f"{where}: {message}")


@dataclass(frozen=True)
class Control:
    """One row of the file: the control's id, the file line it starts on, its request."""

    control_id: str
    line: int
    request: dict[str, Any]


def decimal(text: str) -> int | float:
    """A plain decimal: an int without a point, a float with one.

    >>> decimal("0.05"), decimal(" 4200 "), decimal("60.0")
    (0.05, 4200, 60.0)
    """
    candidate = text.strip()
    if not _DECIMAL.fullmatch(candidate):
        if candidate.endswith("%"):
            hint = "rates are decimals: 5% is 0.05"
        elif "," in candidate:
            hint = "use a point as the decimal separator and no thousands separator"
        else:
            hint = "write a plain decimal such as 0.05 or 4200"
        raise ValueError(f"{text!r} is not a number ({hint})")
    return int(candidate) if "." not in candidate else float(candidate)


def _cell(spec: FieldSpec, text: str) -> Any:
    if spec.kind == NUMBER:
        return decimal(text)
    if spec.kind == BOOLEAN:
        if text.strip() not in ("true", "false"):
            raise ValueError(f"{text!r} is not true or false")
        return text.strip() == "true"
    return text


def column_specs(specs: list[FieldSpec]) -> dict[str, FieldSpec]:
    """The fields a controls file can carry, by column name."""
    return {spec.name: spec for spec in specs if spec.kind in CELL_KINDS}


def _header(path: str, header: list[str], specs: list[FieldSpec]) -> list[FieldSpec | None]:
    """The spec of each column (None for the id column), or the error naming the column."""
    names = [name.strip() for name in header]
    known = column_specs(specs)
    if len(names) == 1 and ";" in names[0]:
        raise ControlsFileError(path, "the header has one column holding semicolons; "
                                "separate the columns with commas", line=1)
    for index, name in enumerate(names):
        if names.index(name) != index:
            raise ControlsFileError(path, "appears twice in the header", line=1, column=name)
    if ID_COLUMN not in names:
        raise ControlsFileError(path, f"the header has no {ID_COLUMN} column", line=1)
    columns: list[FieldSpec | None] = []
    for name in names:
        if name == ID_COLUMN:
            columns.append(None)
            continue
        spec = known.get(name)
        if spec is None:
            listed = {s.name for s in specs} - set(known)
            why = ("is a list field, which a controls file cannot carry" if name in listed
                   else f"is not a request field; the columns are {ID_COLUMN}, "
                   + ", ".join(known))
            raise ControlsFileError(path, why, line=1, column=name or "(blank)")
        columns.append(spec)
    for spec in known.values():
        # A controls file carries no list, so a field required unless a list is given is
        # required here.
        needed = spec.required or bool(spec.required_unless)
        if needed and len(spec.path) == 1 and spec.name not in names:
            raise ControlsFileError(path, f"the header has no {spec.name} column, which is "
                                    "required", line=1)
    return columns


def _row(path: str, number: int, cells: list[str],
         columns: list[FieldSpec | None]) -> Control:
    if len(cells) != len(columns):
        raise ControlsFileError(path, f"has {len(cells)} cells; the header has {len(columns)}",
                                line=number)
    control_id = cells[columns.index(None)]
    if not control_id.strip():
        raise ControlsFileError(path, "is blank; every control needs an id", line=number,
                                column=ID_COLUMN)
    request: dict[str, Any] = {}
    filled: set[tuple[str, ...]] = set()
    for spec, text in zip(columns, cells, strict=True):
        if spec is None or not text.strip():
            continue
        try:
            put(request, spec.path, _cell(spec, text))
        except ValueError as problem:
            raise ControlsFileError(path, str(problem), line=number, column=spec.name) from None
        filled.add(spec.path[:-1])
    for spec in columns:
        if spec is None or not (spec.required or bool(spec.required_unless)):
            continue
        # A required field of a nested object is required only when the object is given.
        if (len(spec.path) == 1 or spec.path[:-1] in filled) and not _has(request, spec.path):
            raise ControlsFileError(path, f"is blank, but {spec.dotted} is required", line=number,
                                    column=spec.name)
    return Control(control_id, number, request)


def _has(body: dict[str, Any], path: tuple[str, ...]) -> bool:
    node: Any = body
    for key in path:
        if not isinstance(node, dict) or key not in node:
            return False
        node = node[key]
    return True


def _numbered_rows(lines: Iterable[str]) -> list[tuple[int, list[str]]]:
    """Each CSV row with the file line it starts on (1-based; a blank line is a row)."""
    reader = csv.reader(lines, strict=True)
    rows: list[tuple[int, list[str]]] = []
    start = 1
    for cells in reader:
        rows.append((start, cells))
        start = reader.line_num + 1
    return rows


def read_controls(path: str, specs: list[FieldSpec]) -> list[Control]:
    """Every control of the file at ``path``, or :class:`ControlsFileError`."""
    try:
        with Path(path).open(encoding="utf-8-sig", newline="") as handle:
            rows = _numbered_rows(handle)
    except FileNotFoundError:
        raise ControlsFileError(path, "no such file") from None
    except UnicodeDecodeError as exc:
        raise ControlsFileError(path, f"is not UTF-8 text (byte {exc.start})") from None
    except csv.Error as exc:
        raise ControlsFileError(path, f"is not valid CSV: {exc}") from None
    except OSError as exc:
        raise ControlsFileError(path, str(exc.strerror)) from None
    if not rows:
        raise ControlsFileError(path, "is empty; its first row must name the columns")
    columns = _header(path, rows[0][1], specs)
    controls: list[Control] = []
    first_row: dict[str, int] = {}
    for number, cells in rows[1:]:
        if not any(cell.strip() for cell in cells):
            continue
        control = _row(path, number, cells, columns)
        if control.control_id in first_row:
            raise ControlsFileError(
                path, f"repeats the control id {control.control_id!r} of line "
                f"{first_row[control.control_id]}", line=number, column=ID_COLUMN)
        first_row[control.control_id] = number
        controls.append(control)
    if not controls:
        raise ControlsFileError(path, "has no controls below the header")
    return controls


def batch_operations(controls: list[Control], operation: str) -> list[dict[str, Any]]:
    """The batch items: one ``operation`` per control, with the control id as its id."""
    return [{"id": c.control_id, "operation": operation, "request": c.request}
            for c in controls]
