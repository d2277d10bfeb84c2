"""Plain-English summaries of monetary-unit plans, selections and evaluations.

They state facts about the sample and the amounts; whether a balance is fairly stated is
the auditor's conclusion to draw. Amounts are rounded half-even to the currency unit.
"""

from __future__ import annotations

from fractions import Fraction

from service.sampling.monetary.amounts import to_decimal
from service.sampling.monetary.evaluation import MonetaryEvaluation
from service.sampling.monetary.selection import MonetarySelection
from service.sampling.monetary.sizing import MonetaryPlan
from service.sampling.wording import CAUTION, percent


def money(units: int | Fraction, scale: int) -> str:
    """Units as a readable amount with thousands separators: ``41,666.67``.

    >>> money(Fraction(250_000_000, 60), 2), money(-1_500, 2)
    ('41,666.67', '-15.00')
    """
    return f"{to_decimal(units, scale):,}"


def plan_summary(plan: MonetaryPlan) -> str:
    """One paragraph describing a monetary-unit sample size."""
    s = plan.scale
    text = (
        f"Test {plan.sample_size:,} sampling units from a book value of "
        f"{money(plan.book_value, s)} ({plan.method} method): a sampling interval of "
        f"{money(plan.sampling_interval, s)}. Items of {money(plan.sampling_interval, s)} or "
        f"more are certain to be selected and are tested in full. With no misstatement "
        f"found, the upper misstatement limit is the basic precision of "
        f"{money(plan.basic_precision, s)}, against a tolerable misstatement of "
        f"{money(plan.tolerable_misstatement, s)} at {percent(plan.confidence)} confidence "
        f"(risk of incorrect acceptance {percent(plan.risk_of_incorrect_acceptance)})."
    )
    if plan.expected_misstatement:
        text += (
            f" If the expected misstatement of {money(plan.expected_misstatement, s)} occurs, "
            f"the Poisson upper limit is {money(plan.expected_upper_limit, s)}."
        )
    return f"{text} {CAUTION}"


def selection_summary(chosen: MonetarySelection) -> str:
    """One paragraph describing a monetary-unit selection."""
    s = chosen.scale
    text = (
        f"{chosen.units_drawn:,} currency units drawn ({chosen.method}) from "
        f"{money(chosen.sampled_value, s)} hit {len(chosen.items):,} item(s)"
    )
    if chosen.units_drawn:
        text += f"; sampling interval {money(chosen.sampling_interval, s)}"
    text += "."
    if chosen.individually_significant:
        total = sum(amount for _, amount in chosen.individually_significant)
        text += (
            f" {len(chosen.individually_significant):,} individually significant item(s) "
            f"totalling {money(total, s)} are tested in full."
        )
    if chosen.excluded_count:
        text += (
            f" {chosen.excluded_count:,} item(s) with a zero or negative amount (total "
            f"{money(chosen.excluded_total, s)}) are excluded and need a procedure of their own."
        )
    text += f" Seed {chosen.seed!r}; algorithm {chosen.algorithm}."
    return f"{text} {CAUTION}"


def evaluation_summary(result: MonetaryEvaluation) -> str:
    """One paragraph describing a monetary-unit evaluation."""
    s = result.scale
    over, under = result.overstatement, result.understatement
    text = (
        f"{over.misstatements:,} overstatement(s) and {under.misstatements:,} "
        f"understatement(s) in {result.sample_size:,} sampling units (interval "
        f"{money(result.sampling_interval, s)}). Projected overstatement "
        f"{money(over.projected_misstatement, s)}; upper limit "
        f"{money(over.recommended_limit, s)} ({over.recommended}) at "
        f"{percent(result.confidence)} confidence. Projected understatement "
        f"{money(under.projected_misstatement, s)}; upper limit "
        f"{money(under.recommended_limit, s)} ({under.recommended}). Net most likely "
        f"misstatement {money(result.net_most_likely_misstatement, s)}."
    )
    if result.tolerable_misstatement is not None:
        text += (
            f" The overstatement limit is {result.conclusion} of "
            f"{money(result.tolerable_misstatement, s)}."
        )
    return f"{text} {CAUTION}"
