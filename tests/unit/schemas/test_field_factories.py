"""The shared field factories: one bound, one message and one description wherever used."""

from __future__ import annotations

from typing import Any

import pytest
from marshmallow import ValidationError

from schemas.common import PopulationSchema, StrictSchema, rates_in_order
from schemas.fields import (
    CONFIDENCE_DESCRIPTION,
    choice_field,
    confidence_field,
    count_field,
    expected_rate_field,
    label_field,
    seed_field,
    tolerable_rate_field,
)
from schemas.monetary import MonetarySampleSizeRequest
from schemas.periodic import PeriodicRequest
from schemas.populations import StratifiedRequest
from schemas.sequential import StagedPlanRequest, StrataEvaluationRequest
from service.sampling.attributes import MAX_CONFIDENCE, MIN_CONFIDENCE, MIN_TOLERABLE_RATE
from service.sampling.selection import MAX_SEED_LENGTH


class Sample(StrictSchema):
    confidence = confidence_field()
    tolerable_rate = tolerable_rate_field("Tolerable deviation rate.", required=True)
    expected_rate = expected_rate_field("Expected deviation rate.")
    deviations = count_field("Deviations found.")
    stage = count_field("Stage reached.", minimum=1, load_default=1)
    label = label_field("A name.", longest=5)
    seed = seed_field("A seed.", example="northwind-2026")
    method = choice_field(("random", "systematic"), "How.", default="random")


def errors(body: dict[str, Any]) -> dict[str, Any]:
    with pytest.raises(ValidationError) as caught:
        Sample().load(body)
    found: dict[str, Any] = caught.value.normalized_messages()
    return found


def test_defaults() -> None:
    assert Sample().load({"tolerable_rate": 0.05}) == {
        "tolerable_rate": 0.05, "confidence": 0.95, "expected_rate": 0.0, "stage": 1,
        "method": "random"}


def test_each_bound_is_refused_with_its_message() -> None:
    found = errors({"tolerable_rate": 0.05, "deviations": -1, "stage": 0, "label": "Leeds!",
                    "seed": "", "method": "haphazard"})
    assert found == {
        "deviations": ["must be at least 0"],
        "stage": ["must be at least 1"],
        "label": ["must be from 1 to 5 characters"],
        "seed": [f"must have 1 to {MAX_SEED_LENGTH} characters"],
        "method": ["must be one of random, systematic"],
    }
    assert "seed" in errors({"tolerable_rate": 0.05, "seed": "x" * (MAX_SEED_LENGTH + 1)})
    assert Sample().load({"tolerable_rate": 0.05, "seed": "x" * MAX_SEED_LENGTH})["seed"]


def test_the_published_bounds_and_descriptions() -> None:
    fields = Sample().fields
    assert fields["confidence"].metadata == {
        "exclusiveMinimum": 0, "exclusiveMaximum": 1, "minimum": MIN_CONFIDENCE,
        "maximum": MAX_CONFIDENCE, "description": CONFIDENCE_DESCRIPTION, "example": 0.95}
    assert fields["tolerable_rate"].metadata["minimum"] == MIN_TOLERABLE_RATE
    assert fields["expected_rate"].metadata["minimum"] == 0
    unbounded = confidence_field("Confidence.", bounds=None).metadata
    assert "minimum" not in unbounded and "maximum" not in unbounded


def test_rates_in_order_names_the_expected_rate() -> None:
    with pytest.raises(ValidationError) as caught:
        rates_in_order({"tolerable_rate": 0.05, "expected_rate": 0.05})
    assert caught.value.normalized_messages() == {
        "expected_rate": ["expected_rate 0.05 must be below tolerable_rate 0.05"]}
    rates_in_order({"tolerable_rate": 0.05, "expected_rate": 0.04})
    rates_in_order({"tolerable_rate": 0.05})


def test_the_requests_share_one_declaration() -> None:
    # The same confidence everywhere in tests of controls; the monetary one has its own
    # wording and no published range (its core takes any fraction).
    for schema in (StagedPlanRequest(), StrataEvaluationRequest(), PeriodicRequest()):
        assert schema.fields["confidence"].metadata["description"] == CONFIDENCE_DESCRIPTION
    assert "minimum" not in MonetarySampleSizeRequest().fields["confidence"].metadata
    # Every seed has the same bound and message.
    with pytest.raises(ValidationError) as caught:
        StratifiedRequest().load({"population": {}, "strata": {}, "sample_size": 1, "seed": ""})
    assert caught.value.normalized_messages()["seed"] == [
        f"must have 1 to {MAX_SEED_LENGTH} characters"]
    with pytest.raises(ValidationError) as caught:
        PopulationSchema().load({"size": 0})
    assert caught.value.normalized_messages() == {"size": ["must be at least 1"]}
