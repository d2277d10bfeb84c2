"""The canonical form of a file's population, and selection from it.

A population file is made the same population as the other forms of
:mod:`service.sampling.selection`, so that a selection from it is re-performable in the
same way and does not depend on the order of the file's rows:

* with an ``id_column``, the population is the identifiers of the records kept, as an
  items population: distinct, non-blank, in ascending Unicode code point order (the byte
  order of their UTF-8 encodings), with the items fingerprint of the selection algorithm's
  Notes, step 6. The same identifiers given as ``population.items`` give the same
  fingerprint and the same selection, whatever the file's format or row order.
* with record numbers as identifiers, the population is the record numbers kept, as a
  ranges population (ascending numbers, the ranges fingerprint): this one follows the
  file's row order, by its nature.

Identifiers are used exactly as written: no trimming, no case folding. Blank identifiers,
identifiers holding the character U+0000 or longer than 1,000 characters, and repeated
identifiers are refused, naming the lines that hold them.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any, Final

from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.populations.reading import (
    AMOUNT,
    FIELD,
    ID,
    RECORD,
    SHOWN,
    PopulationTable,
)
from service.sampling.selection import (
    MAX_IDENTIFIER_LENGTH,
    RangePopulation,
    Selection,
    items_fingerprint,
    select,
    select_canonical,
)

_BATCH: Final = 65_536


@dataclass(frozen=True, slots=True)
class FileSelection(Selection):
    """A selection from a population file, with the selected records.

    Attributes (beside those of :class:`~service.sampling.selection.Selection`)
    ----------
    columns : tuple of str
        The file's column names, in the file's order.
    records : tuple of dict
        The selected records in draw order, each column's text ("" when blank).
    record_numbers : tuple of int
        The selected records' numbers (1 for the first record after the header).
    where : tuple of str
        Where each selected record is in the file ("line 12", "row 12").
    """

    columns: tuple[str, ...] = ()
    records: tuple[dict[str, str], ...] = ()
    record_numbers: tuple[int, ...] = ()
    where: tuple[str, ...] = ()


def check_identifiers(table: PopulationTable, source: str = "kept") -> int:
    """Refuse blank, overlong, U+0000-holding or repeated identifiers; return how many.

    ``source`` names the table of the population (``kept``, or one stratum of it).
    """
    con = table.con
    column = table.description.id_column
    checks = (
        (f"{ID} IS NULL OR trim({ID}) = ''", f"blank identifiers in column {column!r}"),
        (f"strpos({ID}, chr(0)) > 0", "identifiers holding the character U+0000"),
        (
            f"length({ID}) > {MAX_IDENTIFIER_LENGTH}",
            f"identifiers longer than {MAX_IDENTIFIER_LENGTH:,} characters",
        ),
    )
    # One pass counts every kind of bad identifier; only a failure pays for finding lines.
    counted = con.execute(
        "SELECT count(*), count(DISTINCT " + ID + "), "
        + ", ".join(f"count(*) FILTER (WHERE {condition})" for condition, _ in checks)
        + f" FROM {source}"
    ).fetchone() or (0, 0, 0, 0, 0)
    size, distinct, *bad = (int(n) for n in counted)
    for (condition, what), count in zip(checks, bad, strict=True):
        if not count:
            continue
        rows = con.execute(
            f"SELECT {RECORD} FROM {source} WHERE {condition} ORDER BY {RECORD} LIMIT {SHOWN}"  # nosec B608
        ).fetchall()
        raise InvalidInput(
            f"{FIELD}.id_column",
            f"{count:,} {what}, at {table.wheres([r[0] for r in rows], count)}",
        )
    if distinct == size:
        return size
    repeated = con.execute(
        f"SELECT {ID}, list({RECORD} ORDER BY {RECORD}) AS at, count(*) OVER () AS n "  # nosec B608
        f"FROM {source} GROUP BY {ID} HAVING count(*) > 1 ORDER BY min({RECORD}) LIMIT {SHOWN}"
    ).fetchall()
    if repeated:
        described = "; ".join(
            f"{identifier!r} at {table.wheres(list(at))}" for identifier, at, _ in repeated
        )
        raise InvalidInput(
            f"{FIELD}.id_column",
            f"{repeated[0][2]:,} identifiers appear more than once in column {column!r}: "
            f"{described}",
        )
    return size


def _sorted_identifiers(table: PopulationTable) -> Iterator[list[bytes]]:
    reader = table.con.sql(f"SELECT {ID} FROM canon").to_arrow_reader(_BATCH)  # nosec B608
    for batch in reader:
        yield [s.encode("utf-8") for s in batch.column(0).to_pylist()]


def select_from_file(
    table: PopulationTable,
    sample_size: int,
    seed: str | None,
    method: str,
    *,
    max_items: int,
    source: str = "kept",
) -> FileSelection:
    """Select ``sample_size`` records of the file's population (module docstring).

    ``source`` names the table of the population: ``kept``, or one stratum of it.
    """
    con = table.con
    size = con.execute(f"SELECT count(*) FROM {source}").fetchone()  # nosec B608
    if not size or size[0] == 0:
        raise InvalidInput(f"{FIELD}.filters", "no record is left in the population")
    if table.description.id_column is None:
        runs = con.execute(
            f"SELECT min({RECORD}), max({RECORD}) FROM (SELECT {RECORD}, {RECORD} - "  # nosec B608
            f"row_number() OVER (ORDER BY {RECORD}) AS run FROM {source}) GROUP BY run ORDER BY 1"
        ).fetchall()
        if sample_size > max_items:
            raise ComputationTooLarge(
                "sample_size", f"sample_size {sample_size} exceeds the limit of {max_items}"
            )
        chosen = select(
            RangePopulation(tuple((int(a), int(b)) for a, b in runs)),
            sample_size,
            seed,
            method,
            max_items=max(max_items, len(runs)),
        )
        numbers = [int(item) for item in chosen.items]
    else:
        count = check_identifiers(table, source)
        con.execute(
            f"CREATE OR REPLACE TABLE canon AS SELECT {ID}, {RECORD} FROM {source} ORDER BY {ID}"  # nosec B608
        )
        fingerprint = items_fingerprint(count, _sorted_identifiers(table))
        by_position: dict[int, tuple[str, int]] = {}

        def items_at(positions: list[int]) -> tuple[str, ...]:
            found = con.execute(
                f"SELECT rowid, {ID}, {RECORD} FROM canon WHERE rowid IN "  # nosec B608
                "(SELECT unnest(?::BIGINT[]))",
                [positions],
            ).fetchall()
            by_position.update({int(p): (i, int(r)) for p, i, r in found})
            return tuple(by_position[p][0] for p in positions)

        chosen = select_canonical(
            count, fingerprint, items_at, sample_size, seed, method, max_items=max_items
        )
        numbers = [by_position[p - 1][1] for p in chosen.positions]
    columns, records = fetch_records(table, numbers)
    return FileSelection(
        **{name: getattr(chosen, name) for name in Selection.__dataclass_fields__},
        columns=columns,
        records=records,
        record_numbers=tuple(numbers),
        where=tuple(table.where(n) for n in numbers),
    )


def fetch_records(
    table: PopulationTable, numbers: list[int]
) -> tuple[tuple[str, ...], tuple[dict[str, str], ...]]:
    """The file's columns and the records numbered ``numbers``, in that order."""
    rows = table.con.execute(
        f"SELECT * FROM source WHERE {RECORD} IN (SELECT unnest(?::BIGINT[]))", [numbers]  # nosec B608
    ).fetchall()
    by_number: dict[int, tuple[Any, ...]] = {int(row[0]): row[1:] for row in rows}
    records = tuple(
        {
            name: "" if value is None else str(value)
            for name, value in zip(table.columns, by_number[n], strict=True)
        }
        for n in numbers
    )
    return table.columns, records


__all__ = ["AMOUNT", "FileSelection", "check_identifiers", "fetch_records", "select_from_file"]
