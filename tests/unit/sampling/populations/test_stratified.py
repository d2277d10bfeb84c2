"""Stratified selection: allocations worked by hand, and each stratum re-performed alone as
an items population with its derived seed."""

from __future__ import annotations

import statistics
from decimal import Decimal
from fractions import Fraction
from pathlib import Path

import pytest

from service.sampling.errors import InvalidInput
from service.sampling.populations.reading import PopulationFile, open_population
from service.sampling.populations.stratified import (
    StrataPlan,
    allocate,
    largest_remainders,
    select_stratified,
    stratum_seed,
)
from service.sampling.selection import ItemPopulation, select
from tests.unit.sampling.populations.conftest import shuffled, write_csv

HEADER = ("doc_no", "amount", "vendor")
# Fictional purchase orders of Harbour Lane Provisions Ltd: 60 small, 30 middling and
# 10 large orders, and 3 above 50,000.
ROWS = (
    [(f"HLP-A{k:03d}", f"{100 + k}.00", "Quay Foods") for k in range(60)]
    + [(f"HLP-B{k:03d}", f"{1000 + 40 * k}.00", "Tide & Co") for k in range(30)]
    + [(f"HLP-C{k:03d}", f"{10000 + 900 * k}.50", "Saltmarsh Dairy") for k in range(10)]
    + [(f"HLP-T{k:03d}", f"{60000 + k}.00", "Saltmarsh Dairy") for k in range(3)]
)
SEED = "harbour-lane-strata"
DESCRIPTION = PopulationFile(id_column="doc_no", amount_column="amount")


def test_largest_remainders_worked_by_hand() -> None:
    # Shares 3.5, 3.5, 3: floors 3, 3, 3 leave 1 unit; the tie goes to the earlier stratum.
    assert largest_remainders([Fraction(7, 2), Fraction(7, 2), Fraction(3)], 10) == [4, 3, 3]
    # Shares 1.2, 2.7, 6.1 of 10: floors 1, 2, 6 leave 1 unit, to the largest part (0.7).
    shares = [Fraction(12, 10), Fraction(27, 10), Fraction(61, 10)]
    assert largest_remainders(shares, 10) == [1, 3, 6]


def test_neyman_allocation_worked_by_hand() -> None:
    # Cochran (1977) eq. 5.60: n_h = n N_h S_h / sum N_k S_k. N S = 100 × 10 and 50 × 40,
    # so 30 splits 1000 : 2000, that is 10 and 20.
    assert allocate([100, 50], [Fraction(1000), Fraction(2000)], 30) == [10, 20]
    # A stratum of 5 whose share (20) exceeds its size is taken in full; the other 25 go
    # to the first stratum (Cochran 1977, §5.9).
    assert allocate([100, 5], [Fraction(1000), Fraction(2000)], 30) == [25, 5]


def test_strata_by_amount_bands_each_re_performable_alone(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "po.csv", HEADER, shuffled(ROWS, 8))
    plan = StrataPlan(bands=(Decimal(1000), Decimal(10000)), top_threshold=Decimal(50000),
                      sample_size=20)
    with open_population(path, DESCRIPTION) as table:
        result = select_stratified(table, plan, SEED, "random", max_items=1_000_000)
    labels = [s.label for s in result.strata]
    assert labels == ["[-inf, 1000)", "[1000, 10000)", "[10000, inf)", "top"]
    assert [s.population_size for s in result.strata] == [60, 30, 10, 3]
    # Proportional: 20 × 60/100, 20 × 30/100, 20 × 10/100 = 12, 6, 2; the top in full.
    assert [s.sample_size for s in result.strata] == [12, 6, 2, 3]
    members = {
        "[-inf, 1000)": [r[0] for r in ROWS[:60]],
        "[1000, 10000)": [r[0] for r in ROWS[60:90]],
        "[10000, inf)": [r[0] for r in ROWS[90:100]],
        "top": [r[0] for r in ROWS[100:]],
    }
    for stratum in result.strata:
        assert stratum.seed == stratum_seed(SEED, stratum.label)
        alone = select(ItemPopulation(tuple(members[stratum.label])), stratum.sample_size,
                       stratum.seed, "random")
        assert stratum.selection is not None
        assert stratum.selection.items == alone.items
        assert stratum.selection.population_fingerprint == alone.population_fingerprint
    top = result.strata[-1]
    assert top.taken_in_full and top.total == Decimal("180003.00")


def test_neyman_uses_the_strata_standard_deviations(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "po.csv", HEADER, ROWS[:100])
    plan = StrataPlan(column="vendor", sample_size=20, allocation="neyman")
    with open_population(path, DESCRIPTION) as table:
        result = select_stratified(table, plan, SEED, "systematic", max_items=1_000_000)
    by_vendor: dict[str, list[Decimal]] = {}
    for _doc, amount, vendor in ROWS[:100]:
        by_vendor.setdefault(vendor, []).append(Decimal(amount))
    # The weights N_h S_h by Python's statistics module, sample standard deviation.
    weights = {v: len(a) * statistics.stdev(a) for v, a in by_vendor.items()}
    labels = sorted(by_vendor, key=lambda v: v.encode())
    assert [s.label for s in result.strata] == labels
    assert labels == ["Quay Foods", "Saltmarsh Dairy", "Tide & Co"]
    # Saltmarsh Dairy's Neyman share, 20 × 27,240 / 38,860 ≈ 14, exceeds its 10 records:
    # it is taken in full and the other 10 split between the others by N_h S_h (§5.9).
    share = Fraction(20) * Fraction(weights["Saltmarsh Dairy"]) / Fraction(
        sum(weights.values()))
    assert share > 10
    rest = largest_remainders(
        [Fraction(10) * Fraction(weights[v]) / Fraction(weights["Quay Foods"]
                                                         + weights["Tide & Co"])
         for v in ("Quay Foods", "Tide & Co")],
        10,
    )
    assert [s.sample_size for s in result.strata] == [rest[0], 10, rest[1]]
    for s in result.strata:
        assert s.standard_deviation == pytest.approx(float(statistics.stdev(by_vendor[s.label])))


def test_given_sizes_by_stratum_and_an_unknown_stratum(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "po.csv", HEADER, ROWS)
    with open_population(path, DESCRIPTION) as table:
        result = select_stratified(
            table, StrataPlan(column="vendor", sizes={"Tide & Co": 4, "Quay Foods": 2}),
            SEED, "random", max_items=1_000_000,
        )
        assert [(s.label, s.sample_size) for s in result.strata] == [
            ("Quay Foods", 2), ("Saltmarsh Dairy", 0), ("Tide & Co", 4)]
        with pytest.raises(InvalidInput, match="no stratum 'Harbour'"):
            select_stratified(table, StrataPlan(column="vendor", sizes={"Harbour": 1}),
                              SEED, "random", max_items=1_000_000)
