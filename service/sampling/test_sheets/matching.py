"""Matching the rows of a completed test sheet to the recorded selection.

Every test sheet's rows must be exactly the selection's. Each row is matched to a recorded
entry by its key (the draw of an attribute test sheet, the line of a monetary-unit test
sheet); an entry without a row is *missing*, a row whose key is blank, unknown or repeated
is *added*, and a matched row that differs from its entry is *changed*. All three lists
are given at once, by sheet row, in one refusal.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping, Sequence
from typing import Any, Final, TypeVar

from service.sampling.errors import InvalidInput
from service.sampling.test_sheets.workbook import FIELD

SHOWN: Final = 10
"""How many rows a refusal names in each of its lists before counting the rest."""

E = TypeVar("E")
R = TypeVar("R")


class SheetMismatch(InvalidInput):
    """The sheet's rows are not exactly the selection's; the message lists the differences."""


def listed(entries: Sequence[str]) -> str:
    """The first :data:`SHOWN` entries, then how many more there are.

    >>> listed([f"row {k}" for k in range(1, 13)]).split("; ")[-3:]
    ['row 9', 'row 10', 'and 2 more']
    """
    shown = "; ".join(entries[:SHOWN])
    more = len(entries) - SHOWN
    return shown + (f"; and {more:,} more" if more > 0 else "")


def shown(value: Any) -> str:
    """A cell's value in a message: a text quoted, anything else as it prints."""
    return repr(value) if isinstance(value, str) else str(value)


def match_rows(
    expected: Mapping[int, E],
    rows: Iterable[tuple[int, Any, Any, R]],
    key: str,
    recorded_item: Callable[[E], Any],
    differences: Callable[[R, E], list[str]],
    fingerprint: str,
) -> dict[int, R]:
    """Each recorded entry's row, by the entry's key.

    Parameters
    ----------
    expected
        The recorded entries by key.
    rows
        (sheet row, key, item, row) of each row of the sheet, in order.
    key
        The key's name in messages ("draw", "line").
    recorded_item
        The item of a recorded entry, as a message names it.
    differences
        What differs between a matched row and its entry; empty when nothing does.
    fingerprint
        The selection fingerprint, named in the refusal.

    Raises
    ------
    SheetMismatch
        On ``file``, listing the missing, added and changed rows.
    """
    seen: dict[int, R] = {}
    added: list[str] = []
    changed: list[str] = []
    for number, value, item, row in rows:
        if not isinstance(value, int) or value not in expected:
            added.append(f"sheet row {number} ({key} {shown(value)}, item {shown(item)})")
        elif value in seen:
            added.append(f"sheet row {number} ({key} {value} again, item {shown(item)})")
        else:
            seen[value] = row
            found = differences(row, expected[value])
            if found:
                changed.append(f"sheet row {number}, {key} {value}: " + ", ".join(found))
    missing = [
        f"{key} {value} (item {shown(recorded_item(entry))})"
        for value, entry in expected.items()
        if value not in seen
    ]
    parts = [
        f"{label} {len(entries):,}: {listed(entries)}"
        for label, entries in (("missing", missing), ("added", added), ("changed", changed))
        if entries
    ]
    if parts:
        raise SheetMismatch(
            FIELD,
            f"the sheet's rows are not exactly the selection's ({fingerprint}): "
            + "; ".join(parts),
        )
    return seen
