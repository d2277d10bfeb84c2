"""Plain-English summaries of the plans in this package, ending with the caution."""

from __future__ import annotations

from service.sampling.plans.multiple import SeveralAttributesEvaluation, SeveralAttributesPlan
from service.sampling.wording import CAUTION, percent


def _deviations(count: int) -> str:
    return (
        "no deviation"
        if count == 0
        else f"at most {count:,} deviation" + ("" if count == 1 else "s")
    )


def several_plan_summary(plan: SeveralAttributesPlan) -> str:
    """One sample for several attributes, in words."""
    parts = [
        f"{a.name}: {_deviations(a.allowed_deviations)} for a tolerable rate of "
        f"{percent(a.tolerable_rate)} (risk of overreliance {percent(a.risk_of_overreliance)})"
        for a in plan.attributes
    ]
    return (
        f"Test {plan.sample_size:,} items for all {len(plan.attributes)} attributes "
        f"({plan.method} model, {percent(plan.confidence)} confidence); "
        f"{plan.governing_attribute} needs the largest sample. The sample supports reliance "
        f"on an attribute when it shows " + "; ".join(parts) + f". {CAUTION}"
    )


def several_evaluation_summary(result: SeveralAttributesEvaluation) -> str:
    """The evaluation of several attributes on one sample, in words."""
    parts = []
    for item in result.attributes:
        e = item.evaluation
        verdict = "supports reliance" if e.supports_reliance else "does not support reliance"
        parts.append(
            f"{item.name}: {e.deviations:,} found, upper deviation limit "
            f"{percent(e.upper_deviation_limit)} against a tolerable rate of "
            f"{percent(e.tolerable_rate or 0.0)}, {verdict}"
        )
    return (
        f"{result.sample_size:,} items tested for {len(result.attributes)} attributes at "
        f"{percent(result.confidence)} confidence. " + "; ".join(parts) + f". {CAUTION}"
    )
