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


# Populations up to this size also get the tolerable rate as a count of deviant items:
# the monthly, weekly and quarterly controls whose populations are counted in tens.
SMALL_POPULATION = 250

NEXT_STEPS = (
    "Look at each deviation for its nature and cause, including whether it points to an "
    "intentional override or to fraud.",
    "Consider whether other controls compensate for this one, and test them before relying "
    "on them.",
    "Reassess the reliance planned on this control and extend the substantive procedures "
    "that the reliance was meant to reduce.",
    "Do not simply test more items now that the results are known: an extension decided "
    "after seeing deviations raises the risk of overreliance above the planned level; only "
    "an extension planned in advance (a staged plan) keeps that risk controlled.",
)
"""What a practitioner does after a test that does not support reliance (ISA 530 ¶12-13,
AU-C 530): the steps that follow from the standards, in plain words."""


def plan_setting_parts(
    population_size: int | None, tolerable_rate: float | None, expected_rate: float | None
) -> list[str]:
    """The population size and the tolerable and expected rates that are given, each as a
    short phrase for a chart caption.

    >>> plan_setting_parts(5000, 0.05, None)
    ['population 5,000', 'tolerable 5%']
    """
    parts = []
    if population_size is not None:
        parts.append(f"population {population_size:,}")
    if tolerable_rate is not None:
        parts.append(f"tolerable {percent(tolerable_rate)}")
    if expected_rate is not None:
        parts.append(f"expected {percent(expected_rate)}")
    return parts


def _tolerable_count(rate: float, size: int | None, count: int | None) -> str:
    """ "5% of 12 items is 1 deviant item" for a small population, else ""."""
    if size is None or count is None or size > SMALL_POPULATION:
        return ""
    deviant = f"{count:,} deviant item" + ("" if count == 1 else "s")
    return f" At the tolerable rate, {percent(rate)} of {_items(size)} is {deviant} (rounded up)."


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
    if plan.whole_population:
        return _whole_population_plan(plan)
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
    text += _tolerable_count(
        plan.tolerable_rate, plan.population_size, plan.tolerable_deviant_items
    )
    return f"{text} {CAUTION}"


def _whole_population_plan(plan: SampleSizePlan) -> str:
    size = plan.population_size or plan.sample_size
    text = (
        f"Test every item ({plan.sample_size:,} of {size:,}) of "
        f"{_population_phrase(size, plan.population_label)}: no smaller sample reaches "
        f"{percent(plan.confidence)} confidence at the tolerable rate of "
        f"{percent(plan.tolerable_rate)}. Testing every item leaves no sampling risk: the "
        "deviations found are the population's exact count."
    )
    count = plan.tolerable_deviant_items
    if count is not None:
        deviant = f"{count:,} deviant item" + ("" if count == 1 else "s")
        text += (
            f" At the tolerable rate, {percent(plan.tolerable_rate)} of {_items(size)} is "
            f"{deviant} (rounded up); the test supports reliance if it finds fewer than "
            f"{count:,}, so {_allowance(max(count - 1, 0))} may be found."
        )
    return f"{text} {CAUTION}"


def evaluation_summary(result: Evaluation) -> str:
    """One paragraph describing an evaluation."""
    if result.whole_population:
        return _whole_population_evaluation(result)
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
    text += _comparison_with_plan(result)
    text += _tolerable_count(
        result.tolerable_rate or 0.0, result.population_size, result.tolerable_deviant_items
    )
    if result.supports_reliance is False:
        text += " Next steps: " + " ".join(NEXT_STEPS)
    return f"{text} {CAUTION}"


def comparison_with_plan(result: Evaluation) -> str | None:
    """ "Planned to allow 1 deviation; found 2." when the plan's expected rate is known."""
    planned = result.planned_allowed_deviations
    if planned is None:
        return None
    allowed = "no deviation" if planned == 0 else _deviations(planned)
    found = "none" if result.deviations == 0 else f"{result.deviations:,}"
    return f"Planned to allow {allowed}; found {found}."


def _comparison_with_plan(result: Evaluation) -> str:
    sentence = comparison_with_plan(result)
    return "" if sentence is None else f" {sentence}"


def _whole_population_evaluation(result: Evaluation) -> str:
    size = result.sample_size
    text = (
        f"Every item ({size:,} of {size:,}) of "
        f"{_population_phrase(size, result.population_label)} was tested and "
        f"{'no deviation' if result.deviations == 0 else _deviations(result.deviations)} "
        "found: there is no "
        f"sampling risk, and the population's deviation rate is exactly "
        f"{percent(result.sample_deviation_rate)}."
    )
    if result.tolerable_rate is not None and result.tolerable_deviant_items is not None:
        count = result.tolerable_deviant_items
        deviant = f"{count:,} deviant item" + ("" if count == 1 else "s")
        limit = (
            f"the tolerable rate of {percent(result.tolerable_rate)} of {_items(size)} is "
            f"{deviant}, rounded up"
        )
        if result.supports_reliance:
            text += (
                f" Fewer were found than {limit}: the test supports reliance on the control "
                "as tested."
            )
        else:
            text += (
                f" At least as many were found as {limit}: the test does not support "
                "reliance on the control as tested."
            )
    text += _comparison_with_plan(result)
    if result.supports_reliance is False:
        text += " Next steps: " + " ".join(NEXT_STEPS)
    return f"{text} {CAUTION}"
