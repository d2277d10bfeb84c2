"""Rates are computed on the decimal the caller wrote, at any length, or refused by name.

Expected sizes are derived in the tests with exact rational arithmetic (fractions and
math.comb, the binomial definition of the README), not read from the service.
"""

from __future__ import annotations

import json
import math
from fractions import Fraction
from typing import Any

import pytest

SIZE = "/v1/sample-size"


def _post(client: Any, text: str) -> Any:
    return client.post(SIZE, data=text, content_type="application/json")


def binomial_plan(tolerable: Fraction, expected: Fraction, confidence: Fraction) -> tuple[int, int]:
    """Smallest n with P(X ≤ ceil(e n)) ≤ 1 − c, X ~ Bin(n, t), in fractions."""
    risk = 1 - confidence
    n = 0
    while True:
        n += 1
        k = math.ceil(expected * n)
        tail = sum(math.comb(n, i) * tolerable**i * (1 - tolerable) ** (n - i)
                   for i in range(k + 1))
        if tail <= risk:
            return n, k


def test_expected_rate_longer_than_a_double_uses_every_written_digit(client: Any) -> None:
    # 0.0100000000000000001 × 133 = 1.33... → 2 deviations allowed; the double 0.01 would
    # allow 1 and give a different plan (fractions, both ways).
    written = Fraction("0.0100000000000000001")
    want = binomial_plan(Fraction("0.0466"), written, Fraction("0.95"))
    assert want == (133, 2)
    assert binomial_plan(Fraction("0.0466"), Fraction("0.01"), Fraction("0.95")) == (100, 1)
    response = _post(client, '{"tolerable_rate": 0.0466, '
                             '"expected_rate": 0.0100000000000000001}')
    assert response.status_code == 200, response.get_data(as_text=True)
    document = response.get_json()
    assert (document["sample_size"], document["allowed_deviations"]) == want


def test_expected_rate_that_underflows_is_refused_naming_the_field(client: Any) -> None:
    response = _post(client, '{"tolerable_rate": 0.05, "expected_rate": 1e-400}')
    assert response.status_code == 422
    problem = json.loads(response.get_data(as_text=True))
    assert "expected_rate" in problem["errors"]
    assert "1E-400" in " ".join(problem["errors"]["expected_rate"])


@pytest.mark.parametrize("field", ["tolerable_rate", "expected_rate", "confidence"])
def test_rate_with_too_many_digits_is_refused_naming_the_field(client: Any, field: str) -> None:
    body = {"tolerable_rate": "0.05", "expected_rate": "0.01", "confidence": "0.95"}
    body[field] = "0." + "1" * 31  # 31 significant digits, above the documented 30
    text = "{" + ", ".join(f'"{name}": {value}' for name, value in body.items()) + "}"
    response = _post(client, text)
    assert response.status_code == 422, response.get_data(as_text=True)
    problem = json.loads(response.get_data(as_text=True))
    assert field in problem["errors"]
    assert "31 significant digits" in " ".join(problem["errors"][field])


def test_thirty_digits_are_accepted(client: Any) -> None:
    text = '{"tolerable_rate": 0.05, "expected_rate": 0.' + "0" * 2 + "1" * 28 + "}"
    assert _post(client, text).status_code == 200


def test_tiny_positive_expected_rate_gets_its_deviation_and_a_warning(client: Any) -> None:
    # 1e-320 × 93 rounds up to 1 deviation: the 1-deviation plan (93, 1) of table A-1 at
    # 5%/1% (AICPA Audit Sampling guide, recalled from memory) instead of (59, 0); checked
    # here with fractions.
    want = binomial_plan(Fraction("0.05"), Fraction("1e-320"), Fraction("0.95"))
    assert want == (93, 1)
    assert binomial_plan(Fraction("0.05"), Fraction(0), Fraction("0.95")) == (59, 0)
    response = _post(client, '{"tolerable_rate": 0.05, "expected_rate": 1e-320}')
    document = response.get_json()
    assert (document["sample_size"], document["allowed_deviations"]) == want
    assert any("expected rate" in w and "59" in w for w in document["warnings"])


def test_an_ordinary_expected_rate_gets_no_such_warning(client: Any) -> None:
    document = _post(client, '{"tolerable_rate": 0.05, "expected_rate": 0.01}').get_json()
    assert not any("Check that the expected rate" in w for w in document["warnings"])
