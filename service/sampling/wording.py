"""Plain-English summaries of plans and evaluations.

The summaries state facts about the sample and the stated rates; they never
say that a control "is effective", which is the auditor's conclusion to draw.
Percentages in the text are rounded for reading (two significant decimals);
the JSON fields beside them carry full precision.
"""

from __future__ import annotations

from service.sampling.attributes import Evaluation, SampleSizePlan

CAUTION = (
    "These figures support, and do not replace, professional judgement and the "
    "auditing standards and methodology that apply to the engagement."
)


def percent(rate: float) -> str:
    """A rate as a readable percentage: 0.05 → "5%", 0.0615 → "6.16%".

    >>> percent(0.05), percent(0.061619), percent(0.00012)
    ('5%', '6.16%', '0.012%')
    """
    value = rate * 100
    text = f"{value:.2f}" if value >= 1 else f"{value:.2g}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return f"{text}%"


def _items(count: int) -> str:
    return f"{count:,} item" + ("" if count == 1 else "s")


def _population_phrase(size: int | None, label: str | None) -> str:
    if size is None:
        return "a large population"
    phrase = f"a population of {_items(size)}"
    return f"{phrase} ({label})" if label else phrase


def _deviations(count: int) -> str:
    return f"{count:,} deviation" + ("" if count == 1 else "s")


def _allowance(count: int) -> str:
    return "no deviation" if count == 0 else f"at most {_deviations(count)}"


def _at_most(count: int) -> str:
    return "no deviation" if count == 0 else f"{count:,} or fewer deviations"


def plan_summary(plan: SampleSizePlan) -> str:
    """One paragraph describing a sample size plan."""
    text = (
        f"Test {_items(plan.sample_size)} from "
        f"{_population_phrase(plan.population_size, plan.population_label)} and allow "
        f"{_allowance(plan.allowed_deviations)} ({plan.method} model). If the true deviation "
        f"rate were the tolerable rate of {percent(plan.tolerable_rate)}, a sample this size "
        f"would show {_at_most(plan.allowed_deviations)} with probability "
        f"{percent(plan.risk_of_overreliance)} (risk of overreliance; confidence "
        f"{percent(plan.achieved_confidence)} against the {percent(plan.confidence)} asked for)."
    )
    if plan.expected_rate > 0:
        text += (
            f" If the true rate equals the expected rate of {percent(plan.expected_rate)}, the "
            f"chance of finding more than {_deviations(plan.allowed_deviations)} is "
            f"{percent(plan.risk_of_underreliance)} (risk of underreliance)."
        )
    else:
        text += " No deviation is allowed: this is a zero-deviation (discovery) plan."
    return f"{text} {CAUTION}"


def evaluation_summary(result: Evaluation) -> str:
    """One paragraph describing an evaluation."""
    text = (
        f"{_deviations(result.deviations).capitalize()} in {_items(result.sample_size)} from "
        f"{_population_phrase(result.population_size, result.population_label)}: sample "
        f"deviation rate {percent(result.sample_deviation_rate)}, upper deviation limit "
        f"{percent(result.upper_deviation_limit)} at {percent(result.confidence)} confidence "
        f"({result.method} model), an allowance for sampling risk of "
        f"{percent(result.allowance_for_sampling_risk)}."
    )
    if result.tolerable_rate is not None:
        if result.supports_reliance:
            text += (
                f" The upper deviation limit does not exceed the tolerable rate of "
                f"{percent(result.tolerable_rate)}: the sample supports reliance on the "
                "control as tested."
            )
        else:
            text += (
                f" The upper deviation limit reaches or exceeds the tolerable rate of "
                f"{percent(result.tolerable_rate)}: the sample does not support reliance on "
                "the control as tested."
            )
    return f"{text} {CAUTION}"
