"""Benchmark: the sizing core against a naive scan of n = 1, 2, 3, ...

Run: ``.venv/bin/python bench/bench_sizing.py`` (or ``make bench``). Prints, per
case, the median time of ``size_sample`` over repeated calls, the time of a
naive reference that tests every n in turn with scipy.stats, and the ratio.
Both must give the same answer; the script stops if they do not. The memo of plans is
emptied before each timed call, so the search itself is timed.
Targets: every case under 5 ms, the worst under 50 ms, and at least 20 times
faster than the naive scan on the hard cases.
"""

from __future__ import annotations

import math
import statistics
import time
from fractions import Fraction

from scipy import stats

from service.sampling import attributes
from service.sampling.attributes import size_sample

CASES = [
    # (label, tolerable, expected, confidence, population, hard)
    ("t 5%, e 0, 95%", 0.05, 0.0, 0.95, None, False),
    ("t 5%, e 1%, 95%", 0.05, 0.01, 0.95, None, False),
    ("t 5%, e 2%, 90%", 0.05, 0.02, 0.90, None, False),
    ("t 5%, e 1%, N 4,200", 0.05, 0.01, 0.95, 4200, False),
    ("t 2%, e 1%, 99%", 0.02, 0.01, 0.99, None, True),
    ("t 1%, e 0.8%, 95%", 0.01, 0.008, 0.95, None, True),
    ("t 1%, e 0.8%, N 1,000,000", 0.01, 0.008, 0.95, 1_000_000, True),
    ("t 5%, e 0, N 1,000,000", 0.05, 0.0, 0.95, 1_000_000, False),
]


def naive(tolerable, expected, confidence, population):
    """Scan n upward, testing the definition at each n with scipy.stats."""
    alpha = 1 - confidence
    e = Fraction(repr(expected))
    deviant = None if population is None else math.ceil(Fraction(repr(tolerable)) * population)
    n = 0
    while True:
        n += 1
        k = math.ceil(e * n)
        if population is None:
            tail = stats.binom.cdf(k, n, tolerable)
        else:
            tail = stats.hypergeom.cdf(k, population, deviant, n)
        if tail <= alpha:
            return n, k


def median_seconds(fn, repeat):
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def _fresh(t, e, c, population):
    attributes.sizing._planned.cache_clear()
    return size_sample(t, e, c, population)


def main():
    print(f"{'case':30} {'n':>7} {'k':>4} {'core ms':>9} {'naive ms':>10} {'ratio':>8}")
    worst = 0.0
    for label, t, e, c, population, hard in CASES:
        plan = size_sample(t, e, c, population)
        core = median_seconds(lambda t=t, e=e, c=c, p=population: _fresh(t, e, c, p), 25)
        start = time.perf_counter()
        reference = naive(t, e, c, population)
        slow = time.perf_counter() - start
        if reference != (plan.sample_size, plan.allowed_deviations):
            raise SystemExit(f"{label}: core {plan.sample_size} != naive {reference}")
        worst = max(worst, core)
        mark = " (hard)" if hard else ""
        print(
            f"{label:30} {plan.sample_size:>7} {plan.allowed_deviations:>4} "
            f"{core * 1e3:>9.2f} {slow * 1e3:>10.1f} {slow / core:>7.0f}x{mark}"
        )
    print(f"worst case {worst * 1e3:.2f} ms")


if __name__ == "__main__":
    main()
