"""Plain-English summaries of staged plans, confidence sequences and strata.

Each summary ends with the service's caution (:data:`service.sampling.wording.CAUTION`).
"""

from __future__ import annotations

from service.sampling.sequential.anytime import ConfidenceSequence
from service.sampling.sequential.curve import StagedCurve
from service.sampling.sequential.staged import StagedEvaluation, StagedPlan
from service.sampling.sequential.strata import StratifiedEvaluation
from service.sampling.wording import CAUTION, percent


def _items(count: int) -> str:
    return f"{count:,} item" + ("" if count == 1 else "s")


def _stage_sentence(index: int, stage_size: int, accept: int, fail: int, last: bool) -> str:
    if last:
        return (
            f"Stage {index}: test up to {_items(stage_size)} in all; accept with at most "
            f"{accept:,} deviations in all, otherwise fail."
        )
    accept_text = (
        "never accept here" if accept < 0 else f"accept with at most {accept:,} deviations"
    )
    return (
        f"Stage {index}: test {_items(stage_size)} in all; {accept_text}, fail with "
        f"{fail:,} or more, otherwise extend."
    )


def staged_plan_summary(plan: StagedPlan) -> str:
    """One paragraph describing a staged plan and what it saves."""
    stages = " ".join(
        _stage_sentence(
            j + 1, s.cumulative_sample_size, s.accept_if_at_most, s.fail_if_at_least,
            j == len(plan.stages) - 1,
        )
        for j, s in enumerate(plan.stages)
    )
    return (
        f"{stages} Exact risk of overreliance at the tolerable rate of "
        f"{percent(plan.tolerable_rate)}: {percent(plan.risk_of_overreliance)} "
        f"({plan.method} model, computed over every stage). At the expected rate of "
        f"{percent(plan.expected_rate)} the plan tests "
        f"{plan.expected_sample_size_at_expected_rate:,.1f} items on average, against "
        f"{_items(plan.fixed_sample_size)} for the fixed-size plan, and fails with "
        f"probability {percent(plan.risk_of_underreliance)} (fixed-size plan: "
        f"{percent(plan.fixed_risk_of_underreliance)}). Evaluate the result with this "
        f"plan's own probabilities, not the fixed-size formula. {CAUTION}"
    )


def staged_evaluation_summary(result: StagedEvaluation) -> str:
    """One paragraph on a finished staged test."""
    verdict = (
        "supports reliance on the control as tested"
        if result.supports_reliance
        else "does not support reliance on the control as tested"
    )
    return (
        f"The test stopped at stage {result.stage_reached} with {result.deviations:,} "
        f"deviations in {_items(result.sample_size)}: the plan says {result.decision}, which "
        f"{verdict}. The plan's exact risk of overreliance is "
        f"{percent(result.plan_risk_of_overreliance)}; the upper deviation limit, from the "
        f"staged test's own probabilities, is {percent(result.upper_deviation_limit)}. The "
        f"fixed-size formula for {_items(result.sample_size)} would give "
        f"{percent(result.fixed_size_upper_deviation_limit)}, which ignores that the sample "
        f"grew with the deviations found. {CAUTION}"
    )


def staged_curve_summary(curve: StagedCurve) -> str:
    """One paragraph on the curve of a staged plan."""
    text = (
        f"Probability that the staged plan of {len(curve.stages)} stages (at most "
        f"{_items(curve.stages[-1].cumulative_sample_size)}) accepts, and the items it tests "
        f"on average, against the true deviation rate ({curve.method} model, exact)."
    )
    if curve.risk_of_overreliance is not None and curve.tolerable_rate is not None:
        text += (
            f" At the tolerable rate of {percent(curve.tolerable_rate)} it accepts with "
            f"probability {percent(curve.risk_of_overreliance)} (risk of overreliance)."
        )
    if curve.risk_of_underreliance is not None and curve.expected_rate is not None:
        text += (
            f" At the expected rate of {percent(curve.expected_rate)} it fails with "
            f"probability {percent(curve.risk_of_underreliance)} (risk of underreliance) and "
            f"tests {curve.expected_sample_size_at_expected_rate or 0:,.1f} items on average."
        )
    return f"{text} {CAUTION}"


STRATA_GUARANTEE = (
    "The combined upper deviation limit adds exact hypergeometric limits of each stratum "
    "taken at risks that sum to 1 − confidence, split before the results were known; by "
    "Boole's inequality it covers the population's deviation rate with probability at "
    "least the confidence, whatever the deviant items in each stratum. It is "
    "conservative: the actual coverage is usually above the confidence."
)


def strata_summary(result: StratifiedEvaluation) -> str:
    """One paragraph on a population evaluated in strata."""
    text = (
        f"{len(result.strata)} strata, {_items(result.sample_size)} tested from "
        f"{_items(result.population_size)}, {result.deviations:,} "
        f"deviation{'' if result.deviations == 1 else 's'}. Estimated "
        f"deviation rate {percent(result.estimated_deviation_rate)}; upper deviation limit "
        f"for the whole population {percent(result.upper_deviation_limit)} "
        f"({result.upper_deviation_count:,} deviant items at most) at "
        f"{percent(result.confidence)} confidence."
    )
    if result.supports_reliance is not None and result.tolerable_rate is not None:
        verdict = "supports" if result.supports_reliance else "does not support"
        text += (
            f" Against the tolerable rate of {percent(result.tolerable_rate)} the result "
            f"{verdict} reliance on the control as tested."
        )
    return f"{text} {CAUTION}"


SEQUENCE_GUARANTEE = (
    "Valid at any stopping time: the probability that the upper deviation limit is ever "
    "below the true deviation rate, after any item of the sequence, is at most "
    "1 − confidence. The tester may look after every item and stop when the limit is low "
    "enough; the fixed-size limit shown beside it holds only for a sample size fixed in "
    "advance, which is why it is narrower."
)


def sequence_summary(cs: ConfidenceSequence) -> str:
    """One paragraph on a confidence sequence."""
    text = (
        f"After {_items(cs.sample_size)} with {cs.deviations:,} deviations, the upper "
        f"deviation limit valid at any stopping time is {percent(cs.upper_deviation_limit)} "
        f"at {percent(cs.confidence)} confidence."
    )
    if cs.tolerable_rate is not None:
        if cs.first_supporting_sample_size is not None:
            text += (
                f" It first fell below the tolerable rate of {percent(cs.tolerable_rate)} "
                f"after item {cs.first_supporting_sample_size:,}."
            )
        verdict = "supports" if cs.supports_reliance else "does not support"
        text += f" Stopping now, the result {verdict} reliance on the control as tested."
    return f"{text} {CAUTION}"
