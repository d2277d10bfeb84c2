"""Over HTTP, answers that sit exactly on the risk are the definition's answers.

Each expected value is derived with fractions (math.comb) in the test.
"""

from __future__ import annotations

import math
from fractions import Fraction
from typing import Any


def test_one_of_two_items_at_an_even_chance_reports_a_risk_of_one_half(client: Any) -> None:
    # N = 2, ceil(0.5 × 2) = 1 deviant item, one item drawn: P(no deviation) = 1/2.
    risk = Fraction(math.comb(1, 1), math.comb(2, 1))
    response = client.post("/v1/evaluation", json={
        "sample_size": 1, "deviations": 0, "confidence": 0.5, "tolerable_rate": 0.5,
        "population": {"size": 2}})
    document = response.get_json()
    assert document["risk_at_tolerable_rate"] == float(risk) == 0.5
    assert document["conclusion"] == "supports_reliance"


def test_population_of_ten_needs_nine_items_and_nine_clean_items_support_reliance(
    client: Any,
) -> None:
    # C(9, 9) / C(10, 9) = 1/10 = 1 − 0.9: nine items meet the condition with equality,
    # eight do not (C(9, 8) / C(10, 8) = 1/5).
    assert Fraction(1, math.comb(10, 9)) == 1 - Fraction("0.9")
    assert Fraction(math.comb(9, 8), math.comb(10, 8)) > Fraction(1, 10)
    plan = client.post("/v1/sample-size", json={
        "tolerable_rate": 0.1, "confidence": 0.9, "population": {"size": 10}}).get_json()
    assert plan["sample_size"] == 9
    evaluation = client.post("/v1/evaluation", json={
        "sample_size": 9, "deviations": 0, "confidence": 0.9, "tolerable_rate": 0.1,
        "population": {"size": 10}}).get_json()
    assert evaluation["conclusion"] == "supports_reliance"
