"""Estimation endpoint: ``POST /v1/estimation/sample-size``."""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from typing import Any

from schemas.estimation import EstimationRequest, EstimationSchema
from service.http.markdown import TicketLayout
from service.http.operations import Operation, blueprint
from service.sampling.estimation import size_for_estimation
from service.settings import Settings


def _size(inputs: dict[str, Any], settings: Settings) -> dict[str, Any]:
    label = inputs.pop("population_label")
    plan = size_for_estimation(**inputs, max_sample_size=settings.max_sample_size)
    return {**dataclasses.asdict(plan), "population_label": label}


_REFERENCES = {
    "exact": "exact miss probability (binomial, or hypergeometric with a population)",
    "wilson": "Wilson (1927), JASA 22",
    "normal": "normal approximation, Cochran (1977) §4.4",
    "chebyshev": "Chebyshev's inequality",
    "hoeffding": "Hoeffding (1963), JASA 58",
}


def _estimation_method(document: Mapping[str, Any]) -> str:
    names = [row["method"] for row in document["rows"]]
    return "; ".join(f"{name}: {_REFERENCES.get(name, name)}" for name in names)


OPERATIONS = [
    Operation(
        name="estimation-sample-size",
        repeatable=True,
        path="/v1/estimation/sample-size",
        summary="Sample sizes to estimate a deviation rate within a margin",
        description=(
            "For each method asked for, the sample size at which the sample rate lands "
            "within margin of the true rate with probability at least confidence, labelled "
            "by the kind of guarantee it gives (exact, approximate, distribution_free_bound), "
            "with the exact miss probability at that size and the ratio to the exact size."
        ),
        request=EstimationRequest,
        response=EstimationSchema,
        run=_size,
        tag="estimation",
        ticket=TicketLayout(answer=("recommended", "rows"), method=_estimation_method),
    ),
]

bp = blueprint("estimation", OPERATIONS)
