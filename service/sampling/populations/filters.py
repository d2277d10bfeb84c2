"""Declarative filters: which records of a population file belong to the population.

A filter names a column, a comparison and a value; records are kept when they meet every
filter. Values are always bound as query parameters and column names checked against the
file's columns, so no text from the caller ever becomes part of a query.

* On the amount column, values are amounts (numbers, or text in the declared style) and
  compare exactly as decimals.
* On any other column, values are text and compare as text, character by character in
  Unicode code point order (so dates compare correctly when written ``YYYY-MM-DD``).
* A blank cell meets no filter, not even ``!=``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from decimal import Decimal
from typing import Any, Final

from service.sampling.errors import InvalidInput
from service.sampling.populations.amounts import DECIMAL_TYPE, parse_amount

COMPARISONS: Final = ("=", "!=", "<", "<=", ">", ">=", "in", "between")
"""The comparisons a filter may use."""

MAX_IN_VALUES: Final = 10_000


@dataclass(frozen=True)
class Filter:
    """Keep the records whose ``column`` compares to ``value`` by ``comparison``.

    ``value`` is one value, a list of values for ``in``, or ``[low, high]`` (inclusive)
    for ``between``.
    """

    column: str
    comparison: str
    value: Any


def quoted(name: str) -> str:
    """A column name as a quoted SQL identifier."""
    return '"' + name.replace('"', '""') + '"'


def _values(f: Filter, field: str) -> list[Any]:
    if f.comparison == "in":
        if not isinstance(f.value, list | tuple) or not f.value:
            raise InvalidInput(f"{field}.value", "in needs a non-empty list of values")
        if len(f.value) > MAX_IN_VALUES:
            raise InvalidInput(f"{field}.value", f"in takes at most {MAX_IN_VALUES:,} values")
        return list(f.value)
    if f.comparison == "between":
        if not isinstance(f.value, list | tuple) or len(f.value) != 2:
            raise InvalidInput(f"{field}.value", "between needs a list of two values: [low, high]")
        return list(f.value)
    if isinstance(f.value, list | tuple):
        raise InvalidInput(f"{field}.value", f"{f.comparison} needs one value, not a list")
    return [f.value]


def _amount(value: Any, style: str, field: str) -> Decimal:
    if isinstance(value, bool):
        raise InvalidInput(field, "must be an amount, not true or false")
    if isinstance(value, int | Decimal):
        return Decimal(value)
    if isinstance(value, float):
        return Decimal(repr(value))
    if isinstance(value, str):
        return parse_amount(value, style, field)
    raise InvalidInput(field, f"must be an amount, not {type(value).__name__}")


def where_clause(
    filters: Sequence[Filter],
    columns: Sequence[str],
    amount_column: str | None,
    amount_sql: str,
    amount_style: str,
) -> tuple[str, list[Any]]:
    """The SQL condition of every filter together and its parameters (``TRUE`` when none).

    ``amount_sql`` is the expression of the parsed amount, used for filters on the amount
    column.
    """
    parts: list[str] = []
    parameters: list[Any] = []
    for index, f in enumerate(filters):
        field = f"population.file.filters[{index}]"
        if f.column not in columns:
            raise InvalidInput(
                f"{field}.column",
                f"no column {f.column!r} in the file; its columns are {', '.join(columns)}",
            )
        if f.comparison not in COMPARISONS:
            raise InvalidInput(
                f"{field}.comparison", f"must be one of {' '.join(COMPARISONS)}"
            )
        values = _values(f, field)
        if f.column == amount_column:
            target = amount_sql
            bound: list[Any] = [
                _amount(v, amount_style, f"{field}.value") for v in values
            ]
            cast = f"CAST(? AS {DECIMAL_TYPE})"
        else:
            target = quoted(f.column)
            for v in values:
                if not isinstance(v, str):
                    raise InvalidInput(
                        f"{field}.value",
                        f"column {f.column!r} is compared as text; give the value as a string",
                    )
            bound = values
            cast = "CAST(? AS VARCHAR)"
        if f.comparison == "in":
            parts.append(f"{target} IN ({', '.join([cast] * len(bound))})")
        elif f.comparison == "between":
            parts.append(f"{target} BETWEEN {cast} AND {cast}")
        else:
            parts.append(f"{target} {f.comparison} {cast}")
        parameters.extend(bound)
    return (" AND ".join(f"({p})" for p in parts) or "TRUE"), parameters
