"""Estimation endpoint: ``POST /v1/estimation/sample-size``."""

from __future__ import annotations

import dataclasses
from typing import Any

from schemas.estimation import EstimationRequest, EstimationSchema
from service.http.operations import Operation, blueprint
from service.sampling.estimation import size_for_estimation
from service.settings import Settings


def _size(inputs: dict[str, Any], settings: Settings) -> dict[str, Any]:
    label = inputs.pop("population_label")
    plan = size_for_estimation(**inputs, max_sample_size=settings.max_sample_size)
    return {**dataclasses.asdict(plan), "population_label": label}


OPERATIONS = [
    Operation(
        name="estimation-sample-size",
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
    ),
]

bp = blueprint("estimation", OPERATIONS)
