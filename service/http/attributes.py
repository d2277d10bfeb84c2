"""Test-of-controls endpoints: ``POST /v1/sample-size`` and ``POST /v1/evaluation``."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from schemas.attributes import (
    EvaluationRequest,
    EvaluationSchema,
    SampleSizePlanSchema,
    SampleSizeRequest,
)
from service.http.markdown import TicketLayout
from service.http.operations import Operation, blueprint
from service.sampling.attributes import Evaluation, SampleSizePlan, evaluate_sample, size_sample
from service.sampling.distributions import MODELS
from service.settings import Settings


def _size(inputs: dict[str, Any], settings: Settings) -> SampleSizePlan:
    return size_sample(**inputs, max_sample_size=settings.max_sample_size)


def _evaluate(inputs: dict[str, Any], settings: Settings) -> Evaluation:
    return evaluate_sample(**inputs)


def model_method(document: Mapping[str, Any]) -> str:
    """The model of a plan or evaluation and its reference, in one line."""
    model = MODELS[document["method"]]
    return f"{model.name} model; {model.reference}"


OPERATIONS = [
    Operation(
        name="sample-size",
        path="/v1/sample-size",
        summary="Sample size for a test of controls",
        description=(
            "The smallest n such that, with k = ceil(expected_rate × n) deviations allowed, "
            "P(X ≤ k) ≤ 1 − confidence when the true rate equals tolerable_rate."
        ),
        request=SampleSizeRequest,
        response=SampleSizePlanSchema,
        run=_size,
        tag="tests of controls",
        ticket=TicketLayout(
            answer=(
                "sample_size",
                "allowed_deviations",
                "achieved_confidence",
                "risk_of_overreliance",
                "risk_of_underreliance",
            ),
            method=model_method,
        ),
    ),
    Operation(
        name="evaluation",
        path="/v1/evaluation",
        summary="Evaluate the deviations found in a test of controls",
        description=(
            "Sample deviation rate, exact upper deviation limit, allowance for sampling risk, "
            "two-sided interval and, when tolerable_rate is given, the conclusion."
        ),
        request=EvaluationRequest,
        response=EvaluationSchema,
        run=_evaluate,
        tag="tests of controls",
        ticket=TicketLayout(
            answer=(
                "sample_deviation_rate",
                "upper_deviation_limit",
                "allowance_for_sampling_risk",
                "confidence_interval",
                "risk_at_tolerable_rate",
                "conclusion",
            ),
            method=model_method,
        ),
    ),
]

bp = blueprint("attributes", OPERATIONS)
