"""Wall-time benchmark of the hypergeometric attribute plans and their probabilities.

Run from the project root:  .venv/bin/python bench/bench_hypergeometric.py

Prints the median, minimum and maximum wall time over several runs for each case, with
the answer found. Targets: every sizing case under 5 ms, the evaluation under 50 ms.

Recorded figures (2-core virtual machine, Python 3.11, numpy 2.4, scipy 1.17), median:

    size, t=0.05 e=0 c=0.95, N=10^12                    0.6 ms   n=59 k=0
    size, t=0.05 e=0.01 c=0.95, N=10^12                 1.8 ms   n=93 k=1
    size, t=0.01 e=0.008 c=0.95, N=10^6                 2.8 ms   n=6874 k=55
    evaluate, n=10^6 d=3 c=0.95, N=10^12                3.5 ms   upper 7.753635e-06
    cdf(3; N=10^12, M=5·10^10, n=59)                    0.03 ms
    cdf(k; N=10^12, M=5·10^11, n=10^7), k at the mean   1.9 ms
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
    from service.sampling.attributes import evaluate_sample, size_sample
    from service.sampling.hypergeometric import cdf

    def plan(*args: Any, **kwargs: Any) -> Callable[[], str]:
        def run() -> str:
            result = size_sample(*args, **kwargs)
            return f"n={result.sample_size} k={result.allowed_deviations}"
        return run

    def evaluation(*args: Any, **kwargs: Any) -> Callable[[], str]:
        def run() -> str:
            return f"upper {evaluate_sample(*args, **kwargs).upper_deviation_limit:.6e}"
        return run

    def probability(*args: int) -> Callable[[], str]:
        return lambda: f"{cdf(*args):.12g}"

    trillion, million = 10**12, 10**6
    cases: list[tuple[str, Callable[[], str], int]] = [
        ("size, t=0.05 e=0 c=0.95, N=10^12", plan(0.05, 0.0, 0.95, trillion), 51),
        ("size, t=0.05 e=0.01 c=0.95, N=10^12", plan(0.05, 0.01, 0.95, trillion), 51),
        ("size, t=0.01 e=0.008 c=0.95, N=10^6", plan(0.01, 0.008, 0.95, million), 31),
        ("evaluate, n=10^6 d=3 c=0.95, N=10^12",
         evaluation(10**6, 3, 0.95, population_size=trillion), 21),
        ("cdf(3; N=10^12, M=5·10^10, n=59)", probability(3, trillion, 5 * 10**10, 59), 1001),
        ("cdf(k; N=10^12, M=5·10^11, n=10^7), k at the mean",
         probability(5 * 10**6, trillion, 5 * 10**11, 10**7), 21),
    ]
    print(f"{'case':<52} {'median':>10} {'min':>10} {'max':>10}  answer")
    for label, run, repeats in cases:
        times = _measure(run, repeats)
        print(f"{label:<52} {statistics.median(times) * 1000:8.3f}ms "
              f"{min(times) * 1000:8.3f}ms {max(times) * 1000:8.3f}ms  {run()}")


if __name__ == "__main__":
    main()
