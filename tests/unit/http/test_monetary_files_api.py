"""POST /v1/monetary/selection with a population file, through the Flask test client.

The reference for every file selection is the same ledger sent as a JSON list of
``{"id", "amount"}`` items; totals are checked against Python's csv and decimal modules.
The scenario is invented: the receivables ledger of Kestrel Marine Supplies Ltd.
"""

from __future__ import annotations

import csv
import io
import json
import random
from decimal import Decimal
from typing import Any

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import xlsxwriter
from flask.testing import FlaskClient

SELECTION = "/v1/monetary/selection"
XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
HEADER = ["invoice", "customer", "due", "balance"]
ROWS = [
    [f"KMS-{40000 + k}", f"Customer {k % 17}", f"2026-{1 + k % 12:02d}-28",
     f"{(k * 7919) % 60000}.{(k * 37) % 100:02d}"]
    for k in range(1, 241)
]
# Two large balances become individually significant; a credit and a nil balance are
# excluded from the population sampled by amount.
ROWS[10][3] = "950000.00"
ROWS[20][3] = "610000.10"
ROWS[30][3] = "-1250.40"
ROWS[40][3] = "0.00"
FILE = {"id_column": "invoice", "amount_column": "balance"}
REQUEST = {"population": {"file": FILE}, "sample_size": 30, "seed": "kestrel-ar-2026"}


def _csv(rows: list[list[str]], header: list[str] = HEADER, delimiter: str = ",") -> bytes:
    out = io.StringIO()
    writer = csv.writer(out, delimiter=delimiter, lineterminator="\r\n")
    writer.writerow(header)
    writer.writerows(rows)
    return out.getvalue().encode()


def _european(rows: list[list[str]]) -> list[list[str]]:
    """Balances written 1.234,56, as some exports write them."""
    def written(amount: str) -> str:
        sign = "-" if amount.startswith("-") else ""
        units, part = amount.lstrip("-").split(".")
        return f"{sign}{int(units):,}".replace(",", ".") + "," + part

    return [[*row[:3], written(row[3])] for row in rows]


def _xlsx(rows: list[list[str]]) -> bytes:
    """Balances as numeric cells, as a spreadsheet export writes them."""
    buffer = io.BytesIO()
    workbook = xlsxwriter.Workbook(buffer, {"in_memory": True})
    sheet = workbook.add_worksheet("Ledger")
    sheet.write_row(0, 0, HEADER)
    for r, row in enumerate(rows, start=1):
        for c, value in enumerate(row):
            if c == 3:
                sheet.write_number(r, c, float(value))
            else:
                sheet.write_string(r, c, value)
    workbook.close()
    return buffer.getvalue()


def _parquet(rows: list[list[str]]) -> bytes:
    buffer = io.BytesIO()
    table = pa.table({name: [row[k] for row in rows] for k, name in enumerate(HEADER)})
    pq.write_table(table, buffer)
    return buffer.getvalue()


def _upload(
    client: FlaskClient, request: dict[str, Any], content: bytes, name: str = "ledger.csv",
    **kw: Any,
) -> Any:
    return client.post(
        SELECTION,
        data={"file": (io.BytesIO(content), name), "request": json.dumps(request)},
        content_type="multipart/form-data",
        **kw,
    )


def _plain(entries: list[dict[str, Any]]) -> list[dict[str, Any]]:
    return [{k: v for k, v in e.items() if k not in ("where", "record")} for e in entries]


COMPARED = (
    "sample_size", "units_drawn", "population_items", "book_value", "sampled_value",
    "sampling_interval", "sampling_interval_exact", "excluded_count", "excluded_total", "seed",
    "method", "algorithm", "population_fingerprint", "selection_fingerprint", "summary",
    "warnings",
)


@pytest.mark.parametrize(
    ("form", "method"),
    [
        ("csv", "fixed_interval"),
        ("csv", "cell"),
        ("csv", "random_units"),
        ("shuffled csv", "cell"),
        ("semicolon csv", "fixed_interval"),
        ("1.234,56 csv", "cell"),
        ("xlsx", "random_units"),
        ("parquet", "fixed_interval"),
    ],
)
def test_a_file_selects_as_the_same_items_listed(
    client: FlaskClient, form: str, method: str
) -> None:
    shuffled = list(ROWS)
    random.Random(7).shuffle(shuffled)
    content, name = {
        "csv": (_csv(ROWS), "ledger.csv"),
        "shuffled csv": (_csv(shuffled), "ledger.csv"),
        "semicolon csv": (_csv(ROWS, delimiter=";"), "ledger.csv"),
        "1.234,56 csv": (_csv(_european(shuffled), delimiter=";"), "ledger.csv"),
        "xlsx": (_xlsx(shuffled), "ledger.xlsx"),
        "parquet": (_parquet(shuffled), "ledger.parquet"),
    }[form]
    request = {**REQUEST, "method": method}
    if form == "1.234,56 csv":
        request["population"] = {"file": {**FILE, "amount_style": "1.234,56"}}
    by_file = _upload(client, request, content, name)
    assert by_file.status_code == 200, by_file.get_data(as_text=True)
    listed = {**request, "population": [{"id": r[0], "amount": r[3]} for r in ROWS]}
    expected = client.post(SELECTION, json=listed).json
    got = by_file.json
    for key in COMPARED:
        assert got[key] == expected[key], key
    assert _plain(got["items"]) == expected["items"]
    assert _plain(got["individually_significant"]) == expected["individually_significant"]


def test_the_answer_carries_each_record_and_where_it_is(client: FlaskClient) -> None:
    got = _upload(client, REQUEST, _csv(ROWS)).json
    by_id = {row[0]: (k + 2, dict(zip(HEADER, row, strict=True))) for k, row in enumerate(ROWS)}
    assert got["columns"] == HEADER
    for entry in [*got["items"], *got["individually_significant"]]:
        line, record = by_id[entry["id"]]
        assert entry["where"] == f"line {line}"
        assert entry["record"] == record
    assert [e["id"] for e in got["individually_significant"]] == ["KMS-40011", "KMS-40021"]
    assert [(e["id"], e["amount"], e["where"]) for e in got["excluded_records"]] == [
        ("KMS-40031", "-1250.40", "line 32"),
        ("KMS-40041", "0.00", "line 42"),
    ]


def test_totals_agree_with_an_independent_decimal_sum(client: FlaskClient) -> None:
    got = _upload(client, REQUEST, _csv(ROWS)).json
    # Independent: Python's csv and decimal modules over the same bytes.
    amounts = [Decimal(r["balance"]) for r in csv.DictReader(io.StringIO(_csv(ROWS).decode()))]
    positive = [a for a in amounts if a > 0]
    assert Decimal(got["book_value"]) == sum(positive)
    assert got["excluded_count"] == 2
    assert Decimal(got["excluded_total"]) == sum(a for a in amounts if a <= 0)
    significant = sum(Decimal(e["amount"]) for e in got["individually_significant"])
    assert Decimal(got["sampled_value"]) == sum(positive) - significant
    assert any("zero or negative amount" in w for w in got["warnings"])


def test_filters_and_exclusions_shape_the_population(client: FlaskClient) -> None:
    file = {**FILE, "exclude": ["KMS-40011"],
            "filters": [{"column": "customer", "comparison": "!=", "value": "Customer 3"}]}
    got = _upload(client, {**REQUEST, "population": {"file": file}}, _csv(ROWS))
    assert got.status_code == 200, got.get_data(as_text=True)
    kept = [r for r in ROWS if r[0] != "KMS-40011" and r[1] != "Customer 3"]
    listed = {**REQUEST, "population": [{"id": r[0], "amount": r[3]} for r in kept]}
    expected = client.post(SELECTION, json=listed).json
    assert got.json["selection_fingerprint"] == expected["selection_fingerprint"]
    assert _plain(got.json["items"]) == expected["items"]


def test_the_csv_answer_carries_the_records_guarded(client: FlaskClient) -> None:
    rows = [list(r) for r in ROWS]
    for row in rows:
        row[1] = "=HYPERLINK(\"http://example.invalid\")"
    response = _upload(client, REQUEST, _csv(rows), headers={"Accept": "text/csv"})
    assert response.status_code == 200
    table = list(csv.reader(io.StringIO(response.get_data(as_text=True).lstrip("\ufeff"))))
    assert table[0] == ["selection", "item", "book_amount", "hits", "units", "where in the file",
                        *HEADER, "audited_amount"]
    assert len(table) == 1 + 2 + len(_upload(client, REQUEST, _csv(rows)).json["items"])
    assert all(row[7].startswith("'=HYPERLINK") for row in table[1:])


def test_the_xlsx_answer_is_a_test_sheet_with_the_records(client: FlaskClient) -> None:
    import openpyxl

    response = _upload(client, REQUEST, _csv(ROWS), headers={"Accept": XLSX})
    assert response.status_code == 200
    assert response.mimetype == XLSX
    sheet = openpyxl.load_workbook(io.BytesIO(response.data))["Tests"]
    heading = [c.value for c in sheet[1]]
    assert heading == ["line", "selection", "item", "book amount", "hits", "units",
                       "where in the file", *HEADER, "audited amount", "notes"]


# --------------------------------------------------------------------------- bad input


def _problem(response: Any, status: int = 422) -> dict[str, Any]:
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.mimetype == "application/problem+json"
    body: dict[str, Any] = response.json
    return body


def test_a_missing_amount_column_is_named(client: FlaskClient) -> None:
    request = {**REQUEST, "population": {"file": {"id_column": "invoice"}}}
    body = _problem(_upload(client, request, _csv(ROWS)))
    assert "is required" in body["errors"]["population.file.amount_column"][0]


def test_an_amount_column_not_in_the_file_lists_the_columns(client: FlaskClient) -> None:
    request = {**REQUEST, "population": {"file": {**FILE, "amount_column": "amount"}}}
    body = _problem(_upload(client, request, _csv(ROWS)))
    message = body["errors"]["population.file.amount_column"][0]
    assert "'amount'" in message and "invoice, customer, due, balance" in message


def test_record_numbers_are_refused_as_identifiers(client: FlaskClient) -> None:
    request = {**REQUEST, "population": {"file": {"row_numbers": True,
                                                  "amount_column": "balance"}}}
    body = _problem(_upload(client, request, _csv(ROWS)))
    assert "population.file.id_column" in body["errors"]


def test_an_unparseable_amount_names_its_line_and_column(client: FlaskClient) -> None:
    rows = [list(r) for r in ROWS]
    rows[4][3] = "12O.50"  # a letter O
    body = _problem(_upload(client, REQUEST, _csv(rows)))
    message = body["errors"]["population.file.amount_column"][0]
    assert "'12O.50' at line 6" in message and "'balance'" in message


def test_a_blank_amount_names_its_line(client: FlaskClient) -> None:
    rows = [list(r) for r in ROWS]
    rows[6][3] = ""
    body = _problem(_upload(client, REQUEST, _csv(rows)))
    assert "blank amount" in body["errors"]["population.file.amount_column"][0]
    assert "line 8" in body["errors"]["population.file.amount_column"][0]


def test_an_amount_finer_than_the_currency_unit_names_its_line(client: FlaskClient) -> None:
    rows = [list(r) for r in ROWS]
    rows[2][3] = "100.125"
    body = _problem(_upload(client, REQUEST, _csv(rows)))
    message = body["errors"]["population.file.amount_column"][0]
    assert "100.125 at line 4" in message and "more than 2 decimal places" in message


def test_duplicate_identifiers_are_refused_with_their_lines(client: FlaskClient) -> None:
    rows = [list(r) for r in ROWS]
    rows[9][0] = rows[8][0]
    body = _problem(_upload(client, REQUEST, _csv(rows)))
    message = body["errors"]["population.file.id_column"][0]
    assert "line 10" in message and "line 11" in message


def test_a_file_of_only_zero_and_negative_amounts_is_refused(client: FlaskClient) -> None:
    rows = [[f"KMS-{k}", "Customer", "2026-01-31", "-5.00" if k % 2 else "0"] for k in range(9)]
    body = _problem(_upload(client, REQUEST, _csv(rows)))
    assert "no item with an amount above 0" in json.dumps(body)


def test_a_json_request_naming_a_file_without_one_is_refused(client: FlaskClient) -> None:
    response = client.post(SELECTION, json=REQUEST)
    body = _problem(response)
    assert "population" in body["errors"]


def test_a_multipart_request_without_the_file_part_is_refused(client: FlaskClient) -> None:
    response = client.post(
        SELECTION, data={"request": json.dumps(REQUEST)}, content_type="multipart/form-data"
    )
    assert response.status_code in (400, 422)
    assert "file" in response.get_data(as_text=True)
