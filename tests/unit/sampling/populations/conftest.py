"""Small population files written by the tests, in every format the service reads."""

from __future__ import annotations

import csv
import io
import random
from collections.abc import Sequence
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import xlsxwriter


def write_csv(
    path: Path, header: Sequence[str], rows: Sequence[Sequence[str]], delimiter: str = ","
) -> Path:
    """The rows as CSV written by Python's csv module (RFC 4180 quoting)."""
    out = io.StringIO()
    writer = csv.writer(out, delimiter=delimiter, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    path.write_text(out.getvalue(), encoding="utf-8")
    return path


def write_xlsx(path: Path, header: Sequence[str], rows: Sequence[Sequence[str]]) -> Path:
    """The rows as text cells of the first sheet, written by xlsxwriter."""
    workbook = xlsxwriter.Workbook(str(path))
    sheet = workbook.add_worksheet("Orders")
    for r, row in enumerate([header, *rows]):
        for c, value in enumerate(row):
            sheet.write_string(r, c, value)
    workbook.close()
    return path


def write_parquet(path: Path, header: Sequence[str], rows: Sequence[Sequence[str]]) -> Path:
    """The rows as string columns, written by pyarrow."""
    table = pa.table({name: [row[k] for row in rows] for k, name in enumerate(header)})
    pq.write_table(table, path)
    return path


def shuffled(rows: Sequence[Sequence[str]], seed: int) -> list[Sequence[str]]:
    copy = list(rows)
    random.Random(seed).shuffle(copy)
    return copy
