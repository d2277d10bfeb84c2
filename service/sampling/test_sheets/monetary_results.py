"""Checking a completed monetary-unit test sheet and evaluating the misstatements it records.

:func:`evaluate_monetary_test_sheet` first checks the record sheet against itself (the
lines run 1, 2, ...; the hits of the sampled items add up to the units drawn; the book
amounts add up to the recorded totals), then refuses a ``Tests`` sheet whose rows are not
exactly the recorded items: each row is matched by its ``line``, and a line without a row
(missing), a row whose line is blank, unknown or repeated (added) and a row whose item,
book amount or hits differ from the record (changed) are all listed, by sheet row.

Each item's misstatement is its book amount less the audited amount written beside it
(decimal, at most ``currency_decimals`` places). A blank audited amount means the item was
not tested; such items are refused unless the request says how to treat them:
``count_as_misstated`` takes each as audited at 0, a 100% overstatement taint (common
practice: an item that cannot be tested gives no evidence that it is fairly stated, so it
is treated as wholly misstated). The items whose audited amount differs from the book
amount are then the misstatements of :func:`~service.sampling.monetary.evaluation.
evaluate_monetary_sample`, with the value sampled by units (``sampled_value``) as the book
value, the units drawn as the sample size and the recorded selection method; the
individually significant items' misstatements count in full. The result is exactly the
JSON evaluation of the same misstatements.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from decimal import Decimal, InvalidOperation
from typing import Final

from service.sampling.errors import InvalidInput
from service.sampling.monetary.amounts import to_decimal, to_units
from service.sampling.monetary.evaluation import (
    Misstatement,
    MonetaryEvaluation,
    evaluate_monetary_sample,
)
from service.sampling.monetary.selection import ALGORITHM_ID, METHODS
from service.sampling.populations.amounts import parse_amount
from service.sampling.test_sheets.monetary_layout import SAMPLED, SIGNIFICANT
from service.sampling.test_sheets.monetary_reading import (
    Cell,
    CompletedMonetarySheet,
    RecordedItem,
    RecordedMonetarySelection,
)
from service.sampling.test_sheets.reading import FIELD
from service.sampling.test_sheets.results import SheetMismatch

COUNT_AS_MISSTATED: Final = "count_as_misstated"
NOT_TESTED_TREATMENTS: Final = (COUNT_AS_MISSTATED,)

SHOWN: Final = 10
"""How many rows a refusal names in each of its lists before counting the rest."""


@dataclass(frozen=True)
class TestedItem:
    """An item of the sheet with its audited amount (smallest currency units)."""

    __test__ = False  # not a pytest test class

    line: int
    id: str
    kind: str
    book_amount: int
    audited_amount: int
    hits: int
    tested: bool
    notes: str


@dataclass(frozen=True)
class MonetarySheetEvaluation:
    """A checked monetary-unit test sheet, its items and their evaluation."""

    recorded: RecordedMonetarySelection
    items: tuple[TestedItem, ...]
    not_tested: str | None
    evaluation: MonetaryEvaluation
    warnings: tuple[str, ...]
    sheet: CompletedMonetarySheet

    @property
    def misstatements(self) -> tuple[TestedItem, ...]:
        return tuple(i for i in self.items if i.audited_amount != i.book_amount)


def _listed(entries: Sequence[str]) -> str:
    shown = "; ".join(entries[:SHOWN])
    more = len(entries) - SHOWN
    return shown + (f"; and {more:,} more" if more > 0 else "")


def _show(value: Cell) -> str:
    return repr(value) if isinstance(value, str) else str(value)


def _check_recorded(recorded: RecordedMonetarySelection) -> None:
    """The record sheet against its own totals; a damaged one cannot be evaluated."""
    items = recorded.items
    sampled = [i for i in items if i.kind == SAMPLED]
    significant = [i for i in items if i.kind == SIGNIFICANT]
    problems = []
    if [i.line for i in items] != list(range(1, len(items) + 1)):
        problems.append("its lines do not run 1, 2, ...")
    if len({i.id for i in items}) != len(items):
        problems.append("an item is listed twice")
    if sum(i.hits for i in sampled) != recorded.units_drawn:
        problems.append("the hits do not add up to units_drawn")
    if sum(i.book_amount for i in sampled) > recorded.sampled_value:
        problems.append("the sampled items exceed sampled_value")
    if sum(i.book_amount for i in significant) + recorded.sampled_value != recorded.book_value:
        problems.append("the individually significant items and sampled_value do not add up "
                        "to book_value")
    if any(i.book_amount <= 0 for i in items):
        problems.append("an item's book amount is not above 0")
    if recorded.method not in METHODS or recorded.algorithm != ALGORITHM_ID:
        problems.append(f"its method or algorithm is not one of this service's ({ALGORITHM_ID})")
    if problems:
        raise SheetMismatch(FIELD, "the record sheet is damaged: " + "; ".join(problems))


def _amount(cell: Cell, scale: int, where: str) -> int:
    """A cell's amount in units; numbers through their shortest decimal, texts as written
    in the style 1,234.56."""
    if isinstance(cell, float):
        text = repr(cell)
    elif isinstance(cell, int):
        text = str(cell)
    else:
        text = str(cell)
    try:
        value = parse_amount(text, where=where) if isinstance(cell, str) else Decimal(text)
    except (InvalidInput, InvalidOperation):
        raise InvalidInput(FIELD, f"{where}: {text[:40]!r} is not a decimal amount") from None
    return to_units(value, where, scale)


def _matched(
    sheet: CompletedMonetarySheet,
) -> list[tuple[RecordedItem, Cell, str, int]]:
    """Each recorded item with its row's audited amount cell, notes and sheet row."""
    recorded = sheet.recorded
    expected = {item.line: item for item in recorded.items}
    seen: dict[int, tuple[Cell, str, int]] = {}
    added: list[str] = []
    changed: list[str] = []
    for row in sheet.rows:
        line = row.line
        if not isinstance(line, int) or line not in expected:
            added.append(f"sheet row {row.row} (line {_show(line)}, item {_show(row.item)})")
            continue
        if line in seen:
            added.append(f"sheet row {row.row} (line {line} again, item {_show(row.item)})")
            continue
        seen[line] = (row.audited_amount, row.notes, row.row)
        item = expected[line]
        differences = []
        if str(row.item) != item.id:
            differences.append(f"item {_show(row.item)} in the sheet, {item.id!r} recorded")
        try:
            book = _amount(row.book_amount, recorded.scale, "book amount")
        except InvalidInput:
            book = None
        if book != item.book_amount:
            differences.append(
                f"book amount {_show(row.book_amount)} in the sheet, "
                f"{to_decimal(item.book_amount, recorded.scale)} recorded"
            )
        if item.kind == SAMPLED and row.hits != item.hits:
            differences.append(f"hits {_show(row.hits)} in the sheet, {item.hits} recorded")
        if differences:
            changed.append(f"sheet row {row.row}, line {line}: " + ", ".join(differences))
    missing = [
        f"line {line} (item {item.id!r})" for line, item in expected.items() if line not in seen
    ]
    parts = [
        f"{label} {len(entries):,}: {_listed(entries)}"
        for label, entries in (("missing", missing), ("added", added), ("changed", changed))
        if entries
    ]
    if parts:
        raise SheetMismatch(
            FIELD,
            "the sheet's rows are not exactly the selection's "
            f"({recorded.selection_fingerprint}): " + "; ".join(parts),
        )
    return [(item, *seen[item.line]) for item in recorded.items]


def _tested(sheet: CompletedMonetarySheet, not_tested: str | None) -> list[TestedItem]:
    scale = sheet.recorded.scale
    items: list[TestedItem] = []
    bad: list[str] = []
    blank: list[str] = []
    for item, cell, notes, row in _matched(sheet):
        where = f"sheet row {row}, audited amount"
        if cell is None:
            blank.append(f"sheet row {row} (item {item.id!r})")
            audited, tested = 0, False
        else:
            try:
                audited, tested = _amount(cell, scale, where), True
            except InvalidInput as exc:
                bad.append(exc.message if exc.message.startswith(where) else f"{where}: "
                           f"{exc.message}")
                continue
        items.append(
            TestedItem(item.line, item.id, item.kind, item.book_amount, audited, item.hits,
                       tested, notes)
        )
    if bad:
        raise InvalidInput(
            FIELD,
            f"{len(bad):,} audited amounts are not decimal amounts with at most {scale} "
            f"decimal places: {_listed(bad)}",
        )
    if blank and not_tested is None:
        raise InvalidInput(
            "not_tested",
            f"{len(blank):,} items have no audited amount (not tested): {_listed(blank)}; "
            f"say how to treat them: {COUNT_AS_MISSTATED} (each taken as audited at 0, a "
            "100% misstatement)",
        )
    return items


def evaluate_monetary_test_sheet(
    sheet: CompletedMonetarySheet,
    confidence: float = 0.95,
    tolerable_misstatement: int | None = None,
    not_tested: str | None = None,
) -> MonetarySheetEvaluation:
    """Check ``sheet`` against its selection and evaluate its misstatements (module Notes).

    ``tolerable_misstatement`` is in the sheet's smallest currency units.

    Raises
    ------
    SheetMismatch
        On ``file``: a damaged record sheet, or rows that are not the selection's (the
        missing, added and changed rows are listed).
    InvalidInput
        On ``file`` for an audited amount that is not a decimal of the currency's places;
        on ``not_tested`` when items have no audited amount and no treatment is given.
    """
    if not_tested is not None and not_tested not in NOT_TESTED_TREATMENTS:
        raise InvalidInput(
            "not_tested", f"must be one of {', '.join(NOT_TESTED_TREATMENTS)}; got {not_tested!r}"
        )
    recorded = sheet.recorded
    _check_recorded(recorded)
    items = _tested(sheet, not_tested)
    if recorded.units_drawn == 0:
        raise InvalidInput(
            FIELD,
            "every item of this selection is individually significant: their misstatements "
            "are known in full and there is no sample to evaluate",
        )
    found = [
        Misstatement(
            id=i.id,
            book_amount=i.book_amount,
            audited_amount=i.audited_amount,
            hits=i.hits,
            individually_significant=i.kind == SIGNIFICANT,
        )
        for i in items
        if i.audited_amount != i.book_amount
    ]
    evaluation = evaluate_monetary_sample(
        recorded.sampled_value,
        found,
        sample_size=recorded.units_drawn,
        selection_method=recorded.method,
        confidence=confidence,
        tolerable_misstatement=tolerable_misstatement,
        scale=recorded.scale,
        max_sample_size=max(recorded.units_drawn, 1),
    )
    untested = sum(not i.tested for i in items)
    warnings = []
    if untested:
        warnings.append(
            f"{untested:,} items were not tested and are counted as misstated in full "
            "(audited at 0)."
        )
    return MonetarySheetEvaluation(
        recorded, tuple(items), not_tested, evaluation, tuple(warnings), sheet
    )
