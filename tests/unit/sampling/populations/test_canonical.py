"""The canonical form: one population, whatever its format or row order, one selection.

The reference is the selection of the same identifiers given as an items population
(``population.items``), computed by :func:`service.sampling.selection.select`.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from service.sampling.errors import InvalidInput
from service.sampling.populations.canonical import select_from_file
from service.sampling.populations.reading import PopulationFile, open_population
from service.sampling.selection import ItemPopulation, select
from tests.unit.sampling.populations.conftest import (
    shuffled,
    write_csv,
    write_parquet,
    write_xlsx,
)

HEADER = ("doc_no", "posted", "amount", "vendor")
# Fictional purchase orders of Harbour Lane Provisions Ltd. The identifiers include a
# prefix of another ("HLP-7" and "HLP-70"), lower and upper case, accented letters (whose
# UTF-8 bytes sort after every ASCII letter) and a spreadsheet formula lookalike.
IDS = [f"HLP-{n}" for n in range(1, 180)] + ["hlp-1", "Ärmel-2", "Zebra", "=SUM(A1)", "ß-9"]
ROWS = [
    (doc, f"2026-0{1 + k % 9}-1{k % 10}", f"{(k * 37) % 5000}.{k % 100:02d}", f"Vendor {k % 7}")
    for k, doc in enumerate(IDS)
]
SEED = "harbour-lane-2026"


def _selected(path: Path, method: str, n: int = 25) -> tuple[object, ...]:
    with open_population(path, PopulationFile(id_column="doc_no")) as table:
        chosen = select_from_file(table, n, SEED, method, max_items=1_000_000)
    return (chosen.items, chosen.positions, chosen.population_fingerprint,
            chosen.selection_fingerprint)


@pytest.mark.parametrize("method", ["random", "systematic"])
def test_every_form_of_the_population_gives_the_same_selection(tmp_path: Path, method: str) -> None:
    reference = select(ItemPopulation(tuple(IDS)), 25, SEED, method)
    expected = (reference.items, reference.positions, reference.population_fingerprint,
                reference.selection_fingerprint)
    files = [
        write_csv(tmp_path / "orders.csv", HEADER, ROWS),
        write_csv(tmp_path / "shuffled.csv", HEADER, shuffled(ROWS, 11), delimiter=";"),
        write_xlsx(tmp_path / "orders.xlsx", HEADER, shuffled(ROWS, 12)),
        write_parquet(tmp_path / "orders.parquet", HEADER, shuffled(ROWS, 13)),
    ]
    for path in files:
        assert _selected(path, method) == expected, path.name


def test_the_records_come_with_all_their_columns_in_draw_order(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "orders.csv", HEADER, shuffled(ROWS, 5))
    with open_population(path, PopulationFile(id_column="doc_no")) as table:
        chosen = select_from_file(table, 10, SEED, "random", max_items=1_000_000)
    by_id = {row[0]: dict(zip(HEADER, row, strict=True)) for row in ROWS}
    assert chosen.columns == HEADER
    assert list(chosen.records) == [by_id[item] for item in chosen.items]
    # The line of each record, counted in the file as written (header on line 1).
    written = [row[0] for row in shuffled(ROWS, 5)]
    assert chosen.where == tuple(f"line {written.index(i) + 2}" for i in chosen.items)


def test_repeated_identifiers_are_refused_with_their_lines(tmp_path: Path) -> None:
    rows = [*ROWS[:5], ROWS[1], *ROWS[5:8], ROWS[1]]
    path = write_csv(tmp_path / "orders.csv", HEADER, rows)
    with (
        open_population(path, PopulationFile(id_column="doc_no")) as table,
        pytest.raises(InvalidInput) as caught,
    ):
        select_from_file(table, 3, SEED, "random", max_items=1_000_000)
    assert caught.value.field == "population.file.id_column"
    # ROWS[1] is the second record (line 3), repeated as the 6th and 10th (lines 7, 11).
    assert f"{ROWS[1][0]!r} at line 3, line 7, line 11" in caught.value.message


def test_a_blank_identifier_is_refused_with_its_line(tmp_path: Path) -> None:
    rows = [*ROWS[:3], ("", "2026-01-01", "1.00", "Vendor 0")]
    path = write_csv(tmp_path / "orders.csv", HEADER, rows)
    with (
        open_population(path, PopulationFile(id_column="doc_no")) as table,
        pytest.raises(InvalidInput, match="1 blank identifiers in column 'doc_no', at line 5"),
    ):
        select_from_file(table, 2, SEED, "random", max_items=1_000_000)


def test_record_numbers_serve_as_identifiers(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "orders.csv", HEADER, ROWS)
    with open_population(path, PopulationFile()) as table:
        chosen = select_from_file(table, 8, SEED, "random", max_items=1_000_000)
    from service.sampling.selection import NumberedPopulation

    numbered = select(NumberedPopulation(len(ROWS)), 8, SEED, "random")
    assert chosen.items == numbered.items  # the same draws over positions 1..N
    assert [r["doc_no"] for r in chosen.records] == [ROWS[i - 1][0] for i in chosen.items]
