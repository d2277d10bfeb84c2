"""Periodic controls: ``POST /v1/plans/periodic``."""

from __future__ import annotations

from typing import Any

from schemas.periodic import PERIODIC_PATH, PeriodicPlanSchema, PeriodicRequest
from service.http.markdown import TicketLayout
from service.http.operations import Operation, blueprint
from service.sampling.plans.periodic import PeriodicPlan, plan_periodic
from service.settings import Settings


def _periodic(inputs: dict[str, Any], settings: Settings) -> PeriodicPlan:
    return plan_periodic(**inputs, max_sample_size=settings.max_sample_size)


OPERATIONS = [
    Operation(
        name="plan-periodic",
        repeatable=True,
        path=PERIODIC_PATH,
        summary="What the sample sizes of a periodic control prove",
        description=(
            "For a control run a countable number of times (annual to several times a day): "
            "the frequency-based sizes of common practice (conventions, no published "
            "source), the exact statistical plan for the same occurrences, and for each "
            "size the confidence of finding at least one deviation against 1, 2 and 3 "
            "deviant occurrences and the upper deviation limit when none is found "
            "(hypergeometric, exact)."
        ),
        request=PeriodicRequest,
        response=PeriodicPlanSchema,
        run=_periodic,
        tag="tests of controls",
        ticket=TicketLayout(
            answer=(
                "occurrences",
                "tolerable_deviant_items",
                "common_practice_low",
                "common_practice_high",
                "common_practice_basis",
                "sizes",
            ),
            method=lambda document: (
                "hypergeometric distribution over the occurrences "
                "(Johnson, Kemp & Kotz 2005, ch. 6); frequency table: common practice"
            ),
        ),
    ),
]

bp = blueprint("periodic", OPERATIONS)
