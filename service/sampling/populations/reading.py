"""Reading a population file into an embedded database: CSV, XLSX or Parquet.

The file is loaded once into a DuckDB database kept in a temporary folder (removed on
leaving :func:`open_population`), with a memory limit, so that a file larger than memory
is read out of core. Every column is kept as text, exactly as written (a Parquet column of
another type as DuckDB writes it as text; an XLSX number as the shortest decimal that reads
back as the same number), beside its record number: 1 for the first record after the
header. Records are referred to by their line in a CSV file (the header is line 1, and a
record is counted as one line), by their row in an XLSX sheet (the header is row 1), and by
their record number in a Parquet file.

* **CSV**: UTF-8 with or without a byte order mark; the delimiter ``,``, ``;``, tab or
  ``|``, declared or detected as the one of them found most often in the header line;
  fields may be quoted with ``"`` (a quote inside doubled); the first line is the header.
  A line longer than ``max_line_bytes`` is refused.
* **XLSX**: the first sheet, or the one named; the first row is the header. The workbook
  is refused before it is opened when its parts would expand beyond
  ``max_xlsx_bytes`` or more than ``max_xlsx_ratio`` times their compressed size (a
  compression bomb).
* **Parquet**: as written.

Column names must be distinct; a blank header cell is named ``column N`` (N its 1-based
position).
"""

from __future__ import annotations

import csv
import tempfile
import zipfile
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import date, datetime, time, timedelta
from pathlib import Path
from typing import Any, Final

import duckdb

from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.populations.amounts import STYLES, sql_amount
from service.sampling.populations.filters import Filter, quoted, where_clause

FORMATS: Final = ("csv", "xlsx", "parquet")
DELIMITERS: Final = (",", ";", "\t", "|")
RECORD: Final = "__record__"
ID: Final = "__id__"
AMOUNT: Final = "__amount__"
RESERVED: Final = (RECORD, ID, AMOUNT, "__amount_ok__", "__places__")
FIELD: Final = "population.file"
SHOWN: Final = 5
_XLSX_MAGIC = b"PK\x03\x04"
_PARQUET_MAGIC = b"PAR1"


@dataclass(frozen=True)
class PopulationFile:
    """How to read a population file: which column identifies a record, which holds the
    amount, which records belong to the population.

    ``id_column`` None means the records are identified by their record numbers (1 for the
    first record after the header).
    """

    id_column: str | None = None
    amount_column: str | None = None
    amount_style: str = STYLES[0]
    filters: tuple[Filter, ...] = ()
    exclude: tuple[str, ...] = ()
    sheet: str | None = None
    format: str | None = None
    delimiter: str | None = None


@dataclass(frozen=True)
class ReadLimits:
    """Bounds on what a file may demand of the machine."""

    max_line_bytes: int = 1_048_576
    max_xlsx_bytes: int = 1_073_741_824
    max_xlsx_ratio: int = 200
    memory_limit: str = "512MB"
    threads: int | None = None


@dataclass
class PopulationTable:
    """An open population file: table ``source`` (every record, ``__record__`` and the
    file's columns as text) and table ``kept`` (``__record__``, ``__id__``, ``__amount__``
    of the records the filters and exclusions keep)."""

    con: duckdb.DuckDBPyConnection
    description: PopulationFile
    format: str
    columns: tuple[str, ...]
    rows_read: int
    places: int = 0
    excluded_found: int = 0
    extra: dict[str, Any] = field(default_factory=dict)

    def where(self, record: int) -> str:
        """Where a record is in the file, in the file's own terms: "line 12"."""
        if self.format == "csv":
            return f"line {record + 1}"
        if self.format == "xlsx":
            return f"row {record + 1}"
        return f"record {record}"

    def wheres(self, records: Sequence[int], total: int | None = None) -> str:
        shown = ", ".join(self.where(r) for r in records[:SHOWN])
        rest = (total if total is not None else len(records)) - min(len(records), SHOWN)
        return f"{shown} and {rest:,} more" if rest > 0 else shown


def detect_format(path: Path) -> str:
    """``xlsx`` or ``parquet`` by the file's first bytes, ``csv`` otherwise."""
    with path.open("rb") as stream:
        head = stream.read(4)
    if head == _XLSX_MAGIC:
        return "xlsx"
    if head == _PARQUET_MAGIC:
        return "parquet"
    return "csv"


@contextmanager
def open_population(
    path: Path, description: PopulationFile, limits: ReadLimits | None = None
) -> Iterator[PopulationTable]:
    """Load ``path`` as described; the database and its folder are removed on leaving."""
    limits = limits or ReadLimits()
    with tempfile.TemporaryDirectory(prefix="sampling-population-") as folder:
        config: dict[str, Any] = {
            "memory_limit": limits.memory_limit,
            "temp_directory": folder,
            "preserve_insertion_order": True,
        }
        if limits.threads is not None:
            config["threads"] = limits.threads
        # In memory, spilling to the folder beyond the memory limit: writing a database
        # file costs about three times as long to load.
        con = duckdb.connect(":memory:", config=config)
        try:
            yield _load(con, path, description, limits)
        except duckdb.OutOfMemoryException:
            raise ComputationTooLarge(
                FIELD, f"the file needs more than the {limits.memory_limit} of memory and the "
                "temporary space this service gives one request"
            ) from None
        except duckdb.Error as exc:  # arithmetic overflow of a huge total, for one
            raise InvalidInput(FIELD, f"cannot be processed: {_reason(str(exc))}") from None
        finally:
            con.close()


def _load(
    con: duckdb.DuckDBPyConnection, path: Path, description: PopulationFile, limits: ReadLimits
) -> PopulationTable:
    found = detect_format(path)
    declared = description.format
    if declared is not None and declared not in FORMATS:
        raise InvalidInput(f"{FIELD}.format", f"must be one of {', '.join(FORMATS)}")
    if declared is not None and declared != found and found != "csv":
        raise InvalidInput(
            f"{FIELD}.format", f"the file was declared {declared} but is an {found} file"
        )
    fmt = declared or found
    if description.sheet is not None and fmt != "xlsx":
        raise InvalidInput(f"{FIELD}.sheet", "a sheet can be named only for an XLSX file")
    if description.delimiter is not None and fmt != "csv":
        raise InvalidInput(f"{FIELD}.delimiter", "a delimiter applies only to a CSV file")
    columns = _LOADERS[fmt](con, path, description, limits)
    for name in columns:
        if name in RESERVED:
            raise InvalidInput(FIELD, f"the file has a column named {name!r}; rename it")
    rows = _scalar(con, "SELECT count(*) FROM source")
    table = PopulationTable(con, description, fmt, tuple(columns), rows)
    if rows == 0:
        raise InvalidInput(FIELD, "the file has a header but no records")
    _keep(table)
    return table


def _scalar(con: duckdb.DuckDBPyConnection, sql: str, parameters: Sequence[Any] = ()) -> Any:
    row = con.execute(sql, list(parameters)).fetchone()
    return None if row is None else row[0]


def _column(table: PopulationTable, name: str | None, key: str) -> None:
    if name is not None and name not in table.columns:
        raise InvalidInput(
            f"{FIELD}.{key}",
            f"no column {name!r} in the file; its columns are {', '.join(table.columns)}",
        )


def _keep(table: PopulationTable) -> None:
    """Make table ``kept``: identifier and amount of the records the filters keep."""
    d, con = table.description, table.con
    _column(table, d.id_column, "id_column")
    _column(table, d.amount_column, "amount_column")
    identifier = f"CAST({RECORD} AS VARCHAR)" if d.id_column is None else quoted(d.id_column)
    valid = value = places = "NULL"
    if d.amount_column is not None:
        valid, value, places = sql_amount(quoted(d.amount_column), d.amount_style)
        total, most = con.execute(
            f"SELECT count(*) FILTER (WHERE NOT {valid}), max({places}) FROM source"  # nosec B608
        ).fetchone() or (0, 0)
        if total:
            bad = con.execute(
                f"SELECT {RECORD}, {quoted(d.amount_column)} FROM source WHERE NOT {valid} "  # nosec B608
                f"ORDER BY {RECORD} LIMIT {SHOWN}"
            ).fetchall()
            first_record, first_text = bad[0]
            raise InvalidInput(
                f"{FIELD}.amount_column",
                f"{total:,} amounts in column {d.amount_column!r} are not written as "
                f"{d.amount_style} (at most 10 decimal places): {first_text[:40]!r} at "
                f"{table.where(first_record)}; at {table.wheres([r for r, _ in bad], total)}",
            )
        table.places = int(most or 0)
    condition, parameters = where_clause(
        d.filters, table.columns, d.amount_column, value, d.amount_style
    )
    if d.filters:
        table.extra["meeting_filters"] = _scalar(
            con, f"SELECT count(*) FROM source WHERE ({condition})", parameters  # nosec B608
        )
    con.execute("CREATE TABLE excluded AS SELECT unnest(?::VARCHAR[]) AS id", [list(d.exclude)])
    if d.exclude:
        repeated = con.execute(
            "SELECT id FROM excluded GROUP BY id HAVING count(*) > 1 ORDER BY id LIMIT 5"
        ).fetchall()
        if repeated:
            raise InvalidInput(
                f"{FIELD}.exclude",
                f"identifiers listed more than once: {', '.join(repr(r[0]) for r in repeated)}",
            )
        absent = con.execute(
            f"SELECT id FROM excluded WHERE id NOT IN (SELECT {identifier} FROM source "  # nosec B608
            f"WHERE {identifier} IS NOT NULL) ORDER BY id LIMIT 5"
        ).fetchall()
        if absent:
            raise InvalidInput(
                f"{FIELD}.exclude",
                "identifiers not in the file: " + ", ".join(repr(r[0]) for r in absent),
            )
    con.execute(
        f"CREATE TABLE kept AS SELECT {RECORD}, {identifier} AS {ID}, {value} AS {AMOUNT} "  # nosec B608
        f"FROM source WHERE ({condition}) AND ({identifier} IS NULL OR {identifier} "
        "NOT IN (SELECT id FROM excluded))",
        parameters,
    )
    table.excluded_found = len(d.exclude)


# --------------------------------------------------------------------------- CSV


def _header(path: Path, delimiter: str | None, limits: ReadLimits) -> tuple[str, list[str]]:
    """The delimiter and the column names, from the first record."""
    with path.open("rb") as stream:
        head = stream.read(limits.max_line_bytes + 1)
    end = head.find(b"\n")
    if end < 0 and len(head) > limits.max_line_bytes:
        raise InvalidInput(
            FIELD,
            f"line 1 is longer than {limits.max_line_bytes:,} bytes "
            "(SAMPLING_MAX_FILE_LINE_BYTES)",
        )
    line = head if end < 0 else head[: end + 1]
    try:
        text = line.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InvalidInput(FIELD, f"line 1 is not UTF-8 text (byte {exc.start + 1})") from None
    if delimiter is None:
        counts = {d: text.count(d) for d in DELIMITERS}
        delimiter = max(DELIMITERS, key=lambda d: counts[d])  # the first of equals: ","
    elif delimiter not in DELIMITERS:
        raise InvalidInput(f"{FIELD}.delimiter", "must be one of , ; | or a tab")
    names = next(csv.reader([text.rstrip("\r\n")], delimiter=delimiter), [])
    if not names or names == [""]:
        raise InvalidInput(FIELD, "line 1, the header, is empty")
    return delimiter, _named(names)


def _named(names: list[Any]) -> list[str]:
    columns = [
        str(name) if name is not None and str(name).strip() else f"column {k}"
        for k, name in enumerate(names, start=1)
    ]
    repeated = sorted({c for c in columns if columns.count(c) > 1})
    if repeated:
        raise InvalidInput(
            FIELD, f"column names must be distinct; repeated: {', '.join(map(repr, repeated))}"
        )
    return columns


def _load_csv(
    con: duckdb.DuckDBPyConnection, path: Path, d: PopulationFile, limits: ReadLimits
) -> list[str]:
    delimiter, columns = _header(path, d.delimiter, limits)
    try:
        con.execute(
            f"CREATE TABLE source AS SELECT row_number() OVER () AS {RECORD}, * FROM "  # nosec B608
            "read_csv(?, delim = ?, quote = '\"', escape = '\"', header = true, "
            "auto_detect = false, columns = ?, strict_mode = true, max_line_size = ?, "
            "encoding = 'utf-8', null_padding = false)",
            [str(path), delimiter, dict.fromkeys(columns, "VARCHAR"), limits.max_line_bytes],
        )
    except duckdb.Error as exc:
        message = str(exc)
        if "Maximum line size" in message:
            raise InvalidInput(
                FIELD,
                f"{_csv_line(message)}is longer than {limits.max_line_bytes:,} bytes "
                "(SAMPLING_MAX_FILE_LINE_BYTES)",
            ) from None
        raise InvalidInput(FIELD, f"cannot be read as CSV: {_reason(message)}") from None
    return columns


def _csv_line(message: str) -> str:
    """"line N " from a DuckDB CSV error, or "a line " when it names none."""
    marker = "CSV Error on Line: "
    at = message.find(marker)
    if at < 0:
        return "a line "
    number = message[at + len(marker) :].split("\n", 1)[0].strip()
    return f"line {number} " if number.isdigit() else "a line "


def _reason(message: str) -> str:
    """The useful part of a DuckDB error about a file: where, and what is wrong."""
    lines = [ln.strip() for ln in message.splitlines() if ln.strip()]
    where = _csv_line(message).strip() if "CSV Error on Line" in message else ""
    skip = ("Original Line", "Possible", "file =", "delimiter", "quote", "escape", "new_line",
            "header", "skip_rows", "comment", "strict_mode", "date_format", "timestamp_format",
            "null_padding", "sample_size", "ignore_errors", "all_varchar", "Invalid Input")
    what = [ln for ln in lines[1:] if not ln.startswith(skip)][:1]
    text = (what[0] if what else lines[0] if lines else "unknown error")[:300]
    return f"{where}: {text}" if where else text


# --------------------------------------------------------------------------- Parquet


def _load_parquet(
    con: duckdb.DuckDBPyConnection, path: Path, d: PopulationFile, limits: ReadLimits
) -> list[str]:
    try:
        described = con.execute("DESCRIBE SELECT * FROM read_parquet(?)", [str(path)]).fetchall()
        columns = [str(row[0]) for row in described]
        _named(columns)
        texts = ", ".join(f"CAST({quoted(c)} AS VARCHAR) AS {quoted(c)}" for c in columns)
        con.execute(
            f"CREATE TABLE source AS SELECT row_number() OVER () AS {RECORD}, {texts} "  # nosec B608
            "FROM read_parquet(?)",
            [str(path)],
        )
    except duckdb.Error as exc:
        raise InvalidInput(FIELD, f"cannot be read as Parquet: {_reason(str(exc))}") from None
    return columns


# --------------------------------------------------------------------------- XLSX


def check_workbook_size(path: Path, limits: ReadLimits) -> None:
    """Refuse a workbook whose parts would expand too far (a compression bomb)."""
    try:
        with zipfile.ZipFile(path) as archive:
            entries = archive.infolist()
    except (zipfile.BadZipFile, OSError):
        raise InvalidInput(FIELD, "cannot be read as XLSX: not a readable zip archive") from None
    expanded = sum(e.file_size for e in entries)
    packed = sum(e.compress_size for e in entries)
    if expanded > limits.max_xlsx_bytes:
        raise InvalidInput(
            FIELD,
            f"the workbook would expand to {expanded:,} bytes; the limit is "
            f"{limits.max_xlsx_bytes:,} bytes",
        )
    if expanded > max(packed, 1) * limits.max_xlsx_ratio:
        raise InvalidInput(
            FIELD,
            f"the workbook would expand {expanded / max(packed, 1):,.0f} times its compressed "
            f"size; the limit is {limits.max_xlsx_ratio} times (a compression bomb?)",
        )


def cell_text(value: Any) -> str | None:
    """An XLSX cell as text: numbers as the shortest decimal that reads back the same,
    whole numbers without a decimal point, dates in ISO 8601, blanks as None."""
    if value is None or value == "":
        return None
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, float):
        return str(int(value)) if value.is_integer() else repr(value)
    if isinstance(value, datetime | date | time):
        return value.isoformat()
    if isinstance(value, timedelta):
        return str(value)
    return str(value)


def _load_xlsx(
    con: duckdb.DuckDBPyConnection, path: Path, d: PopulationFile, limits: ReadLimits
) -> list[str]:
    import pyarrow as pa
    from python_calamine import CalamineWorkbook

    check_workbook_size(path, limits)
    try:
        workbook = CalamineWorkbook.from_path(str(path))
        names = list(workbook.sheet_names)
        if d.sheet is not None and d.sheet not in names:
            raise InvalidInput(
                f"{FIELD}.sheet",
                f"no sheet {d.sheet!r} in the workbook; its sheets are {', '.join(names)}",
            )
        sheet = workbook.get_sheet_by_name(d.sheet if d.sheet is not None else names[0])
        rows = sheet.to_python(skip_empty_area=False)
    except InvalidInput:
        raise
    except Exception as exc:  # the reader's errors have no common base class
        raise InvalidInput(FIELD, f"cannot be read as XLSX: {str(exc)[:300]}") from None
    if not rows:
        raise InvalidInput(FIELD, "the sheet is empty")
    columns = _named(list(rows[0]))
    width = len(columns)
    body = rows[1:]
    for number, row in enumerate(body, start=2):
        if len(row) > width and any(cell_text(v) is not None for v in row[width:]):
            raise InvalidInput(FIELD, f"row {number} has cells beyond the header's columns")
    data = {RECORD: pa.array(range(1, len(body) + 1), type=pa.int64())}
    for k, name in enumerate(columns):
        data[name] = pa.array(
            [cell_text(row[k]) if k < len(row) else None for row in body], type=pa.string()
        )
    con.register("sheet_rows", pa.table(data))
    con.execute("CREATE TABLE source AS SELECT * FROM sheet_rows")
    con.unregister("sheet_rows")
    return columns


_LOADERS = {"csv": _load_csv, "xlsx": _load_xlsx, "parquet": _load_parquet}
