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
from schemas.plans import (
    SeveralAttributesEvaluationSchema,
    SeveralAttributesPlanSchema,
    count_attributes,
)
from schemas.sequential import StrataEvaluationSchema
from schemas.strata import count_strata
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
from service.sampling.plans.bayesian import evaluate_with_prior, size_with_prior
from service.sampling.plans.multiple import (
    SeveralAttributesEvaluation,
    SeveralAttributesPlan,
    evaluate_several,
    size_several,
)
from service.sampling.plans.two_risks import size_two_risks
from service.sampling.sequential.strata import StratifiedEvaluation, evaluate_strata
from service.sampling.test_sheets.reading import read_test_sheet
from service.sampling.test_sheets.results import evaluate_tally, tally_test_sheet
from service.settings import Settings


def _size(inputs: dict[str, Any], settings: Settings) -> SampleSizePlan | SeveralAttributesPlan:
    several = inputs.pop("attributes", None)
    if several is not None:
        for name in ("tolerable_rate", "expected_rate"):
            inputs.pop(name, None)
        return size_several(several, **inputs, max_sample_size=settings.max_sample_size)
    prior = inputs.pop("prior", None)
    if prior is not None:
        return size_with_prior(
            prior=prior, **inputs, max_sample_size=settings.max_sample_size
        )
    limit = inputs.pop("underreliance_risk", None)
    if limit is not None:
        return size_two_risks(
            **inputs, underreliance_risk=limit, max_sample_size=settings.max_sample_size
        )
    return size_sample(**inputs, max_sample_size=settings.max_sample_size)


def _evaluate(
    inputs: dict[str, Any], settings: Settings
) -> Evaluation | SeveralAttributesEvaluation | StratifiedEvaluation:
    strata = inputs.pop("strata", None)
    if strata is not None:
        return evaluate_strata(
            strata,
            confidence=inputs["confidence"],
            tolerable_rate=inputs.get("tolerable_rate"),
            expected_rate=inputs.get("expected_rate") or 0.0,
        )
    several = inputs.pop("attributes", None)
    if several is not None:
        return evaluate_several(attributes=several, **inputs)
    prior = inputs.pop("prior", None)
    if prior is not None:
        return evaluate_with_prior(prior=prior, **inputs)
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


def strata_method(document: Mapping[str, Any]) -> str:
    """The method of an evaluation in strata and its reference, in one line."""
    return (
        "sum of exact hypergeometric limits per stratum with a Bonferroni split of the risk "
        "(Wright 1991; Boole's inequality)"
    )


def _evaluation_method(document: Mapping[str, Any]) -> str:
    return model_method(document) if "method" in document else strata_method(document)


def _count_lists(payload: Any, settings: Settings) -> None:
    count_attributes(payload, settings)
    count_strata(payload, settings)


OPERATIONS = [
    Operation(
        name="sample-size",
        repeatable=True,
        path="/v1/sample-size",
        summary="Sample size for a test of controls",
        description=(
            "The smallest n such that, with k = ceil(expected_rate × n) deviations allowed, "
            "P(X ≤ k) ≤ 1 − confidence when the true rate equals tolerable_rate. With "
            "underreliance_risk, the smallest n and the largest k meeting both that and "
            "P(X > k) ≤ underreliance_risk at expected_rate. With attributes, one sample for "
            "several attributes: the answer is then a SeveralAttributesPlan."
        ),
        request=SampleSizeRequest,
        response=SampleSizePlanSchema,
        run=_size,
        tag="tests of controls",
        variants={SeveralAttributesPlan: SeveralAttributesPlanSchema},
        precheck=count_attributes,
        ticket=TicketLayout(
            answer=(
                "sample_size",
                "governing_attribute",
                "allowed_deviations",
                "achieved_confidence",
                "risk_of_overreliance",
                "risk_of_underreliance",
                "underreliance_risk",
                "classical_sample_size",
                "items_saved",
                "posterior_probability",
                "posterior_upper_limit",
                "prior",
                "attributes",
            ),
            method=model_method,
        ),
    ),
    Operation(
        name="evaluation",
        repeatable=True,
        path="/v1/evaluation",
        summary="Evaluate the deviations found in a test of controls",
        description=(
            "Sample deviation rate, exact upper deviation limit, allowance for sampling risk, "
            "two-sided interval and, when tolerable_rate is given, the conclusion. With "
            "attributes, each attribute of one sample is evaluated on its own: the answer is "
            "then a SeveralAttributesEvaluation. With strata, a population sampled in "
            "strata: the answer is then a StrataEvaluation, each stratum's own evaluation and "
            "one upper deviation limit for the whole population with guaranteed coverage, "
            "the same answer as POST /v1/evaluation/strata."
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
        variants={
            SeveralAttributesEvaluation: SeveralAttributesEvaluationSchema,
            StratifiedEvaluation: StrataEvaluationSchema,
        },
        precheck=_count_lists,
        ticket=TicketLayout(
            answer=(
                "attributes",
                "strata",
                "sample_deviation_rate",
                "estimated_deviation_rate",
                "upper_deviation_limit",
                "allowance_for_sampling_risk",
                "confidence_interval",
                "risk_at_tolerable_rate",
                "conclusion",
                "guarantee",
                "posterior_probability",
                "posterior_upper_limit",
                "prior",
            ),
            method=_evaluation_method,
        ),
    ),
]

bp = blueprint("attributes", OPERATIONS)
