"""A controls file: one row per control, read into the requests of one batch.

The file is CSV (RFC 4180, comma-separated, UTF-8 with or without a byte order mark).
Its first row names the columns: ``control_id`` and the request fields of the operation,
a nested field by its flag name with underscores (``population_size`` for
``population.size``). Each later row is one control; fully blank rows are skipped.

For the operations that read a population file (``selection``, ``population-profile``,
``population-stratified-selection``), a ``file`` column points a control at its file: a
path, relative to the folder of the controls file unless absolute. Such a control's file
is described by the ``population_file_*`` columns, or by their short names (``id_column``,
``amount_column``: the same names as the command's flags); it is sent on its own, as an
upload, and the other controls as one batch.

Nothing is sent unless the whole file reads cleanly. A file is refused, naming the line
and the column, when a column is unknown or missing, a control id is blank or repeated, a
required cell is blank, a file named in the ``file`` column cannot be read, or a number
cell is not a plain decimal: ``0.05`` and ``4200``
are numbers; ``5%``, ``0,05``, ``1e-2`` and ``4,200`` are not. An amount (a control
total, a book value) is sent as the text written, so no digit is lost. A blank optional cell
leaves the field out, so the service applies its default.
"""

from __future__ import annotations

import csv
import re
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sampling_client.flags import BOOLEAN, NUMBER, STRING, FieldSpec, put, short_names

ID_COLUMN = "control_id"
FILE_COLUMN = "file"
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
    #: The population file of the control (from the ``file`` column), or None.
    file: Path | None = None


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
    if spec.amount:
        decimal(text)  # refused here as any number cell is; sent as written, exactly
        return text.strip()
    if spec.kind == NUMBER:
        return decimal(text)
    if spec.kind == BOOLEAN:
        if text.strip() not in ("true", "false"):
            raise ValueError(f"{text!r} is not true or false")
        return text.strip() == "true"
    return text


def column_specs(specs: list[FieldSpec]) -> dict[str, FieldSpec]:
    """The fields a controls file can carry, by column name (short names last)."""
    def cell(spec: FieldSpec) -> bool:
        return spec.kind in CELL_KINDS or spec.amount

    columns = {spec.name: spec for spec in specs if cell(spec)}
    columns.update({name: spec for name, spec in short_names(specs).items()
                    if cell(spec) and name not in columns})
    return columns


#: A column of the header: the id, the file, or a request field.
Column = FieldSpec | str


def _header(path: str, header: list[str], specs: list[FieldSpec],
            files: bool = False) -> list[Column]:
    """The spec of each column (the column's name for the id and file columns), or the
    error naming the column."""
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
    columns: list[Column] = []
    for name in names:
        if name == ID_COLUMN or (files and name == FILE_COLUMN):
            columns.append(name)
            continue
        spec = known.get(name)
        if spec is None:
            listed = {s.name for s in specs} - set(known)
            others = [ID_COLUMN, *([FILE_COLUMN] if files else []), *known]
            why = ("is a list field, which a controls file cannot carry" if name in listed
                   else "is not a request field; the columns are " + ", ".join(others))
            raise ControlsFileError(path, why, line=1, column=name or "(blank)")
        if spec in columns:
            raise ControlsFileError(path, f"is {spec.name} again, under its short name",
                                    line=1, column=name)
        columns.append(spec)
    for spec in known.values():
        # A controls file carries no list, so a field required unless a list is given is
        # required here.
        needed = spec.required or bool(spec.required_unless)
        if needed and len(spec.path) == 1 and spec.name not in names:
            raise ControlsFileError(path, f"the header has no {spec.name} column, which is "
                                    "required", line=1)
    return columns


def _row(path: str, number: int, cells: list[str], columns: list[Column]) -> Control:
    if len(cells) != len(columns):
        raise ControlsFileError(path, f"has {len(cells)} cells; the header has {len(columns)}",
                                line=number)
    control_id = cells[columns.index(ID_COLUMN)]
    if not control_id.strip():
        raise ControlsFileError(path, "is blank; every control needs an id", line=number,
                                column=ID_COLUMN)
    file = None
    if FILE_COLUMN in columns and cells[columns.index(FILE_COLUMN)].strip():
        file = _population_file(path, number, cells[columns.index(FILE_COLUMN)])
    request: dict[str, Any] = {}
    filled: set[tuple[str, ...]] = set()
    for spec, text in zip(columns, cells, strict=True):
        if isinstance(spec, str) or not text.strip():
            continue
        try:
            put(request, spec.path, _cell(spec, text))
        except ValueError as problem:
            raise ControlsFileError(path, str(problem), line=number, column=spec.name) from None
        filled.add(spec.path[:-1])
    for spec in columns:
        if isinstance(spec, str) or not (spec.required or bool(spec.required_unless)):
            continue
        # A required field of a nested object is required only when the object is given.
        if (len(spec.path) == 1 or spec.path[:-1] in filled) and not _has(request, spec.path):
            raise ControlsFileError(path, f"is blank, but {spec.dotted} is required", line=number,
                                    column=spec.name)
    return Control(control_id, number, request, file)


def _population_file(path: str, number: int, cell: str) -> Path:
    """The file a ``file`` cell names, relative to the controls file's folder; it must be
    a file that can be read."""
    named = Path(cell.strip())
    target = named if named.is_absolute() else Path(path).parent / named
    try:
        with target.open("rb"):
            pass
    except FileNotFoundError:
        raise ControlsFileError(path, f"{str(target)!r}: no such file", line=number,
                                column=FILE_COLUMN) from None
    except OSError as exc:
        raise ControlsFileError(path, f"{str(target)!r}: {exc.strerror}", line=number,
                                column=FILE_COLUMN) from None
    if target.is_dir():
        raise ControlsFileError(path, f"{str(target)!r} is a folder; name a file",
                                line=number, column=FILE_COLUMN)
    return target


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


def read_controls(path: str, specs: list[FieldSpec], files: bool = False,
                  file_required: bool = False) -> list[Control]:
    """Every control of the file at ``path``, or :class:`ControlsFileError`.

    With ``files``, a ``file`` column may name each control's population file; with
    ``file_required`` every control needs one.
    """
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
    columns = _header(path, rows[0][1], specs, files or file_required)
    if file_required and FILE_COLUMN not in columns:
        raise ControlsFileError(path, f"the header has no {FILE_COLUMN} column: each control "
                                "needs its population file", line=1)
    controls: list[Control] = []
    first_row: dict[str, int] = {}
    for number, cells in rows[1:]:
        if not any(cell.strip() for cell in cells):
            continue
        control = _row(path, number, cells, columns)
        if file_required and control.file is None:
            raise ControlsFileError(path, "is blank; each control needs its population file",
                                    line=number, column=FILE_COLUMN)
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
