"""Wall time and peak memory of the test sheet's round trip, in-process through HTTP.

Run from the project root:  .venv/bin/python bench/bench_test_sheets.py

For each sample size, in a fresh process: POST /v1/selection for a test sheet of two
attributes (Flask test client, numbered population of 1,000,000 items), complete it (with
openpyxl; not timed), then POST the completed sheet to /v1/evaluation as multipart, once
for JSON and once for the workbook with its evaluation sheet. Times are the median of the
runs; the peak is the process's maximum resident set size (getrusage), which counts the
native readers' and writers' memory as well as Python's.

Targets: a sheet of 10,000 items written, and evaluated, each within a few seconds, and
memory growing with the sample only.
"""

from __future__ import annotations

import io
import json
import multiprocessing
import resource
import statistics
import time
from typing import Any

XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
SIZES = (1_000, 10_000, 50_000)
RUNS = 3


def _case(n: int) -> dict[str, Any]:
    import openpyxl

    from service import create_app
    from service.settings import Settings

    client = create_app(Settings()).test_client()
    body = {
        "population": {"size": 1_000_000},
        "sample_size": n,
        "seed": "harbour-lane-bench",
        "attributes": ["approved before release", "three-way match"],
    }
    write = []
    for _ in range(RUNS):
        start = time.perf_counter()
        response = client.post("/v1/selection", json=body, headers={"Accept": XLSX})
        write.append(time.perf_counter() - start)
        assert response.status_code == 200
    workbook = openpyxl.load_workbook(io.BytesIO(response.data))
    sheet = workbook["Tests"]
    for line in range(2, n + 2):
        sheet.cell(line, 4).value = "passed"
        sheet.cell(line, 6).value = "deviation" if line % 50 == 0 else "passed"
    completed = io.BytesIO()
    workbook.save(completed)
    del workbook, sheet
    timings: dict[str, list[float]] = {"json": [], "xlsx": []}
    for _ in range(RUNS):
        for kind, accept in (("json", "application/json"), ("xlsx", XLSX)):
            start = time.perf_counter()
            answer = client.post(
                "/v1/evaluation",
                data={
                    "file": (io.BytesIO(completed.getvalue()), "completed.xlsx"),
                    "request": json.dumps({"tolerable_rates": {"three-way match": 0.05}}),
                },
                content_type="multipart/form-data",
                headers={"Accept": accept},
            )
            timings[kind].append(time.perf_counter() - start)
            assert answer.status_code == 200, answer.get_data(as_text=True)
    return {
        "n": n,
        "sheet_kb": len(completed.getvalue()) / 1024,
        "write": statistics.median(write),
        "json": statistics.median(timings["json"]),
        "xlsx": statistics.median(timings["xlsx"]),
        "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
    }


def main() -> None:
    context = multiprocessing.get_context("spawn")
    print(f"{'items':>8} {'sheet KB':>9} {'write s':>8} {'eval JSON s':>12} "
          f"{'eval XLSX s':>12} {'peak RSS MB':>12}")
    for n in SIZES:
        with context.Pool(1) as pool:
            row = pool.apply(_case, (n,))
        print(f"{row['n']:>8,} {row['sheet_kb']:>9,.0f} {row['write']:>8.2f} "
              f"{row['json']:>12.2f} {row['xlsx']:>12.2f} {row['peak_mb']:>12,.0f}")


if __name__ == "__main__":
    main()
