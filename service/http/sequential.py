"""Staged plans and their evaluation: ``POST /v1/plans/staged`` and
``POST /v1/plans/staged/evaluation``."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from schemas.sequential import (
    STAGED_CURVE_PATH,
    SequenceRequest,
    SequenceSchema,
    StagedCurveRequest,
    StagedCurveSchema,
    StagedEvaluationRequest,
    StagedEvaluationSchema,
    StagedPlanRequest,
    StagedPlanSchema,
    StrataEvaluationRequest,
    StrataEvaluationSchema,
)
from schemas.strata import count_strata
from service.http.attributes import model_method, strata_method
from service.http.markdown import TicketLayout
from service.http.operations import Operation, blueprint
from service.render.staged_chart import StagedChartPoint, render_staged_curve_svg
from service.sampling.errors import InvalidInput
from service.sampling.sequential.anytime import (
    MAX_RESULTS,
    ConfidenceSequence,
    confidence_sequence,
)
from service.sampling.sequential.curve import StagedCurve, staged_curve
from service.sampling.sequential.staged import (
    MAX_STAGES,
    StagedEvaluation,
    StagedPlan,
    evaluate_staged,
    plan_staged,
)
from service.sampling.sequential.strata import StratifiedEvaluation, evaluate_strata
from service.sampling.sequential.wording import staged_curve_summary
from service.sampling.wording import CAUTION, plan_setting_parts
from service.settings import Settings

SVG = "image/svg+xml"


def _plan(inputs: dict[str, Any], settings: Settings) -> StagedPlan:
    return plan_staged(**inputs, max_sample_size=settings.max_sample_size)


def _evaluate(inputs: dict[str, Any], settings: Settings) -> StagedEvaluation:
    return evaluate_staged(**inputs)


def _curve(inputs: dict[str, Any], settings: Settings) -> StagedCurve:
    return staged_curve(**inputs)


def _staged_caption(curve: StagedCurve) -> str:
    """The plan in one short sentence, then the caution sentence."""
    parts = [f"{len(curve.stages)} stages", f"{curve.method} model"]
    parts += plan_setting_parts(
        curve.population_size, curve.tolerable_rate, curve.expected_rate
    )
    if (
        curve.expected_rate is not None
        and curve.expected_sample_size_at_expected_rate is not None
    ):
        parts.append(f"{curve.expected_sample_size_at_expected_rate:,.1f} items expected there")
    return f"Staged plan: {', '.join(parts)}. {CAUTION}"


def _staged_chart_points(curve: StagedCurve) -> list[StagedChartPoint]:
    """The grid, plus the curve at the marked rates so that the lines meet the marks."""
    points = {
        point.rate: StagedChartPoint(
            point.rate, point.acceptance_probability, point.expected_sample_size
        )
        for point in curve.points
    }
    marked = (
        (curve.tolerable_rate, curve.risk_of_overreliance,
         curve.expected_sample_size_at_tolerable_rate),
        (curve.expected_rate,
         None if curve.risk_of_underreliance is None else 1.0 - curve.risk_of_underreliance,
         curve.expected_sample_size_at_expected_rate),
    )
    for rate, acceptance, size in marked:
        if rate is not None and acceptance is not None and size is not None:
            points.setdefault(rate, StagedChartPoint(rate, acceptance, size))
    return [points[rate] for rate in sorted(points)]


def _staged_svg(document: dict[str, Any], curve: StagedCurve) -> str:
    return render_staged_curve_svg(
        _staged_chart_points(curve),
        stages=[(s.cumulative_sample_size, s.accept_if_at_most, s.fail_if_at_least)
                for s in curve.stages],
        tolerable_rate=curve.tolerable_rate,
        expected_rate=curve.expected_rate,
        risk_of_overreliance=curve.risk_of_overreliance,
        risk_of_underreliance=curve.risk_of_underreliance,
        caption=_staged_caption(curve),
        description=staged_curve_summary(curve).removesuffix(CAUTION).strip(),
    )


def _strata(inputs: dict[str, Any], settings: Settings) -> StratifiedEvaluation:
    return evaluate_strata(**inputs)


def _sequence(inputs: dict[str, Any], settings: Settings) -> ConfidenceSequence:
    return confidence_sequence(**inputs)


def _count_results(payload: Any, settings: Settings) -> None:
    """Refuse an over-long result list before each entry is validated."""
    results = payload.get("results") if isinstance(payload, dict) else None
    if isinstance(results, list) and len(results) > MAX_RESULTS:
        raise InvalidInput(
            "results", f"results holds {len(results):,} items; at most {MAX_RESULTS:,}"
        )


def _count_stages(payload: Any, settings: Settings) -> None:
    """Refuse an over-long stage list before each stage is validated."""
    stages = payload.get("stages") if isinstance(payload, dict) else None
    if isinstance(stages, list) and len(stages) > MAX_STAGES:
        raise InvalidInput(
            "stages", f"stages holds {len(stages):,} stages; at most {MAX_STAGES}"
        )


def _staged_method(document: Mapping[str, Any]) -> str:
    return (
        "staged (stop-or-go) plan, exact probabilities by convolution over the stages "
        f"(Dodge & Romig 1959); {model_method(document)}"
    )


OPERATIONS = [
    Operation(
        name="staged-plan",
        repeatable=True,
        path="/v1/plans/staged",
        summary="Staged (stop-or-go) plan for a test of controls",
        description=(
            "The plan of at most max_stages stages with the smallest expected sample size at "
            "expected_rate, subject to an exact risk of overreliance of at most "
            "1 − confidence at tolerable_rate and a risk of underreliance no larger than the "
            "fixed-size plan's. Each stage gives the cumulative sample size and the "
            "cumulative deviation counts that accept or fail; in between, extend. The search "
            "is bounded (see the README)."
        ),
        request=StagedPlanRequest,
        response=StagedPlanSchema,
        run=_plan,
        tag="tests of controls",
        ticket=TicketLayout(
            answer=(
                "stages",
                "risk_of_overreliance",
                "risk_of_underreliance",
                "expected_sample_size_at_expected_rate",
                "expected_sample_size_at_tolerable_rate",
                "fixed_sample_size",
            ),
            method=_staged_method,
        ),
    ),
    Operation(
        name="staged-evaluation",
        repeatable=True,
        path="/v1/plans/staged/evaluation",
        summary="Evaluate a finished staged test of controls",
        description=(
            "The plan's decision at the stage reached, its exact risk of overreliance and "
            "the upper deviation limit from the staged test's own probabilities (stage-wise "
            "ordering), beside the fixed-size formula for comparison only."
        ),
        request=StagedEvaluationRequest,
        response=StagedEvaluationSchema,
        run=_evaluate,
        precheck=_count_stages,
        tag="tests of controls",
        ticket=TicketLayout(
            answer=(
                "decision",
                "conclusion",
                "plan_risk_of_overreliance",
                "upper_deviation_limit",
                "risk_at_tolerable_rate",
                "fixed_size_formula",
            ),
            method=_staged_method,
        ),
    ),
]

OPERATIONS.append(
    Operation(
        name="staged-curve",
        repeatable=True,
        path=STAGED_CURVE_PATH,
        summary="Operating characteristic of a staged plan",
        description=(
            "For a staged plan, at evenly spaced true deviation rates from 0: the exact "
            "probability that the plan accepts and the expected number of items it tests; "
            "with the risks and expected sizes at tolerable_rate and expected_rate when they "
            "are given. With Accept: image/svg+xml the answer is a chart of both against the "
            "rate, in two panels, with the tolerable and expected rates marked."
        ),
        request=StagedCurveRequest,
        response=StagedCurveSchema,
        run=_curve,
        tag="tests of controls",
        precheck=_count_stages,
        renderers={SVG: _staged_svg},
        ticket=TicketLayout(
            answer=("risk_of_overreliance", "risk_of_underreliance",
                    "expected_sample_size_at_expected_rate", "points"),
            method=_staged_method,
        ),
    )
)

OPERATIONS.append(
    Operation(
        name="strata-evaluation",
        repeatable=True,
        path="/v1/evaluation/strata",
        summary="Evaluate a test of controls sampled in strata",
        description=(
            "Each stratum's own evaluation (hypergeometric) and one upper deviation limit for "
            "the whole population: the sum of exact per-stratum limits at risks that add up "
            "to 1 − confidence, the split fixed from the design before the results. Its "
            "coverage is guaranteed (Boole's inequality) and conservative. The same answer "
            "as POST /v1/evaluation with strata; this path takes only strata."
        ),
        request=StrataEvaluationRequest,
        response=StrataEvaluationSchema,
        run=_strata,
        tag="tests of controls",
        precheck=count_strata,
        ticket=TicketLayout(
            answer=("estimated_deviation_rate", "upper_deviation_limit",
                    "upper_deviation_count", "conclusion", "guarantee"),
            method=strata_method,
        ),
    )
)

OPERATIONS.append(
    Operation(
        name="sequence-evaluation",
        repeatable=True,
        path="/v1/evaluation/sequence",
        summary="Anytime-valid evaluation of an open-ended test of controls",
        description=(
            "Given the results in testing order, the upper deviation limit after each item "
            "from a confidence sequence (Robbins' beta-binomial mixture; without replacement "
            "when population.size is given): the probability that it is ever below the true "
            "rate is at most 1 − confidence, so the tester may stop at any item, chosen by "
            "looking at the results. The fixed-size limit is shown beside it for comparison."
        ),
        request=SequenceRequest,
        response=SequenceSchema,
        run=_sequence,
        tag="tests of controls",
        takes_item_lists=True,
        precheck=_count_results,
        ticket=TicketLayout(
            answer=("upper_deviation_limit", "first_supporting_sample_size", "conclusion",
                    "guarantee"),
            method=lambda document: "confidence sequence, beta-binomial mixture (Robbins 1970; "
            "Howard, Ramdas, McAuliffe & Sekhon 2021); without replacement, prior-posterior "
            "ratio (Waudby-Smith & Ramdas 2020)",
        ),
    )
)

bp = blueprint("sequential", OPERATIONS)
