"""Coverage and width of the monetary-unit evaluation methods, by simulation.

Run from the project root:  .venv/bin/python bench/monetary_coverage.py [--samples 2000]

Synthetic ledgers of 1,500 receivables (log-normal amounts, numpy generator with a fixed
seed) carry known overstatement patterns:

- ``none``: no misstatement;
- ``few large taints``: 50 items fully overstated (taint 100%);
- ``many small taints``: 80% of the items overstated by 1% to 10% of their amount;
- ``mixed taints``: 10% of the items with taints uniform on 0 to 100%.

For each ledger and each selection method (fixed_interval, cell, random_units) the service's
own selection draws ``--samples`` samples of 100 units with different seeds; the
misstatements of the selected items (individually significant ones in full) are evaluated
at 95% confidence. Coverage is the share of samples whose upper misstatement limit is at
least the true total overstatement; the guarantee column says whether the method claims
coverage for that selection method. The mean limit is also given relative to the Stringer
bound's. Not a timed test: the wall time is printed for the record only.
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable

import numpy as np

from service.sampling.monetary.evaluation import (
    GUARANTEES,
    METHODS,
    Misstatement,
    evaluate_monetary_sample,
)
from service.sampling.monetary.selection import METHODS as SELECTIONS
from service.sampling.monetary.selection import select_units

ITEMS = 1_500
SAMPLE = 100
CONFIDENCE = 0.95

Pattern = Callable[[np.random.Generator, int], np.ndarray]


def _none(rng: np.random.Generator, count: int) -> np.ndarray:
    return np.zeros(count)


def _few_large(rng: np.random.Generator, count: int) -> np.ndarray:
    taints = np.zeros(count)
    taints[rng.choice(count, 50, replace=False)] = 1.0
    return taints


def _many_small(rng: np.random.Generator, count: int) -> np.ndarray:
    hit = rng.random(count) < 0.80
    return np.where(hit, rng.uniform(0.01, 0.10, count), 0.0)


def _mixed(rng: np.random.Generator, count: int) -> np.ndarray:
    hit = rng.random(count) < 0.10
    return np.where(hit, rng.random(count), 0.0)


PATTERNS: dict[str, Pattern] = {
    "none": _none,
    "few large taints": _few_large,
    "many small taints": _many_small,
    "mixed taints": _mixed,
}


def ledger(pattern: Pattern, seed: int) -> tuple[list[tuple[str, int]], dict[str, int], int]:
    """Items (id, cents), audited amounts by id, and the true total overstatement."""
    rng = np.random.default_rng(seed)
    cents = np.maximum(np.round(rng.lognormal(11.0, 1.0, ITEMS)).astype(np.int64), 100)
    taints = pattern(rng, ITEMS)
    audited = np.round(cents * (1 - taints)).astype(np.int64)
    items = [(f"KV-{i:05d}", int(c)) for i, c in enumerate(cents)]
    audited_by_id = {identifier: int(a) for (identifier, _), a in zip(items, audited, strict=True)}
    return items, audited_by_id, int((cents - audited).sum())


def run(samples: int) -> None:
    print(f"{samples:,} samples of {SAMPLE} units per ledger and selection method, "
          f"{ITEMS:,} items, {CONFIDENCE:.0%} confidence\n")
    header = ("ledger", "selection", "method", "guarantee", "coverage", "mean limit",
              "vs stringer")
    print("| " + " | ".join(header) + " |")
    print("|" + "---|" * len(header))
    for number, (name, pattern) in enumerate(PATTERNS.items()):
        items, audited, truth = ledger(pattern, 20260 + number)
        population = tuple(items)
        for selection in SELECTIONS:
            limits: dict[str, list[float]] = {method: [] for method in METHODS}
            for draw in range(samples):
                chosen = select_units(population, SAMPLE, f"bench-{name}-{draw}", selection)
                found = [
                    Misstatement(item.id, item.amount, audited[item.id], hits=item.hits)
                    for item in chosen.items
                    if audited[item.id] != item.amount
                ] + [
                    Misstatement(identifier, amount, audited[identifier],
                                 individually_significant=True)
                    for identifier, amount in chosen.individually_significant
                    if audited[identifier] != amount
                ]
                result = evaluate_monetary_sample(
                    chosen.sampled_value, found, sample_size=chosen.units_drawn,
                    selection_method=selection, confidence=CONFIDENCE,
                )
                for limit in result.overstatement.methods:
                    value = limit.upper_misstatement_limit
                    limits[limit.method].append(np.nan if value is None else float(value))
            base = float(np.nanmean(limits["stringer"]))
            for method in METHODS:
                values = np.array(limits[method])
                coverage = float(np.mean(values >= truth - 0.5))
                holds = "yes" if selection in GUARANTEES[method] else "no"
                mean = float(np.nanmean(values)) / 100
                print(f"| {name} (true {truth / 100:,.0f}) | {selection} | {method} | {holds} "
                      f"| {coverage:.3f} | {mean:,.0f} | {mean * 100 / base:.3f} |")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", type=int, default=2_000)
    args = parser.parse_args()
    started = time.perf_counter()
    run(args.samples)
    print(f"\nwall time {time.perf_counter() - started:,.0f} s")


if __name__ == "__main__":
    main()

