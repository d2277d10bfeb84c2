"""Exact amounts: no binary-float drift in totals or intervals."""

from __future__ import annotations

import math
from decimal import Decimal, localcontext
from fractions import Fraction

import pytest

from service.sampling.errors import InvalidInput
from service.sampling.monetary.amounts import fraction_text, to_decimal, to_units
from service.sampling.monetary.selection import select_units

MILLION = 1_000_000


def test_a_million_amounts_of_ten_cents_total_exactly() -> None:
    # Python's decimal module (28+ digits) is the reference: 0.10 x 1,000,000 = 100000.00.
    # A float sum of 0.1 drifts (math.fsum shows the exact sum of the floats differs).
    units = [to_units("0.10", "amount") for _ in range(MILLION)]
    with localcontext() as context:
        context.prec = 40
        reference = sum((Decimal("0.10") for _ in range(MILLION)), Decimal(0))
    assert to_decimal(sum(units)) == reference == Decimal("100000.00")
    assert sum([0.1] * MILLION) != 100000.0  # the drift this design avoids


def test_a_million_items_of_ten_cents_give_an_exact_interval() -> None:
    population = tuple((f"R{i:07d}", 10) for i in range(MILLION))
    chosen = select_units(population, 3, seed="ten-cents")
    assert chosen.book_value == 10 * MILLION
    assert chosen.sampling_interval == Fraction(10 * MILLION, 3)
    assert to_decimal(chosen.sampling_interval) == Decimal("33333.33")
    assert fraction_text(chosen.sampling_interval) == "100000/3"
    assert sum(item.hits for item in chosen.items) == 3


@pytest.mark.parametrize(
    ("value", "units"),
    [("12.34", 1234), (Decimal("0.10"), 10), (5, 500), ("-3.5", -350), ("1e2", 10000)],
)
def test_decimals_become_whole_units(value: object, units: int) -> None:
    assert to_units(value, "amount") == units


@pytest.mark.parametrize("value", ["0.001", "abc", "NaN", "Infinity", 0.1, True, None])
def test_inexact_or_non_numbers_are_refused(value: object) -> None:
    with pytest.raises(InvalidInput) as caught:
        to_units(value, "population[0].amount")
    assert caught.value.field == "population[0].amount"


def test_rounding_back_is_half_even() -> None:
    # Python's decimal ROUND_HALF_EVEN is the reference.
    for numerator, denominator in [(1, 2), (3, 2), (5, 2), (250_000_000, 60), (7, 3)]:
        exact = Decimal(numerator) / Decimal(denominator)
        assert to_decimal(Fraction(numerator, denominator)) == (exact / 100).quantize(
            Decimal("0.01")
        )
    assert math.isclose(float(to_decimal(Fraction(1, 3))), 0.0)
