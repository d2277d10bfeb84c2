"""Contract of strata in a request: one stratum's counts, the list and its checks.

Shared by ``POST /v1/evaluation`` (its ``strata`` form) and ``POST /v1/evaluation/strata``.
"""

from __future__ import annotations

from typing import Any

from marshmallow import fields, post_load, validate

from schemas.common import StrictSchema
from schemas.fields import count_field, label_field
from service.sampling.errors import InvalidInput
from service.sampling.sequential.strata import MAX_STRATA, StratumInput


class StratumCountsSchema(StrictSchema):
    """One stratum: its population, the items tested and the deviations found."""

    label = label_field(
        "Name of the stratum, unique in the request.", example="Plant A", required=True
    )
    population_size = count_field(
        "Items in the stratum.", minimum=1, example=1200, required=True
    )
    sample_size = count_field(
        "Items tested in the stratum.", minimum=1, example=40, required=True
    )
    deviations = count_field("Deviations found in the stratum.", example=0, required=True)

    @post_load
    def _to_core(self, data: dict[str, Any], **kwargs: Any) -> StratumInput:
        return StratumInput(**data)


def strata_field(
    description: str = "Each stratum's population, sample and deviations.",
    required: bool = False,
) -> fields.List[Any]:
    """The ``strata`` list: from one to ``MAX_STRATA`` strata."""
    return fields.List(
        fields.Nested(StratumCountsSchema),
        required=required,
        validate=validate.Length(
            min=1, max=MAX_STRATA, error="must hold from {min} to {max} strata"
        ),
        metadata={"description": description},
    )


def check_strata(strata: list[StratumInput], errors: dict[str, list[str]]) -> None:
    """Add to ``errors`` each repeated label, each sample above its stratum's population
    and each deviation count above its sample, keyed by the stratum's field."""
    labels: dict[str, int] = {}
    for i, stratum in enumerate(strata):
        if stratum.label in labels:
            errors[f"strata[{i}].label"] = [
                f"label {stratum.label!r} repeats that of strata[{labels[stratum.label]}]"
            ]
        labels.setdefault(stratum.label, i)
        if stratum.sample_size > stratum.population_size:
            errors[f"strata[{i}].sample_size"] = [
                f"sample_size {stratum.sample_size} must not exceed population_size "
                f"{stratum.population_size}"
            ]
        if stratum.deviations > stratum.sample_size:
            errors[f"strata[{i}].deviations"] = [
                f"deviations {stratum.deviations} must not exceed sample_size "
                f"{stratum.sample_size}"
            ]


def count_strata(payload: Any, settings: Any = None) -> None:
    """Refuse an over-long strata list before each stratum is validated."""
    strata = payload.get("strata") if isinstance(payload, dict) else None
    if isinstance(strata, list) and len(strata) > MAX_STRATA:
        raise InvalidInput("strata", f"strata holds {len(strata):,} strata; at most {MAX_STRATA}")
