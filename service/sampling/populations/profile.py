"""What a population file holds, before anything is selected from it.

A profile counts the records read and kept, the distinct, blank and repeated
identifiers, and, for an amount column, the total, the extremes and the negative and zero
amounts, all exactly (decimal arithmetic in the database, never binary floats). Given a
control total or count from the ledger, it says whether the file reconciles and by how
much it differs. Given a number of strata, it suggests amount strata by the cumulative
square root of frequency rule (:mod:`.strata`) over the positive amounts below the top
stratum's threshold, the items at or above which are listed apart (taken in full).
"""

from __future__ import annotations

from dataclasses import dataclass
from decimal import Decimal
from itertools import pairwise
from typing import Any

from service.sampling.errors import InvalidInput
from service.sampling.populations.amounts import MAX_PLACES
from service.sampling.populations.reading import AMOUNT, ID, RECORD, SHOWN, PopulationTable
from service.sampling.populations.strata import (
    CLASSES,
    class_edge,
    cumulative_root_boundaries,
)


@dataclass(frozen=True)
class Repeated:
    """An identifier found on more than one record, and where."""

    identifier: str
    where: tuple[str, ...]


@dataclass(frozen=True)
class AmountSummary:
    """The amounts of the records kept; blanks are counted apart and excluded."""

    column: str
    count: int
    blank: int
    total: Decimal
    minimum: Decimal | None
    maximum: Decimal | None
    negative_count: int
    negative_total: Decimal
    zero_count: int


@dataclass(frozen=True)
class Reconciliation:
    """The file against the ledger's control figures; differences are file − control."""

    control_total: Decimal | None
    control_count: int | None
    total_difference: Decimal | None
    count_difference: int | None
    reconciles: bool


@dataclass(frozen=True)
class Stratum:
    """Amounts from ``low`` (inclusive) to ``high`` (exclusive; None: no bound)."""

    number: int
    low: Decimal | None
    high: Decimal | None
    items: int
    total: Decimal


@dataclass(frozen=True)
class StrataSuggestion:
    """Suggested amount strata, and the top stratum taken in full."""

    asked: int
    classes: int
    strata: tuple[Stratum, ...]
    top_threshold: Decimal | None
    top_items: int
    top_total: Decimal
    left_out_items: int  # zero and negative amounts, which no stratum holds


@dataclass(frozen=True)
class PopulationProfile:
    """A population file described: counts, identifiers, amounts, reconciliation, strata."""

    format: str
    columns: tuple[str, ...]
    id_column: str | None
    rows_read: int
    rows_meeting_filters: int
    rows_excluded: int
    rows_kept: int
    distinct_ids: int
    blank_ids: int
    repeated_ids: int
    repeated_rows: int
    repeated: tuple[Repeated, ...]
    amounts: AmountSummary | None
    reconciliation: Reconciliation | None
    strata: StrataSuggestion | None


def _one(table: PopulationTable, sql: str, parameters: list[Any] | None = None) -> Any:
    row = table.con.execute(sql, parameters or []).fetchone()
    return None if row is None else row


def _exact(value: Any, places: int) -> Decimal:
    """A database decimal at the file's own number of places."""
    quantum = Decimal(1).scaleb(-places)
    return (Decimal(0) if value is None else Decimal(value)).quantize(quantum)


def profile_population(
    table: PopulationTable,
    *,
    control_total: Decimal | None = None,
    control_count: int | None = None,
    strata: int | None = None,
    top_threshold: Decimal | None = None,
) -> PopulationProfile:
    """Describe the population of an open file (module docstring)."""
    d = table.description
    if d.amount_column is None:
        for name, value in (
            ("control_total", control_total),
            ("strata", strata),
            ("top_threshold", top_threshold),
        ):
            if value is not None:
                raise InvalidInput(name, f"{name} needs an amount_column")
    blank = f"({ID} IS NULL OR trim({ID}) = '')"
    kept, distinct, blanks, repeated_ids, repeated_rows = _one(
        table,
        f"SELECT sum(n), count(*) FILTER (WHERE NOT blank), sum(n) FILTER (WHERE blank), "  # nosec B608
        "count(*) FILTER (WHERE n > 1 AND NOT blank), "
        "coalesce(sum(n) FILTER (WHERE n > 1 AND NOT blank), 0) "
        f"FROM (SELECT {ID}, {blank} AS blank, count(*) AS n FROM kept GROUP BY {ID}, blank)",
    )
    kept, blanks = int(kept or 0), int(blanks or 0)
    shown = []
    if repeated_ids:
        shown = table.con.execute(
            f"SELECT {ID}, list({RECORD} ORDER BY {RECORD}) FROM kept WHERE NOT {blank} "  # nosec B608
            f"GROUP BY {ID} HAVING count(*) > 1 ORDER BY min({RECORD}) LIMIT {SHOWN}"
        ).fetchall()
    repeated = tuple(
        Repeated(identifier, tuple(table.where(r) for r in at[:SHOWN])) for identifier, at in shown
    )
    amounts = _amounts(table) if d.amount_column is not None else None
    reconciliation = None
    if control_total is not None or control_count is not None:
        total_difference = None
        if control_total is not None and amounts is not None:  # amounts: checked above
            total_difference = amounts.total - control_total
        count_difference = None if control_count is None else int(kept) - control_count
        reconciliation = Reconciliation(
            control_total,
            control_count,
            total_difference,
            count_difference,
            reconciles=not total_difference and not count_difference,
        )
    suggestion = None
    if strata is not None:
        suggestion = suggest_strata(table, strata, top_threshold)
    elif top_threshold is not None:
        suggestion = suggest_strata(table, 1, top_threshold)
    meeting = int(table.extra.get("meeting_filters", table.rows_read))
    return PopulationProfile(
        format=table.format,
        columns=table.columns,
        id_column=d.id_column,
        rows_read=table.rows_read,
        rows_meeting_filters=meeting,
        rows_excluded=meeting - int(kept),
        rows_kept=int(kept),
        distinct_ids=int(distinct),
        blank_ids=int(blanks),
        repeated_ids=int(repeated_ids),
        repeated_rows=int(repeated_rows),
        repeated=repeated,
        amounts=amounts,
        reconciliation=reconciliation,
        strata=suggestion,
    )


def _amounts(table: PopulationTable) -> AmountSummary:
    places = table.places
    count, blank, total, low, high, negatives, negative_total, zeros = _one(
        table,
        f"SELECT count({AMOUNT}), count(*) - count({AMOUNT}), sum({AMOUNT}), min({AMOUNT}), "  # nosec B608
        f"max({AMOUNT}), count(*) FILTER (WHERE {AMOUNT} < 0), "
        f"sum({AMOUNT}) FILTER (WHERE {AMOUNT} < 0), count(*) FILTER (WHERE {AMOUNT} = 0) "
        "FROM kept",
    )
    return AmountSummary(
        column=str(table.description.amount_column),
        count=int(count),
        blank=int(blank),
        total=_exact(total, places),
        minimum=None if low is None else _exact(low, places),
        maximum=None if high is None else _exact(high, places),
        negative_count=int(negatives),
        negative_total=_exact(negative_total, places),
        zero_count=int(zeros),
    )


def suggest_strata(
    table: PopulationTable, strata: int, top_threshold: Decimal | None, classes: int = CLASSES
) -> StrataSuggestion:
    """Strata of the positive amounts below ``top_threshold`` (all when None).

    ``strata`` 1 gives one stratum beside the top stratum; 2 or more are bounded by the
    cumulative square root of frequency rule over ``classes`` equal-width classes.
    """
    if not 1 <= strata <= 20:
        raise InvalidInput("strata", f"strata must be from 1 to 20, got {strata}")
    if top_threshold is not None and top_threshold <= 0:
        raise InvalidInput("top_threshold", "top_threshold must be above zero")
    places = max(table.places, 0)
    top = "FALSE" if top_threshold is None else f"{AMOUNT} >= CAST(? AS DECIMAL(38, 10))"
    bound = [] if top_threshold is None else [top_threshold]
    body = f"{AMOUNT} > 0 AND NOT ({top})"
    top_items, top_total, left_out, low, high, count = _one(
        table,
        f"SELECT count(*) FILTER (WHERE {top}), sum({AMOUNT}) FILTER (WHERE {top}), "  # nosec B608
        f"count(*) FILTER (WHERE {AMOUNT} <= 0), min({AMOUNT}) FILTER (WHERE {body}), "
        f"max({AMOUNT}) FILTER (WHERE {body}), count(*) FILTER (WHERE {body}) FROM kept",
        bound * 5,
    )
    edges: list[Decimal] = []
    if count and strata >= 2 and low != high:
        low, high = Decimal(low), Decimal(high)
        scale = 10**MAX_PLACES
        # The class of each amount, exactly, on integers: floor((a − low) × J / (high − low)).
        units = f"CAST({AMOUNT} * {scale} AS HUGEINT)"
        span = int((high - low) * scale)
        start = int(low * scale)
        counts_by_class = dict(
            table.con.execute(
                f"SELECT least(({units} - {start}) * {classes} // {span}, {classes - 1}) AS k, "  # nosec B608
                f"count(*) FROM kept WHERE {body} GROUP BY k",
                bound,
            ).fetchall()
        )
        counts = [int(counts_by_class.get(k, 0)) for k in range(classes)]
        edges = [
            class_edge(low, high, classes, edge, places)
            for edge in cumulative_root_boundaries(counts, strata)
        ]
    limits: list[Decimal | None] = [None, *edges, None]
    # Stratum h holds the amounts from edge h − 1 (inclusive) to edge h (exclusive).
    number = " ".join(
        f"WHEN {AMOUNT} < CAST(? AS DECIMAL(38, 10)) THEN {h}" for h in range(1, len(edges) + 1)
    )
    case = f"CASE {number} ELSE {len(edges) + 1} END" if edges else "1"
    sums = {
        int(h): (int(items), total)
        for h, items, total in table.con.execute(
            f"SELECT {case} AS h, count(*), sum({AMOUNT}) FROM kept WHERE {body} GROUP BY h",  # nosec B608
            [*edges, *bound],
        ).fetchall()
    }
    found = [
        Stratum(h, lower, upper, sums.get(h, (0, None))[0], _exact(sums.get(h, (0, None))[1],
                                                                    places))
        for h, (lower, upper) in enumerate(pairwise(limits), start=1)
    ]
    return StrataSuggestion(
        asked=strata,
        classes=classes,
        strata=tuple(found),
        top_threshold=top_threshold,
        top_items=int(top_items),
        top_total=_exact(top_total, places),
        left_out_items=int(left_out),
    )
