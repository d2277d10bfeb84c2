"""Plain-English summaries of the plans in this package, ending with the caution."""

from __future__ import annotations

from service.sampling.attributes import Evaluation, SampleSizePlan
from service.sampling.plans.bayesian import BayesianEvaluation, BayesianPlan, BetaPrior
from service.sampling.plans.multiple import SeveralAttributesEvaluation, SeveralAttributesPlan
from service.sampling.plans.periodic import PeriodicPlan
from service.sampling.plans.two_risks import TwoRiskPlan
from service.sampling.wording import CAUTION, evaluation_summary, percent, plan_summary


def _deviations(count: int) -> str:
    return (
        "no deviation"
        if count == 0
        else f"at most {count:,} deviation" + ("" if count == 1 else "s")
    )


def several_plan_summary(plan: SeveralAttributesPlan) -> str:
    """One sample for several attributes, in words."""
    parts = [
        f"{a.name}, {_deviations(a.allowed_deviations)} against a tolerable rate of "
        f"{percent(a.tolerable_rate)} (risk of overreliance {percent(a.risk_of_overreliance)})"
        for a in plan.attributes
    ]
    return (
        f"Test {plan.sample_size:,} items for all {len(plan.attributes)} attributes "
        f"({plan.method} model, {percent(plan.confidence)} confidence); "
        f"{plan.governing_attribute} needs the largest sample. The sample supports reliance "
        "on each attribute if it shows, for " + "; for ".join(parts) + f". {CAUTION}"
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


def _prior_phrase(prior: BetaPrior) -> str:
    if prior.type == "uniform":
        return "a uniform prior"
    if prior.type == "expected_rate":
        return (
            f"a prior worth {prior.strength:g} items at a rate of "
            f"{percent(prior.expected_rate or 0.0)}"
        )
    return (
        f"a prior from an earlier sample of {prior.sample_size:,} items with "
        f"{prior.deviations:,} deviations, weighted {prior.weight:g}"
    )


def _without_caution(text: str) -> str:
    return text.removesuffix(CAUTION).strip()


def any_plan_summary(plan: SampleSizePlan) -> str:
    """The plan's paragraph, with what a prior or a limit on both risks adds."""
    if isinstance(plan, BayesianPlan) and plan.prior is not None:
        saved = plan.items_saved or 0
        change = (
            f"{saved:,} fewer than"
            if saved > 0
            else ("the same as" if saved == 0 else f"{-saved:,} more than")
        )
        k = plan.allowed_deviations
        found = "no deviation is" if k == 0 else f"{k:,} deviation{'' if k == 1 else 's'} are"
        return (
            f"With {_prior_phrase(plan.prior)}, test {plan.sample_size:,} items "
            f"({change} the classical {plan.classical_sample_size:,}): if {found} found, the "
            f"posterior probability that the deviation rate is at most "
            f"{percent(plan.tolerable_rate)} is {percent(plan.posterior_probability or 0.0)} "
            f"and the posterior upper limit is {percent(plan.posterior_upper_limit or 0.0)}. "
            f"Without the prior, this sample's risk of overreliance is "
            f"{percent(plan.risk_of_overreliance)}. The prior must be justified and "
            f"documented. {CAUTION}"
        )
    text = plan_summary(plan)
    if isinstance(plan, TwoRiskPlan) and plan.underreliance_risk is not None:
        text = (
            f"{_without_caution(text)} Sized so that the risk of underreliance is at most "
            f"{percent(plan.underreliance_risk)} as well"
            + (
                f" (the classical plan: {plan.classical_sample_size:,} items)."
                if plan.classical_sample_size is not None
                else "."
            )
            + f" {CAUTION}"
        )
    return text


def any_evaluation_summary(result: Evaluation) -> str:
    """The evaluation's paragraph, with the posterior when a prior was given."""
    text = evaluation_summary(result)
    if not isinstance(result, BayesianEvaluation) or result.prior is None:
        return text
    extra = f" With {_prior_phrase(result.prior)}, the posterior upper limit is " + percent(
        result.posterior_upper_limit or 0.0
    )
    if result.posterior_probability is not None and result.tolerable_rate is not None:
        extra += (
            f" and the posterior probability that the rate is at most "
            f"{percent(result.tolerable_rate)} is {percent(result.posterior_probability)}"
        )
    return f"{_without_caution(text)}{extra}; the prior must be justified and documented. {CAUTION}"


_FREQUENCY_WORDS = {
    "annual": "an annual",
    "quarterly": "a quarterly",
    "monthly": "a monthly",
    "weekly": "a weekly",
    "daily": "a daily",
    "several_daily": "a several-times-a-day",
}


def _count(count: int, noun: str) -> str:
    return f"{count:,} {noun}" + ("" if count == 1 else "s")


def periodic_summary(plan: PeriodicPlan) -> str:
    """The periodic control's sizes and what they prove, in words."""
    text = (
        f"{_FREQUENCY_WORDS[plan.frequency].capitalize()} control with "
        f"{_count(plan.occurrences, 'occurrence')} in the period "
        f"({'as given' if plan.occurrences_basis == 'given' else 'by convention'}); at a "
        f"tolerable rate of {percent(plan.tolerable_rate)} they may hold "
        f"{_count(plan.tolerable_deviant_items, 'deviant occurrence')}. The statistical plan "
        f"tests {plan.statistical_plan.sample_size:,} of them at {percent(plan.confidence)} "
        "confidence."
    )
    range_text = (
        f"{plan.common_practice_low:,}"
        if plan.common_practice_low == plan.common_practice_high
        else f"{plan.common_practice_low:,} to {plan.common_practice_high:,}"
    )
    source = (
        "the range given"
        if plan.common_practice_basis == "given"
        else "a convention with no published source"
    )
    text += f" Common practice tests {range_text} ({source})."
    for meaning in plan.sizes:
        one = meaning.confidence_against_1_deviant
        text += (
            f" Finding no deviation in {meaning.sample_size:,} leaves up to "
            f"{_count(meaning.upper_deviation_count_if_none_found, 'deviant occurrence')} "
            "possible"
            + (
                ""
                if one is None
                else f", and finds a lone deviant one with probability {percent(one)}"
            )
            + "."
        )
    return f"{text} {CAUTION}"
