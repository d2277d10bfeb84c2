"""Checking a completed test sheet against its selection, and counting the deviations.

:func:`tally_test_sheet` refuses a sheet whose rows are not exactly the selection's: each
row is matched to the selection by its draw number, and a draw that has no row (missing),
a row whose draw is blank, unknown or repeated (added) and a row whose item is not the one
drawn (changed) are all listed, by sheet row. When the recorded population is small enough
to be recorded in full (numbered items or ranges), the selection itself is first
re-derived from the recorded population, seed, method and sample size, and must give the
recorded selection fingerprint and items; otherwise the recorded items are the reference.

Each result cell must hold one of the three words (letter case and surrounding spaces
ignored). Items marked "not tested" are refused unless the request says how to treat
them: ``count_as_deviation`` counts each as a deviation (common practice: an item that
cannot be tested gives no evidence that the control operated), ``drop`` evaluates the
smaller sample of the items tested, with a warning that the sample is then smaller than
planned and that leaving items out may bias it.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Final

from service.sampling.attributes import Evaluation, evaluate_sample
from service.sampling.errors import InvalidInput, SamplingError
from service.sampling.selection import (
    ALGORITHM_ID,
    NumberedPopulation,
    RangePopulation,
    select,
)
from service.sampling.test_sheets.layout import DEVIATION, NOT_TESTED, PASSED, RESULT_WORDS
from service.sampling.test_sheets.matching import SheetMismatch, listed, match_rows, shown
from service.sampling.test_sheets.reading import (
    FIELD,
    CompletedSheet,
    RecordedSelection,
    SheetRow,
    Value,
)

COUNT_AS_DEVIATION: Final = "count_as_deviation"
DROP: Final = "drop"
NOT_TESTED_TREATMENTS: Final = (COUNT_AS_DEVIATION, DROP)

__all__ = ["COUNT_AS_DEVIATION", "DROP", "NOT_TESTED_TREATMENTS", "AttributeTally",
           "SheetMismatch", "SheetTally", "evaluate_tally", "tally_test_sheet"]


@dataclass(frozen=True)
class AttributeTally:
    """The results of one attribute."""

    attribute: str
    passed: int
    deviations_found: int
    not_tested: int
    sample_size: int
    """Items evaluated: all selected items, or those tested when not-tested items are dropped."""
    deviations: int
    """Deviations evaluated: those found, plus the items not tested when counted as deviations."""


@dataclass(frozen=True)
class SheetTally:
    """A completed test sheet, checked, with its results counted per attribute."""

    recorded: RecordedSelection
    not_tested: str | None
    attributes: tuple[AttributeTally, ...]
    warnings: tuple[str, ...]


def _check_recorded(recorded: RecordedSelection) -> None:
    """The record sheet's items against its own sizes and, where possible, a re-derivation."""
    draws = [draw for draw, _, _ in recorded.items]
    if draws != list(range(1, recorded.sample_size + 1)):
        raise SheetMismatch(FIELD, "the record sheet's items do not match its sample size")
    population = recorded.population
    if population is None:
        return
    if recorded.algorithm != ALGORITHM_ID:
        raise InvalidInput(
            FIELD,
            f"the sheet was made with selection algorithm {recorded.algorithm}; this service "
            f"re-performs {ALGORITHM_ID} only",
        )
    try:
        if "size" in population:
            core: NumberedPopulation | RangePopulation = NumberedPopulation(
                int(population["size"])
            )
        else:
            core = RangePopulation(
                tuple((int(r["first"]), int(r["last"])) for r in population["ranges"]),
                tuple(int(x) for x in population.get("exclude", ())),
            )
        again = select(core, recorded.sample_size, recorded.seed, recorded.method)
    except (SamplingError, KeyError, TypeError, ValueError):
        raise SheetMismatch(FIELD, "the record sheet's population is damaged") from None
    if (
        again.selection_fingerprint != recorded.selection_fingerprint
        or list(again.items) != [item for _, item, _ in recorded.items]
    ):
        raise SheetMismatch(
            FIELD,
            "the record sheet does not re-perform: its population, seed, method and sample "
            "size do not give its selection fingerprint and items",
        )


def _item_differs(row: SheetRow, item: Value) -> list[str]:
    if row.item == item:
        return []
    return [f"item {shown(row.item)} in the sheet, {shown(item)} in the selection"]


def _check_rows(sheet: CompletedSheet) -> None:
    match_rows(
        {draw: item for draw, item, _ in sheet.recorded.items},
        ((row.line, row.draw, row.item, row) for row in sheet.rows),
        "draw",
        lambda item: item,
        _item_differs,
        sheet.recorded.selection_fingerprint,
    )


def _results(sheet: CompletedSheet) -> list[Counter[str]]:
    counts: list[Counter[str]] = [Counter() for _ in sheet.recorded.attributes]
    blank: list[str] = []
    unknown: list[str] = []
    for row in sheet.rows:
        for k, (attribute, text) in enumerate(
            zip(sheet.recorded.attributes, row.results, strict=True)
        ):
            word = text.strip().casefold()
            if word in RESULT_WORDS:
                counts[k][word] += 1
            elif not word:
                blank.append(f"sheet row {row.line}, {attribute!r}")
            else:
                unknown.append(f"sheet row {row.line}, {attribute!r}: {text!r}")
    problems = []
    if blank:
        problems.append(f"{len(blank):,} results are blank: {listed(blank)}")
    if unknown:
        problems.append(
            f"{len(unknown):,} results are not one of {', '.join(RESULT_WORDS)}: "
            f"{listed(unknown)}"
        )
    if problems:
        raise InvalidInput(FIELD, "; ".join(problems))
    return counts


def tally_test_sheet(sheet: CompletedSheet, not_tested: str | None = None) -> SheetTally:
    """Check ``sheet`` against its selection and count its results per attribute.

    Parameters
    ----------
    sheet : CompletedSheet
        As read by :func:`~service.sampling.test_sheets.reading.read_test_sheet`.
    not_tested : {"count_as_deviation", "drop"}, optional
        How items marked "not tested" are treated; required when there are any.

    Raises
    ------
    SheetMismatch
        On ``file``, listing the missing, added and changed rows.
    InvalidInput
        On ``file`` for blank or unknown results; on ``not_tested`` when items are not
        tested and no treatment is given, or when no item of an attribute was tested.
    """
    if not_tested is not None and not_tested not in NOT_TESTED_TREATMENTS:
        raise InvalidInput(
            "not_tested", f"must be one of {', '.join(NOT_TESTED_TREATMENTS)}; got {not_tested!r}"
        )
    _check_recorded(sheet.recorded)
    _check_rows(sheet)
    counts = _results(sheet)
    n = sheet.recorded.sample_size
    untested = {
        attribute: count[NOT_TESTED]
        for attribute, count in zip(sheet.recorded.attributes, counts, strict=True)
        if count[NOT_TESTED]
    }
    if untested and not_tested is None:
        listed = ", ".join(f"{count:,} for {name!r}" for name, count in untested.items())
        raise InvalidInput(
            "not_tested",
            f"items are marked not tested ({listed}); say how to treat them: "
            f"{COUNT_AS_DEVIATION} (each counts as a deviation) or {DROP} (evaluate the "
            "items tested only)",
        )
    tallies = []
    warnings = []
    for attribute, count in zip(sheet.recorded.attributes, counts, strict=True):
        skipped = count[NOT_TESTED]
        if not_tested == DROP and skipped == n:
            raise InvalidInput(
                "not_tested", f"no item was tested for {attribute!r}; there is nothing to evaluate"
            )
        dropped = skipped if not_tested == DROP else 0
        counted = skipped if not_tested == COUNT_AS_DEVIATION else 0
        tallies.append(
            AttributeTally(
                attribute=attribute,
                passed=count[PASSED],
                deviations_found=count[DEVIATION],
                not_tested=skipped,
                sample_size=n - dropped,
                deviations=count[DEVIATION] + counted,
            )
        )
        if dropped:
            warnings.append(
                f"{attribute}: {dropped:,} of {n:,} items were not tested and were left out; "
                f"the evaluation is of the {n - dropped:,} items tested, a smaller sample than "
                "planned, and leaving items out can bias it if the untested items differ from "
                "the rest."
            )
        elif counted:
            warnings.append(
                f"{attribute}: {counted:,} items not tested are counted as deviations."
            )
    return SheetTally(sheet.recorded, not_tested, tuple(tallies), tuple(warnings))


def evaluate_tally(
    tally: SheetTally,
    confidence: float = 0.95,
    tolerable_rates: Mapping[str, float] | None = None,
    method: str | None = None,
    population_label: str | None = None,
) -> tuple[Evaluation, ...]:
    """One evaluation per attribute, by :func:`~service.sampling.attributes.evaluate_sample`
    over the recorded population size, in the order of the sheet's attributes."""
    rates = dict(tolerable_rates or {})
    unknown = sorted(set(rates) - {t.attribute for t in tally.attributes})
    if unknown:
        raise InvalidInput(
            "tolerable_rates",
            f"names attributes the sheet does not have: {', '.join(map(repr, unknown))} "
            f"(the sheet's: {', '.join(repr(t.attribute) for t in tally.attributes)})",
        )
    evaluations = []
    for t in tally.attributes:
        try:
            evaluation = evaluate_sample(
                t.sample_size,
                t.deviations,
                confidence,
                rates.get(t.attribute),
                tally.recorded.population_size,
                method,
                population_label=population_label,
            )
        except InvalidInput as exc:
            if exc.field != "tolerable_rate":
                raise
            raise InvalidInput(f"tolerable_rates.{t.attribute}", exc.message) from None
        evaluations.append(evaluation)
    return tuple(evaluations)
