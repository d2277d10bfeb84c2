"""Population files at scale: profile and select 100 records from a large CSV.

Run from the project root:

    .venv/bin/python bench/populations.py              # 1,000,000 rows, engines compared
    .venv/bin/python bench/populations.py --rows 10000000 --skip-engines

Generates (once, under /tmp) a CSV of ``rows`` fictional purchase orders -- id, date,
amount, vendor, text, about 60 bytes a row, in shuffled id order -- then times, each in a
fresh Python process, the service's profile (amount total, repeated identifiers, three
suggested strata) and a selection of 100 records (the canonical sort, the fingerprint and
the records' fetch). Each child's peak resident memory is read from the rusage the
kernel reports when it exits (os.wait4, the same figure RUSAGE_CHILDREN accumulates).

The engine comparison reads the same CSV with pyarrow (whole into memory, then the id
sort and the exact amount total) beside DuckDB, and a 100,000-row XLSX with
python-calamine beside openpyxl in read-only mode. Targets (issue 11): 10,000,000 rows in
under 60 s and 1.5 GB, 1,000,000 rows in under 6 s.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
TMP = Path("/tmp")  # noqa: S108 - the benchmark's own large files, named for it


def generate_csv(rows: int) -> Path:
    """The benchmark CSV, written by DuckDB (fast, and out of core)."""
    import duckdb

    path = TMP / f"sampling-bench-{rows}.csv"
    if path.exists():
        return path
    con = duckdb.connect()
    con.execute(
        f"""
        COPY (
            SELECT printf('HLP-PO-%09d', (i * 7919) % {rows}) AS id,
                   (DATE '2026-01-01' + CAST(i % 365 AS INTEGER))::VARCHAR AS date,
                   printf('%.2f', ((i * 104729) % 2500000) / 100.0 + 0.01) AS amount,
                   'Vendor ' || (i % 997) AS vendor,
                   'goods received, order line ' || (i % 13) AS text
            FROM range({rows}) t(i)
        ) TO '{path}' (HEADER, DELIMITER ',')
        """  # noqa: S608 - a whole number and the benchmark's own path, no outside text
    )
    return path


def generate_xlsx(rows: int) -> Path:
    import xlsxwriter

    path = TMP / f"sampling-bench-{rows}.xlsx"
    if path.exists():
        return path
    workbook = xlsxwriter.Workbook(str(path), {"constant_memory": True})
    sheet = workbook.add_worksheet("Orders")
    sheet.write_row(0, 0, ["id", "date", "amount", "vendor", "text"])
    for i in range(1, rows + 1):
        sheet.write_row(i, 0, [f"HLP-PO-{i:09d}", "2026-03-31", f"{i % 99991}.25",
                               f"Vendor {i % 997}", "goods received"])
    workbook.close()
    return path


CHILD = {
    "profile": """
from decimal import Decimal
from pathlib import Path
from service.sampling.populations.reading import PopulationFile, open_population
from service.sampling.populations.profile import profile_population
d = PopulationFile(id_column="id", amount_column="amount")
with open_population(Path({path!r}), d) as table:
    p = profile_population(table, strata=3)
print(p.rows_kept, p.amounts.total, p.repeated_ids, len(p.strata.strata))
""",
    "select": """
from pathlib import Path
from service.sampling.populations.reading import PopulationFile, open_population
from service.sampling.populations.canonical import select_from_file
d = PopulationFile(id_column="id", amount_column="amount")
with open_population(Path({path!r}), d) as table:
    s = select_from_file(table, 100, "harbour-lane-bench", "random", max_items=1_000_000)
print(s.population_size, s.items[:2], s.population_fingerprint[:12])
""",
    "pyarrow-csv": """
import pyarrow as pa, pyarrow.csv as pc, pyarrow.compute as c
t = pc.read_csv({path!r}, convert_options=pc.ConvertOptions(
    column_types={{n: pa.string() for n in ("id", "date", "amount", "vendor", "text")}}))
order = c.sort_indices(t["id"])
total = c.sum(c.cast(t["amount"], pa.decimal128(20, 2)))
print(t.num_rows, total, len(order))
""",
    "duckdb-csv": """
import duckdb
con = duckdb.connect(config={{"memory_limit": "512MB"}})
print(con.execute("SELECT count(*), sum(CAST(amount AS DECIMAL(20, 2))), "
                  "count(DISTINCT id) FROM read_csv(?, all_varchar = true)",
                  [{path!r}]).fetchone())
""",
    "calamine-xlsx": """
from python_calamine import CalamineWorkbook
rows = CalamineWorkbook.from_path({path!r}).get_sheet_by_index(0).to_python()
print(len(rows))
""",
    "openpyxl-xlsx": """
import openpyxl
book = openpyxl.load_workbook({path!r}, read_only=True)
print(sum(1 for _ in book.worksheets[0].iter_rows(values_only=True)))
""",
}


def run_child(kind: str, path: Path) -> tuple[float, float, str]:
    """Wall seconds, peak RSS in MiB and output of one fresh process."""
    code = CHILD[kind].format(path=str(path))
    start = time.perf_counter()
    process = subprocess.Popen([sys.executable, "-c", code], cwd=ROOT,  # noqa: S603
                               stdout=subprocess.PIPE, stderr=subprocess.STDOUT)
    assert process.stdout is not None
    output = process.stdout.read().decode().strip()
    _, status, usage = os.wait4(process.pid, 0)
    seconds = time.perf_counter() - start
    process.returncode = os.waitstatus_to_exitcode(status)
    if process.returncode != 0:
        raise SystemExit(f"{kind} failed:\n{output}")
    return seconds, usage.ru_maxrss / 1024, output.splitlines()[-1]


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--xlsx-rows", type=int, default=100_000)
    parser.add_argument("--skip-engines", action="store_true")
    args = parser.parse_args()
    csv_path = generate_csv(args.rows)
    size = csv_path.stat().st_size
    print(f"CSV {args.rows:,} rows, {size / 2**20:,.0f} MiB; load average "
          f"{os.getloadavg()[0]:.1f}")
    print(f"{'case':<34}{'seconds':>9}{'peak MiB':>10}  output")
    cases = [("profile", csv_path), ("select", csv_path)]
    if not args.skip_engines:
        xlsx_path = generate_xlsx(args.xlsx_rows)
        cases += [("duckdb-csv", csv_path), ("pyarrow-csv", csv_path),
                  ("calamine-xlsx", xlsx_path), ("openpyxl-xlsx", xlsx_path)]
    for kind, path in cases:
        seconds, peak, output = run_child(kind, path)
        print(f"{kind:<34}{seconds:>9.1f}{peak:>10,.0f}  {output[:60]}")
    print(f"load average after: {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
