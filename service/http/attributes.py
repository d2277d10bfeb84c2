"""Test-of-controls endpoints: ``POST /v1/sample-size`` and ``POST /v1/evaluation``.

``/v1/evaluation`` takes the counts as JSON or, as a multipart upload, a completed test
sheet with the request part of :class:`~schemas.test_sheets.TestSheetEvaluationRequest`.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from schemas.attributes import (
    EvaluationRequest,
    EvaluationSchema,
    SampleSizePlanSchema,
    SampleSizeRequest,
)
from schemas.test_sheets import (
    TestSheetEvaluation,
    TestSheetEvaluationRequest,
    TestSheetEvaluationSchema,
)
from service.http.markdown import TicketLayout
from service.http.operations import Operation, blueprint
from service.render.test_sheet_evaluation import render_evaluated_sheet
from service.render.xlsx import XLSX
from service.sampling.attributes import Evaluation, SampleSizePlan, evaluate_sample, size_sample
from service.sampling.distributions import MODELS
from service.sampling.errors import InvalidInput
from service.sampling.test_sheets.reading import read_test_sheet
from service.sampling.test_sheets.results import evaluate_tally, tally_test_sheet
from service.settings import Settings


def _size(inputs: dict[str, Any], settings: Settings) -> SampleSizePlan:
    return size_sample(**inputs, max_sample_size=settings.max_sample_size)


def _evaluate(inputs: dict[str, Any], settings: Settings) -> Evaluation:
    return evaluate_sample(**inputs)


def _evaluate_sheet(inputs: dict[str, Any], settings: Settings) -> TestSheetEvaluation:
    upload = inputs["upload"]
    if upload is None:  # the JSON form is its own operation; kept for a direct call
        raise InvalidInput("file", "send the completed test sheet as the file part")
    sheet = read_test_sheet(upload)
    tally = tally_test_sheet(sheet, inputs.get("not_tested"))
    population = inputs.get("population") or {}
    size = population.get("size")
    if size is not None and size != tally.recorded.population_size:
        raise InvalidInput(
            "population.size",
            f"{size:,} is not the population size recorded in the sheet "
            f"({tally.recorded.population_size:,})",
        )
    evaluations = evaluate_tally(
        tally,
        inputs["confidence"],
        inputs.get("tolerable_rates"),
        inputs.get("method"),
        population_label=population.get("label"),
    )
    return TestSheetEvaluation(tally, evaluations, inputs["confidence"], sheet)


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
        file_form=Operation(
            name="evaluation-of-test-sheet",
            path="/v1/evaluation",
            summary="Evaluate a completed test sheet",
            description=(
                "A multipart/form-data body with the completed test sheet (XLSX) as the file "
                "part and TestSheetEvaluationRequest as the request part. The sheet's rows "
                "must be exactly the selection's (a missing, added or changed row is refused "
                "with 422, listing them); each result must be passed, deviation or not "
                "tested. One evaluation per attribute, as for the JSON form, over the "
                "population size recorded in the sheet. With Accept: application/vnd."
                "openxmlformats-officedocument.spreadsheetml.sheet, the same workbook comes "
                "back with an Evaluation sheet added."
            ),
            request=TestSheetEvaluationRequest,
            response=TestSheetEvaluationSchema,
            run=_evaluate_sheet,
            tag="tests of controls",
            accepts_file=True,
            renderers={XLSX: render_evaluated_sheet},
            ticket=TicketLayout(
                answer=("selection_fingerprint", "population_size", "evaluations"),
                method=model_method,
            ),
        ),
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
