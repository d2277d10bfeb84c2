"""The cost model against the clock: estimated units beside measured time, per corner.

For each operation, requests at the corners of its inputs (the large and slow cases the
estimators were fitted to, and ordinary ones) are answered in process with the Flask test
client under a budget high enough to admit them all; the script prints the estimate, the
best of ``--repeats`` wall times, and units per microsecond measured (an estimate is meant
to err high: a ratio of 1 or more). Usage: ``.venv/bin/python -m bench.cost_model``.
"""

from __future__ import annotations

import argparse
import json
import logging
import os
import sys
import time
from typing import Any

from service import create_app
from service.http import all_operations
from service.http.costs import estimate
from service.settings import Settings

CORNERS: list[tuple[str, dict[str, Any]]] = [
    ("sample-size", {"tolerable_rate": 0.05, "expected_rate": 0.01}),
    ("sample-size", {"tolerable_rate": 0.011, "expected_rate": 0.01, "confidence": 0.999,
                     "method": "hypergeometric", "population": {"size": 10**7}}),
    ("sample-size", {"tolerable_rate": 0.011, "expected_rate": 0.01, "confidence": 0.999,
                     "underreliance_risk": 0.01}),
    ("evaluation", {"sample_size": 10**7, "deviations": 10**5, "method": "hypergeometric",
                    "population": {"size": 10**11}}),
    ("estimation-sample-size", {"margin": 0.05}),
    ("estimation-sample-size", {"margin": 0.0039, "confidence": 0.999999,
                                "methods": ["exact"]}),
    ("estimation-sample-size", {"margin": 0.005, "population": {"size": 100000},
                                "methods": ["exact"]}),
    ("estimation-sample-size", {"margin": 0.003, "anticipated_rate": 0.1,
                                "population": {"size": 10**9}, "methods": ["exact"]}),
    ("plan-curve", {"sample_size": 10**7, "allowed_deviations": 10**5, "points": 2001}),
    ("plan-curve", {"sample_size": 10**6, "allowed_deviations": 10**4, "points": 2001,
                    "method": "hypergeometric", "population": {"size": 10**8}}),
    ("plan-periodic", {"frequency": "several_daily", "occurrences": 10**7,
                       "tolerable_rate": 0.011, "expected_rate": 0.01, "confidence": 0.999}),
    ("staged-plan", {"tolerable_rate": 0.02, "expected_rate": 0.005, "confidence": 0.99,
                     "max_stages": 3, "method": "hypergeometric",
                     "population": {"size": 10**9}}),
    ("staged-curve", {"population": {"size": 10**8}, "method": "hypergeometric", "points": 201,
                      "stages": [{"cumulative_sample_size": 10**6, "accept_if_at_most": 10,
                                  "fail_if_at_least": 50},
                                 {"cumulative_sample_size": 5 * 10**6,
                                  "accept_if_at_most": 49, "fail_if_at_least": 50}]}),
    ("strata-evaluation", {"tolerable_rate": 0.05, "strata": [
        {"label": f"s{i}", "population_size": 10**9, "sample_size": 10**6, "deviations": 1000}
        for i in range(50)]}),
    ("sequence-evaluation", {"results": [0] * 10_000, "tolerable_rate": 0.05,
                             "population": {"size": 10**9}}),
    ("selection", {"population": {"size": 10**11}, "sample_size": 500_000, "seed": "bench"}),
    ("selection", {"population": {"items": [f"PO-{i}" for i in range(500_000)]},
                   "sample_size": 1000, "seed": "bench"}),
    ("monetary-selection", {"population": [{"id": f"I{i}", "amount": "12.50"}
                                           for i in range(50_000)],
                            "sample_size": 5000, "seed": "bench"}),
    ("monetary-evaluation", {"book_value": "1000000000", "sample_size": 10000,
                             "sampling_interval": "100000",
                             "misstatements": [{"id": f"I{i}", "book_amount": "100",
                                                "audited_amount": "50"}
                                               for i in range(10_000)]}),
]


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--repeats", type=int, default=2)
    options = parser.parse_args(argv)
    client = create_app(Settings(max_request_cost=10**12, request_deadline=120)).test_client()
    logging.getLogger("service.web.access").disabled = True
    operations = {op.name: op for op in all_operations()}
    print(f"load average: {' / '.join(f'{v:.2f}' for v in os.getloadavg())}")
    print("| operation | request | estimate (units) | measured (ms) | units per µs |")
    print("|---|---|---:|---:|---:|")
    for name, body in CORNERS:
        operation = operations[name]
        units = estimate(name, operation.request_schema.load(body)).units
        best = float("inf")
        status = 0
        for _ in range(options.repeats):
            began = time.perf_counter()
            status = client.post(operation.path, json=body).status_code
            best = min(best, time.perf_counter() - began)
        shown = json.dumps(body)
        shown = shown if len(shown) <= 70 else shown[:67] + "..."
        flag = "" if status == 200 else f" ({status})"
        print(f"| {name}{flag} | `{shown}` | {units:,} | {best * 1000:,.1f} | "
              f"{units / (best * 1e6):.2f} |")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
