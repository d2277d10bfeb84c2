"""Benchmark: plans for several attributes, both risks, a prior, and periodic controls.

Run: ``.venv/bin/python bench/bench_plans.py`` (or ``make bench``). Prints, per case, the
median time of the core call over repeated calls; for the two-risk plans also the time of
a brute-force reference that tries every (n, k) with scipy.stats.binom (timed once), and
stops if the two answers differ.
Targets: ordinary cases under 50 ms; the extreme cases (plans of tens of thousands of
items allowing a thousand deviations) under 5 s, never a hang.
"""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable
from typing import Any

from scipy import stats

from service.sampling.plans.bayesian import beta_prior, size_with_prior
from service.sampling.plans.multiple import AttributeRates, size_several
from service.sampling.plans.periodic import plan_periodic
from service.sampling.plans.two_risks import size_two_risks


def brute_two_risks(t: float, e: float, confidence: float, beta: float) -> tuple[int, int]:
    n = 1
    while True:
        over = stats.binom.cdf(range(n + 1), n, t)
        under = stats.binom.sf(range(n + 1), n, e)
        feasible = [k for k in range(n + 1) if over[k] <= 1 - confidence and under[k] <= beta]
        if feasible:
            return n, max(feasible)
        n += 1


def median_seconds(fn: Callable[[], Any], repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


TWO_RISKS = [
    ("t 5%, e 1%, 95%, under 10%", (0.05, 0.01, 0.95, 0.10), {}, True),
    ("t 10%, e 2%, 90%, under 10%", (0.10, 0.02, 0.90, 0.10), {}, True),
    ("t 5%, e 1%, N 4,200, under 10%", (0.05, 0.01, 0.95, 0.10), {"population_size": 4200}, False),
    ("t 5%, e 4.5%, 95%, under 1%", (0.05, 0.045, 0.95, 0.01), {}, False),
    (
        "t 5%, e 4.5%, N 10^7, under 1%",
        (0.05, 0.045, 0.95, 0.01),
        {"population_size": 10**7},
        False,
    ),
]

OTHERS: list[tuple[str, Callable[[], Any]]] = [
    ("prior uniform, t 5%, e 0", lambda: size_with_prior(0.05, 0.0, 0.95, beta_prior("uniform"))),
    (
        "prior previous 60/0 w 0.5, t 5%, e 1%",
        lambda: size_with_prior(
            0.05,
            0.01,
            0.95,
            beta_prior("previous_sample", sample_size=60, deviations=0, weight=0.5),
        ),
    ),
    (
        "prior uniform, t 0.01%, e 0.005%, 99.9%",
        lambda: size_with_prior(0.0001, 0.00005, 0.999, beta_prior("uniform")),
    ),
    (
        "3 attributes, N 3,600",
        lambda: size_several(
            [
                AttributeRates("a", 0.05),
                AttributeRates("b", 0.05, 0.01),
                AttributeRates("c", 0.07, 0.01),
            ],
            population_size=3600,
        ),
    ),
    (
        "100 attributes, N 10^6",
        lambda: size_several(
            [AttributeRates(f"a{i}", 0.05 + i * 0.001, 0.01) for i in range(100)],
            population_size=10**6,
        ),
    ),
    ("periodic daily, t 10%", lambda: plan_periodic("daily", 0.10)),
    (
        "periodic several_daily, N 10^7, t 0.01%",
        lambda: plan_periodic("several_daily", 0.0001, occurrences=10**7),
    ),
]


def main() -> None:
    print(f"{'case':42} {'n':>7} {'k':>5} {'core ms':>9} {'brute ms':>10}")
    for label, args, kwargs, check in TWO_RISKS:
        plan = size_two_risks(*args, **kwargs)
        core = median_seconds(lambda a=args, k=kwargs: size_two_risks(*a, **k), 5)
        brute = "-"
        if check:
            start = time.perf_counter()
            reference = brute_two_risks(*args)
            brute = f"{(time.perf_counter() - start) * 1000:.0f}"
            if reference != (plan.sample_size, plan.allowed_deviations):
                raise SystemExit(
                    f"{label}: core {plan.sample_size, plan.allowed_deviations} "
                    f"!= brute force {reference}"
                )
        print(
            f"{label:42} {plan.sample_size:>7} {plan.allowed_deviations:>5} "
            f"{core * 1000:>9.1f} {brute:>10}"
        )
    print()
    print(f"{'case':42} {'core ms':>9}")
    for label, fn in OTHERS:
        print(f"{label:42} {median_seconds(fn, 5) * 1000:>9.1f}")


if __name__ == "__main__":
    main()
