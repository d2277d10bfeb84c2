"""Profiles checked against an independent reading of the same file with Python's csv and
decimal modules, and stratum boundaries against the Dalenius–Hodges rule worked by hand."""

from __future__ import annotations

import csv
import random
from decimal import Decimal
from pathlib import Path

import pytest

from service.sampling.errors import InvalidInput
from service.sampling.populations.filters import Filter
from service.sampling.populations.profile import profile_population
from service.sampling.populations.reading import PopulationFile, open_population
from service.sampling.populations.strata import class_edge, cumulative_root_boundaries
from tests.unit.sampling.populations.conftest import write_csv

HEADER = ("doc_no", "posted", "amount", "vendor")


def _ledger(path: Path, rows: int = 700, seed: int = 3) -> Path:
    """Fictional purchase orders of Harbour Lane Provisions Ltd: skewed amounts, some
    negative (credit notes), some zero, a few blank, two repeated document numbers."""
    rng = random.Random(seed)
    records = []
    for k in range(rows):
        cents = int(rng.paretovariate(1.3) * 4000)
        if k % 50 == 7:
            cents = -cents
        if k % 97 == 3:
            cents = 0
        amount = f"{cents // 100:,}.{cents % 100:02d}" if cents >= 0 else (
            f"-{-cents // 100:,}.{-cents % 100:02d}"
        )
        if k % 131 == 5:
            amount = ""
        records.append((f"HLP-{k:05d}", f"2026-{1 + k % 12:02d}-15", amount, f"V{k % 9}"))
    records[400] = (records[17][0], *records[400][1:])
    records[650] = (records[17][0], *records[650][1:])
    return write_csv(path, HEADER, records)


def _independent(path: Path) -> dict[str, object]:
    """The same facts by Python's csv and decimal modules, row by row."""
    with path.open(newline="", encoding="utf-8") as stream:
        rows = list(csv.DictReader(stream))
    amounts = [Decimal(r["amount"].replace(",", "")) for r in rows if r["amount"]]
    ids = [r["doc_no"] for r in rows]
    return {
        "rows": len(rows),
        "distinct": len(set(ids)),
        "total": sum(amounts, Decimal(0)),
        "count": len(amounts),
        "blank": sum(1 for r in rows if not r["amount"]),
        "min": min(amounts),
        "max": max(amounts),
        "negatives": sum(1 for a in amounts if a < 0),
        "negative_total": sum((a for a in amounts if a < 0), Decimal(0)),
        "zeros": sum(1 for a in amounts if a == 0),
    }


def test_counts_and_totals_match_an_independent_reading(tmp_path: Path) -> None:
    path = _ledger(tmp_path / "ledger.csv")
    expected = _independent(path)
    description = PopulationFile(id_column="doc_no", amount_column="amount")
    with open_population(path, description) as table:
        profile = profile_population(table)
    amounts = profile.amounts
    assert amounts is not None
    assert profile.rows_read == profile.rows_kept == expected["rows"]
    assert profile.distinct_ids == expected["distinct"]
    assert (profile.repeated_ids, profile.repeated_rows) == (1, 3)
    assert profile.repeated[0].where == ("line 19", "line 402", "line 652")
    assert amounts.total == expected["total"]
    assert amounts.count == expected["count"]
    assert amounts.blank == expected["blank"]
    assert (amounts.minimum, amounts.maximum) == (expected["min"], expected["max"])
    assert amounts.negative_count == expected["negatives"]
    assert amounts.negative_total == expected["negative_total"]
    assert amounts.zero_count == expected["zeros"]


def test_reconciliation_states_the_differences(tmp_path: Path) -> None:
    path = _ledger(tmp_path / "ledger.csv")
    expected = _independent(path)
    total = expected["total"]
    assert isinstance(total, Decimal)
    description = PopulationFile(id_column="doc_no", amount_column="amount")
    with open_population(path, description) as table:
        same = profile_population(table, control_total=total, control_count=700)
        short = profile_population(table, control_total=total + Decimal("10.05"))
    assert same.reconciliation is not None and same.reconciliation.reconciles
    assert short.reconciliation is not None and not short.reconciliation.reconciles
    assert short.reconciliation.total_difference == Decimal("-10.05")


def test_filters_keep_what_python_keeps(tmp_path: Path) -> None:
    path = _ledger(tmp_path / "ledger.csv")
    with path.open(newline="", encoding="utf-8") as stream:
        rows = list(csv.DictReader(stream))
    kept = [
        r for r in rows
        if r["amount"] and Decimal(r["amount"].replace(",", "")) >= Decimal("100")
        and r["vendor"] in ("V1", "V2") and "2026-03-01" <= r["posted"] <= "2026-09-30"
    ]
    filters = (
        Filter("amount", ">=", 100),
        Filter("vendor", "in", ["V1", "V2"]),
        Filter("posted", "between", ["2026-03-01", "2026-09-30"]),
    )
    description = PopulationFile(id_column="doc_no", amount_column="amount", filters=filters)
    with open_population(path, description) as table:
        profile = profile_population(table)
    assert profile.rows_kept == profile.rows_meeting_filters == len(kept)
    assert profile.amounts is not None
    assert profile.amounts.total == sum(
        (Decimal(r["amount"].replace(",", "")) for r in kept), Decimal(0)
    )


def test_dalenius_hodges_boundaries_worked_by_hand() -> None:
    # Worked by hand: frequencies 16 9 4 1 1 4 9 16 have square roots 4 3 2 1 1 2 3 4,
    # cumulated 4 7 9 10 11 13 16 20. Four strata aim at 5, 10 and 15: nearest are 4
    # (after class 1), 10 (after class 4) and 16 (after class 7).
    assert cumulative_root_boundaries([16, 9, 4, 1, 1, 4, 9, 16], 4) == (1, 4, 7)
    # Three strata aim at 6.67 and 13.33: nearest are 7 (after class 2) and 13 (class 6).
    assert cumulative_root_boundaries([16, 9, 4, 1, 1, 4, 9, 16], 3) == (2, 6)
    # All the weight in one class: cumulated 0 0 10 10, targets 3.33 and 6.67 fall nearest
    # to the edges after class 1 and class 3, each of which would leave a stratum empty.
    assert cumulative_root_boundaries([0, 0, 100, 0], 3) == ()
    # Equal weights 1 1 1 1 1 1 cumulate to 1..6; thirds at 2 and 4: after classes 2 and 4.
    assert cumulative_root_boundaries([1] * 6, 3) == (2, 4)


def test_class_edges_are_exact_amount_bounds() -> None:
    # 100 classes over [10.00, 1,010.00] are 10.00 wide: edge 3 is 40.00.
    assert class_edge(Decimal("10.00"), Decimal("1010.00"), 100, 3, 2) == Decimal("40.00")
    # Over [0, 1] in 3 classes edge 1 is 1/3, rounded up at 2 places to 0.34.
    assert class_edge(Decimal(0), Decimal(1), 3, 1, 2) == Decimal("0.34")


def test_suggested_strata_partition_the_positive_amounts(tmp_path: Path) -> None:
    path = _ledger(tmp_path / "ledger.csv")
    expected = _independent(path)
    description = PopulationFile(id_column="doc_no", amount_column="amount")
    with open_population(path, description) as table:
        profile = profile_population(table, strata=4, top_threshold=Decimal("5000"))
    suggestion = profile.strata
    assert suggestion is not None
    with path.open(newline="", encoding="utf-8") as stream:
        amounts = [
            Decimal(r["amount"].replace(",", "")) for r in csv.DictReader(stream) if r["amount"]
        ]
    top = [a for a in amounts if a >= 5000]
    assert (suggestion.top_items, suggestion.top_total) == (len(top), sum(top, Decimal(0)))
    assert suggestion.left_out_items == expected["negatives"] + expected["zeros"]
    for stratum in suggestion.strata:
        inside = [
            a for a in amounts
            if 0 < a < 5000
            and (stratum.low is None or a >= stratum.low)
            and (stratum.high is None or a < stratum.high)
        ]
        assert (stratum.items, stratum.total) == (len(inside), sum(inside, Decimal(0)))
    assert sum(s.items for s in suggestion.strata) == len([a for a in amounts if 0 < a < 5000])
    assert 2 <= len(suggestion.strata) <= 4


def test_a_control_total_needs_an_amount_column(tmp_path: Path) -> None:
    path = _ledger(tmp_path / "ledger.csv")
    with (
        open_population(path, PopulationFile(id_column="doc_no")) as table,
        pytest.raises(InvalidInput, match="needs an amount_column"),
    ):
        profile_population(table, control_total=Decimal(1))
