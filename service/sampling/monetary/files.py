"""Monetary-unit selection from a population file.

A population file (:mod:`service.sampling.populations.reading`) with an ``id_column`` and an
``amount_column`` is made the same population as a JSON list of ``{"id", "amount"}`` items:
each record kept by the filters and exclusions gives the pair (identifier, amount in the
smallest currency unit), and :func:`~service.sampling.monetary.selection.select_units`
selects from those pairs. Its canonical order (identifiers in Unicode code point order)
and its fingerprints do not depend on the file's format or row order, so the JSON and file
forms of the same ledger give the same selection and the same fingerprints.

Amounts are read exactly (decimal text, never a binary float) and must be written with at
most ``scale`` decimal places, the smallest currency unit; a blank amount, or one with more
places, is refused naming its line (row, for XLSX) and the column. Identifiers follow the
rules of :func:`~service.sampling.populations.canonical.check_identifiers`: blank,
repeated or overlong identifiers are refused with the lines that hold them. Zero and
negative amounts are kept in the population fingerprint but are not sampled by amount
(module Notes of :mod:`.selection`, step 1); their records are listed apart.
"""

from __future__ import annotations

from dataclasses import dataclass
from decimal import Decimal
from typing import Final

from service.sampling.errors import InvalidInput
from service.sampling.monetary.amounts import to_units
from service.sampling.monetary.selection import DEFAULT_MAX_ITEMS, MonetarySelection, select_units
from service.sampling.populations.canonical import check_identifiers, fetch_records
from service.sampling.populations.reading import AMOUNT, FIELD, ID, RECORD, PopulationTable

SHOWN_EXCLUDED: Final = 20
"""How many records with a zero or negative amount are listed by identifier and place."""


@dataclass(frozen=True, slots=True)
class FileRecord:
    """A record of the file: its identifier, where it is, and every column's text."""

    id: str
    where: str
    values: dict[str, str]


@dataclass(frozen=True, slots=True)
class MonetaryFileSelection:
    """A monetary-unit selection from a file, with the records it names.

    ``records`` holds the record of every selected and individually significant item, by
    identifier; ``excluded`` the first :data:`SHOWN_EXCLUDED` records with a zero or
    negative amount, in canonical order.
    """

    selection: MonetarySelection
    columns: tuple[str, ...]
    records: dict[str, FileRecord]
    excluded: tuple[tuple[FileRecord, int], ...]


def _amount_column(table: PopulationTable) -> str:
    d = table.description
    if d.id_column is None:
        raise InvalidInput(
            f"{FIELD}.id_column",
            "is required for monetary-unit sampling: name the column that identifies each "
            "record (record numbers would make the selection depend on the file's row order)",
        )
    if d.amount_column is None:
        raise InvalidInput(
            f"{FIELD}.amount_column",
            "is required for monetary-unit sampling: name the column of recorded amounts "
            f"(the file's columns are {', '.join(table.columns)})",
        )
    return d.amount_column


def file_items(table: PopulationTable, scale: int) -> tuple[list[tuple[str, int]], dict[str, int]]:
    """The kept records as (identifier, amount in units of ``10**-scale``), and each
    identifier's record number."""
    column = _amount_column(table)
    check_identifiers(table)
    con = table.con
    blank = con.execute(
        f"SELECT count(*), min({RECORD}) FROM kept WHERE {AMOUNT} IS NULL"  # noqa: S608  # nosec B608
    ).fetchone()
    if blank and blank[0]:
        raise InvalidInput(
            f"{FIELD}.amount_column",
            f"{blank[0]:,} records have a blank amount in column {column!r}, the first at "
            f"{table.where(int(blank[1]))}",
        )
    rows = con.execute(f"SELECT {ID}, {AMOUNT}, {RECORD} FROM kept").fetchall()  # noqa: S608  # nosec B608
    items: list[tuple[str, int]] = []
    numbers: dict[str, int] = {}
    for identifier, amount, record in rows:
        where = table.where(int(record))
        try:
            units = to_units(Decimal(amount), f"{FIELD}.amount_column", scale)
        except InvalidInput:
            raise InvalidInput(
                f"{FIELD}.amount_column",
                f"the amount {Decimal(amount).normalize():f} at {where}, column {column!r}, "
                f"has more than {scale} decimal places (currency_decimals) or is too large",
            ) from None
        items.append((identifier, units))
        numbers[identifier] = int(record)
    if not items:
        raise InvalidInput(f"{FIELD}.filters", "no record is left in the population")
    return items, numbers


def select_units_from_file(
    table: PopulationTable,
    sample_size: int,
    seed: str | None = None,
    method: str = "fixed_interval",
    *,
    scale: int = 2,
    max_items: int = DEFAULT_MAX_ITEMS,
) -> MonetaryFileSelection:
    """Select currency units from an open population file (module docstring).

    The selection is :func:`~service.sampling.monetary.selection.select_units` of the
    file's (identifier, amount) pairs; the answer adds the selected records.
    """
    items, numbers = file_items(table, scale)
    chosen = select_units(
        tuple(items), sample_size, seed, method, scale=scale, max_items=max_items
    )
    named = [item.id for item in chosen.items]
    named += [identifier for identifier, _ in chosen.individually_significant]
    excluded = sorted((i, a) for i, a in items if a <= 0)[:SHOWN_EXCLUDED]
    wanted = [*named, *(identifier for identifier, _ in excluded)]
    columns, values = fetch_records(table, [numbers[i] for i in wanted])
    records = {
        identifier: FileRecord(identifier, table.where(numbers[identifier]), record)
        for identifier, record in zip(wanted, values, strict=True)
    }
    return MonetaryFileSelection(
        selection=chosen,
        columns=columns,
        records={i: records[i] for i in named},
        excluded=tuple((records[i], amount) for i, amount in excluded),
    )
