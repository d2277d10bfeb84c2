"""Relative error of the double tails and limits against exact rational arithmetic.

Run from the project root:  .venv/bin/python bench/tail_accuracy.py

For each model it evaluates the double lower tail ``P(X ≤ k)`` the service uses on a grid
of cases and compares it with the exact value (binomial and hypergeometric: finite sums
of fractions; Poisson: brackets of the exponential series at 512 bits, far tighter than a
double), then prints the largest relative error per family. For the limits it measures
the backward error: the exact tail at the returned bound (a rational number) against the
risk it should equal. Figures are recorded in BENCHMARKS.md.
"""

from __future__ import annotations

import math
import sys
import time
from fractions import Fraction
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from service.sampling.attributes import evaluate_sample
from service.sampling.distributions import MODELS, deviant_items
from service.sampling.ties import exact_tails, poisson_bounds


def _relative(double: float, exact: Fraction) -> float:
    if exact == 0:
        return 0.0 if double == 0 else math.inf
    return float(abs(Fraction(double) - exact) / exact)


def _ks(n: int, mean: float) -> list[int]:
    sd = math.sqrt(max(mean, 1.0))
    picks = {0, 1, int(mean), int(mean - 3 * sd), int(mean + 3 * sd), int(mean - 6 * sd)}
    return sorted(k for k in picks if 0 <= k < n)


def binomial_cases() -> list[tuple[str, float]]:
    rows = []
    for n in (10, 100, 1_000, 10_000):
        for rate in (Fraction(1, 100), Fraction(5, 100), Fraction(3, 10)):
            worst = 0.0
            for k in _ks(n, n * float(rate)):
                double = float(MODELS["binomial"].lower_tail(k, n, rate, None))
                exact = exact_tails.binomial_lower(k, n, rate)
                if exact > Fraction(1, 10**300):
                    worst = max(worst, _relative(double, exact))
            rows.append((f"binomial n={n:,} p={float(rate)}", worst))
    return rows


def hypergeometric_cases() -> list[tuple[str, float]]:
    rows = []
    for population in (100, 10_000, 10**6, 10**12):
        for n in (50, 500, 5_000, 20_000):
            if n > population:
                continue
            for rate in (Fraction(5, 100), Fraction(3, 10)):
                marked = deviant_items(rate, population)
                worst = 0.0
                for k in _ks(n, n * float(rate)):
                    double = float(MODELS["hypergeometric"].lower_tail(k, n, rate, population))
                    exact = exact_tails.hypergeometric_lower(k, population, marked, n)
                    if exact > Fraction(1, 10**300):
                        worst = max(worst, _relative(double, exact))
                rows.append((f"hypergeometric N={population:.0e} n={n:,} t={float(rate)}",
                             worst))
    return rows


def poisson_cases() -> list[tuple[str, float]]:
    rows = []
    for mean in (Fraction(1, 2), Fraction(3), Fraction(30), Fraction(300), Fraction(3000)):
        worst = 0.0
        for k in _ks(10**9, float(mean)):
            s_lo, s_hi, e_lo, e_hi = poisson_bounds._brackets(k, mean, 512)
            exact = Fraction(s_lo + s_hi, e_lo + e_hi)  # within 2^-500 relative
            if exact < Fraction(1, 10**290):
                continue
            double = float(MODELS["poisson"].lower_tail(k, 1, mean, None))
            worst = max(worst, _relative(double, exact))
        rows.append((f"poisson mean={float(mean):g}", worst))
    return rows


def limit_cases() -> list[tuple[str, float]]:
    """Backward error of the Clopper–Pearson upper limit: exact tail at the bound vs risk."""
    rows = []
    for n, d in ((59, 0), (100, 2), (1_000, 10), (10_000, 100)):
        for confidence in ("0.9", "0.95", "0.99", "0.999999"):
            risk = 1 - Fraction(confidence)
            bound = evaluate_sample(n, d, float(confidence), method="binomial")
            tail = exact_tails.binomial_lower(d, n, Fraction(bound.upper_deviation_limit))
            rows.append((f"Clopper-Pearson n={n:,} d={d} c={confidence}",
                         float(abs(tail - risk) / risk)))
    return rows


def main() -> None:
    started = time.perf_counter()
    for title, cases in (("binomial tails", binomial_cases), ("hypergeometric tails",
                         hypergeometric_cases), ("Poisson tails", poisson_cases),
                         ("upper limits (backward error)", limit_cases)):
        rows = cases()
        print(f"{title}")
        for name, error in rows:
            print(f"  {name:<48} {error:9.2e}")
        print(f"  {'largest':<48} {max(error for _, error in rows):9.2e}")
    print(f"({time.perf_counter() - started:.0f} s)")


if __name__ == "__main__":
    main()
