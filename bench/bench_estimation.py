"""Wall-time benchmark of sample sizes for estimating a rate.

Run from the project root:  .venv/bin/python bench/bench_estimation.py

Prints the median, minimum and maximum wall time over several runs for each case, with
the sizes found.  The target for the first case (exact sizing, worst case over all rates,
margin 0.01, confidence 0.99) is under 0.2 s in-process.

Recorded figures (2-core virtual machine, Python 3.11, numpy 2.4, scipy 1.17), median:

    exact, worst case, e=0.01, c=0.99                  56 ms   exact 16600
    all methods, worst case, e=0.01, c=0.99           136 ms
    all methods, worst case, e=0.05, c=0.95             9 ms
    exact, p=0.05, e=0.01, c=0.95                       3 ms   exact 1750
    exact, worst case, e=0.05, c=0.95, N=4200          25 ms   exact 360
    exact, p=0.1, e=0.02, c=0.95, N=100,000            14 ms   exact 825
    exact, worst case, e=0.02, c=0.99, N=1,000,000    191 ms   exact 4150
    exact, worst case, e=0.003, c=0.99                490 ms   exact 184334
"""

from __future__ import annotations

import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any


def _measure(run: Callable[[], Any], repeats: int) -> list[float]:
    run()  # warm-up, not counted
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        run()
        times.append(time.perf_counter() - start)
    return times


def main() -> None:
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from service.sampling.estimation import size_for_estimation

    def plan(*args: Any, **kwargs: Any) -> Callable[[], Any]:
        return lambda: size_for_estimation(*args, **kwargs)

    cases: list[tuple[str, Callable[[], Any], int]] = [
        ("exact, worst case, e=0.01, c=0.99", plan(0.01, 0.99, methods=["exact"]), 9),
        ("all methods, worst case, e=0.01, c=0.99", plan(0.01, 0.99), 7),
        ("all methods, worst case, e=0.05, c=0.95", plan(0.05, 0.95), 9),
        ("exact, p=0.05, e=0.01, c=0.95", plan(0.01, 0.95, 0.05, methods=["exact"]), 9),
        ("exact, worst case, e=0.05, c=0.95, N=4200",
         plan(0.05, 0.95, population_size=4200, methods=["exact"]), 7),
        ("exact, p=0.1, e=0.02, c=0.95, N=100,000",
         plan(0.02, 0.95, 0.1, 100_000, methods=["exact"]), 5),
        ("exact, worst case, e=0.02, c=0.99, N=1,000,000",
         plan(0.02, 0.99, None, 1_000_000, methods=["exact"]), 3),
        ("exact, worst case, e=0.003, c=0.99", plan(0.003, 0.99, methods=["exact"]), 3),
    ]
    print(f"{'case':<50} {'median':>9} {'min':>9} {'max':>9}  sizes")
    for label, run, repeats in cases:
        times = _measure(run, repeats)
        sizes = ", ".join(f"{row.method} {row.sample_size}" for row in run().rows)
        print(f"{label:<50} {statistics.median(times) * 1000:8.1f}ms "
              f"{min(times) * 1000:8.1f}ms {max(times) * 1000:8.1f}ms  {sizes}")


if __name__ == "__main__":
    main()
