"""Reading population files: formats, amount styles and every kind of bad file."""

from __future__ import annotations

import zipfile
from decimal import Decimal
from pathlib import Path

import pytest

from service.sampling.errors import InvalidInput
from service.sampling.populations.amounts import parse_amount
from service.sampling.populations.filters import Filter
from service.sampling.populations.profile import profile_population
from service.sampling.populations.reading import (
    PopulationFile,
    ReadLimits,
    open_population,
)
from tests.unit.sampling.populations.conftest import write_csv, write_parquet, write_xlsx

HEADER = ("doc_no", "amount", "vendor")
ROWS = [("HLP-1", "1,200.50", "Quay Foods"), ("HLP-2", "-3.25", "Tide & Co"), ("HLP-3", "0", "")]


def _refusal(path: Path, description: PopulationFile, limits: ReadLimits | None = None) -> str:
    with pytest.raises(InvalidInput) as caught, open_population(path, description, limits):
        pass
    return f"{caught.value.field}: {caught.value.message}"


def test_a_missing_column_lists_the_columns_there_are(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "po.csv", HEADER, ROWS)
    refusal = _refusal(path, PopulationFile(id_column="document"))
    assert refusal == (
        "population.file.id_column: no column 'document' in the file; its columns are "
        "doc_no, amount, vendor"
    )
    refusal = _refusal(path, PopulationFile(id_column="doc_no", amount_column="value"))
    assert refusal.startswith("population.file.amount_column: no column 'value'")


def test_an_amount_that_does_not_parse_names_its_line_and_column(tmp_path: Path) -> None:
    rows = [*ROWS, ("HLP-4", "12.00 EUR", "Quay Foods")]
    path = write_csv(tmp_path / "po.csv", HEADER, rows)
    refusal = _refusal(path, PopulationFile(id_column="doc_no", amount_column="amount"))
    assert refusal.startswith("population.file.amount_column: 1 amounts in column 'amount'")
    assert "'12.00 EUR' at line 5" in refusal


@pytest.mark.parametrize(
    ("style", "texts", "expected"),
    [
        # Expected values written by hand in plain decimal notation.
        ("1,234.56", ["1,234.56", "-12", "+7.5", " 3 "], ["1234.56", "-12", "7.5", "3"]),
        ("1.234,56", ["1.234,56", "-1234,5", "12"], ["1234.56", "-1234.5", "12"]),
        ("(1,234.56)", ["(1,234.56)", "-3.10", "(12)"], ["-1234.56", "-3.10", "-12"]),
    ],
)
def test_amount_styles_read_exactly(
    tmp_path: Path, style: str, texts: list[str], expected: list[str]
) -> None:
    rows = [(f"HLP-{k}", text, "x") for k, text in enumerate(texts)]
    delimiter = ";" if style == "1.234,56" else ","
    path = write_csv(tmp_path / "po.csv", HEADER, rows, delimiter=delimiter)
    description = PopulationFile(id_column="doc_no", amount_column="amount", amount_style=style)
    with open_population(path, description) as table:
        found = [row[0] for row in table.con.execute(
            "SELECT __amount__ FROM kept ORDER BY __record__").fetchall()]
    assert found == [Decimal(e) for e in expected]
    assert [parse_amount(t, style) for t in texts] == [Decimal(e) for e in expected]


@pytest.mark.parametrize(
    ("style", "text"),
    [("1,234.56", "1,23.4"), ("1,234.56", "1.234,56"), ("1.234,56", "1,234.56"),
     ("(1,234.56)", "(-1)"), ("1,234.56", "1e5"), ("1,234.56", "0.12345678901")],
)
def test_amounts_outside_the_declared_style_are_refused(
    tmp_path: Path, style: str, text: str
) -> None:
    path = write_csv(tmp_path / "po.csv", HEADER, [("HLP-1", text, "x")], delimiter="|")
    description = PopulationFile(id_column="doc_no", amount_column="amount", amount_style=style)
    assert "at line 2" in _refusal(path, description)


def test_a_byte_order_mark_and_a_detected_delimiter(tmp_path: Path) -> None:
    path = tmp_path / "po.csv"
    path.write_bytes("\ufeffdoc_no;amount;vendor\nHLP-1;1,5;\"Quay; Foods\"\n".encode())
    description = PopulationFile(id_column="doc_no", amount_column="amount",
                                 amount_style="1.234,56")
    with open_population(path, description) as table:
        assert table.columns == HEADER
        assert table.con.execute("SELECT vendor, __amount__ FROM source, kept").fetchone() == (
            "Quay; Foods", Decimal("1.5"))


def test_a_line_longer_than_the_limit_is_refused(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "po.csv", HEADER, [*ROWS, ("HLP-9", "1", "x" * 500)])
    refusal = _refusal(path, PopulationFile(id_column="doc_no"), ReadLimits(max_line_bytes=200))
    assert "line 5 is longer than 200 bytes (SAMPLING_MAX_FILE_LINE_BYTES)" in refusal


def test_a_record_with_too_many_fields_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "po.csv"
    path.write_text("doc_no,amount\nHLP-1,1\nHLP-2,2,surplus\n", encoding="utf-8")
    assert "cannot be read as CSV" in _refusal(path, PopulationFile(id_column="doc_no"))


def test_a_file_that_is_not_utf8_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "po.csv"
    path.write_bytes("doc_no,vendor\nHLP-1,Caf\xe9\n".encode("latin-1"))
    assert "cannot be read as CSV" in _refusal(path, PopulationFile(id_column="doc_no"))


def test_the_same_population_reads_alike_in_every_format(tmp_path: Path) -> None:
    files = [
        write_csv(tmp_path / "po.csv", HEADER, ROWS),
        write_xlsx(tmp_path / "po.xlsx", HEADER, ROWS),
        write_parquet(tmp_path / "po.parquet", HEADER, ROWS),
    ]
    seen = []
    for path in files:
        description = PopulationFile(id_column="doc_no", amount_column="amount")
        with open_population(path, description) as table:
            profile = profile_population(table)
        assert profile.amounts is not None
        seen.append((profile.rows_kept, profile.amounts.total, profile.amounts.negative_total))
    assert seen == [(3, Decimal("1197.25"), Decimal("-3.25"))] * 3


def test_a_named_sheet_and_an_unknown_one(tmp_path: Path) -> None:
    path = write_xlsx(tmp_path / "po.xlsx", HEADER, ROWS)
    with open_population(path, PopulationFile(id_column="doc_no", sheet="Orders")) as table:
        assert table.rows_read == 3
    refusal = _refusal(path, PopulationFile(id_column="doc_no", sheet="Invoices"))
    assert refusal == (
        "population.file.sheet: no sheet 'Invoices' in the workbook; its sheets are Orders"
    )


def test_a_compression_bomb_is_refused_before_it_is_opened(tmp_path: Path) -> None:
    path = tmp_path / "bomb.xlsx"
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("xl/worksheets/sheet1.xml", b"\x00" * 5_000_000)
    assert "expand" in _refusal(path, PopulationFile(id_column="doc_no"))
    small = ReadLimits(max_xlsx_bytes=1_000_000, max_xlsx_ratio=10_000)
    assert "limit is 1,000,000 bytes" in _refusal(path, PopulationFile(), small)


def test_a_truncated_workbook_or_parquet_file_is_refused(tmp_path: Path) -> None:
    for path in (
        write_xlsx(tmp_path / "po.xlsx", HEADER, ROWS),
        write_parquet(tmp_path / "po.parquet", HEADER, ROWS),
    ):
        data = path.read_bytes()
        path.write_bytes(data[: len(data) // 2])
        assert "cannot be read as" in _refusal(path, PopulationFile(id_column="doc_no"))


def test_a_wrong_declared_format_is_refused(tmp_path: Path) -> None:
    path = write_xlsx(tmp_path / "po.xlsx", HEADER, ROWS)
    refusal = _refusal(path, PopulationFile(id_column="doc_no", format="csv"))
    assert refusal == "population.file.format: the file was declared csv but is an xlsx file"


def test_a_filter_on_an_unknown_column_or_with_a_number_on_text(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "po.csv", HEADER, ROWS)
    refusal = _refusal(path, PopulationFile(filters=(Filter("colour", "=", "red"),)))
    assert refusal.startswith("population.file.filters[0].column: no column 'colour'")
    refusal = _refusal(path, PopulationFile(filters=(Filter("vendor", ">", 3),)))
    assert "compared as text" in refusal


def test_a_filter_value_is_data_never_query_text(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "po.csv", HEADER, ROWS)
    sly = "x' OR '1'='1"
    with open_population(path, PopulationFile(filters=(Filter("vendor", "=", sly),))) as table:
        assert table.con.execute("SELECT count(*) FROM kept").fetchone() == (0,)


def test_excluded_identifiers_leave_the_population(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "po.csv", HEADER, ROWS)
    with open_population(path, PopulationFile(id_column="doc_no", exclude=("HLP-2",))) as table:
        kept = table.con.execute("SELECT __id__ FROM kept ORDER BY 1").fetchall()
    assert kept == [("HLP-1",), ("HLP-3",)]
    refusal = _refusal(path, PopulationFile(id_column="doc_no", exclude=("HLP-7",)))
    assert refusal == "population.file.exclude: identifiers not in the file: 'HLP-7'"


def test_a_total_beyond_the_exact_range_is_refused_not_a_crash(tmp_path: Path) -> None:
    # 28 integer digits is the most an amount may have (DECIMAL(38, 10)); 20 of the largest
    # add up to more than that.
    huge = "9" * 28
    rows = [(f"HLP-{k}", huge, "x") for k in range(20)]
    path = write_csv(tmp_path / "po.csv", HEADER, rows)
    description = PopulationFile(id_column="doc_no", amount_column="amount")
    with pytest.raises(InvalidInput) as caught, open_population(path, description) as table:
        profile_population(table)
    assert caught.value.field == "population.file"
    assert "cannot be processed" in caught.value.message
