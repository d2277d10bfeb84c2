"""Coverage of the anytime-valid limits by simulation, against peeking at a fixed-size limit.

Run: ``.venv/bin/python bench/anytime_coverage.py``. For each true deviation rate, draws
sequences of tested items (seeded, so the figures repeat), and counts the sequences in
which the upper deviation limit is *ever* below the true rate, at any item up to the
last: for the confidence sequence of ``service.sampling.sequential.anytime`` (which
promises at most 1 − confidence), and for the fixed-size Clopper–Pearson limit
recomputed after every item (peeking, which it does not allow). Also the
without-replacement form on a finite population with a fixed number of deviant items,
drawn in random order.
"""

from __future__ import annotations

import random
import time

from service.sampling.sequential.anytime import confidence_sequence

CONFIDENCE = 0.95
LENGTH = 300
RUNS = 400
SEED = 14


def _misses(results: list[bool], rate: float, size: int | None) -> tuple[bool, bool]:
    cs = confidence_sequence(results, CONFIDENCE, population_size=size)
    anytime = any(p.upper_deviation_limit < rate for p in cs.points)
    peeking = any(p.fixed_size_upper_deviation_limit < rate for p in cs.points)
    return anytime, peeking


def main() -> None:
    rng = random.Random(SEED)
    print(f"confidence {CONFIDENCE}, {RUNS} sequences of {LENGTH} items each")
    print(f"{'case':34} {'anytime misses':>15} {'peeking misses':>15} {'seconds':>8}")
    for rate in (0.01, 0.05, 0.10, 0.20):
        start = time.perf_counter()
        counts = [0, 0]
        for _ in range(RUNS):
            results = [rng.random() < rate for _ in range(LENGTH)]
            for i, missed in enumerate(_misses(results, rate, None)):
                counts[i] += missed
        label = f"with replacement, rate {rate:.0%}"
        print(f"{label:34} {counts[0] / RUNS:15.4f} {counts[1] / RUNS:15.4f} "
              f"{time.perf_counter() - start:8.1f}")
    for size, deviant in ((1000, 50), (600, 60)):
        start = time.perf_counter()
        counts = [0, 0]
        population = [True] * deviant + [False] * (size - deviant)
        for _ in range(RUNS):
            rng.shuffle(population)
            for i, missed in enumerate(_misses(population[:LENGTH], deviant / size, size)):
                counts[i] += missed
        label = f"without replacement, {deviant}/{size}"
        print(f"{label:34} {counts[0] / RUNS:15.4f} {counts[1] / RUNS:15.4f} "
              f"{time.perf_counter() - start:8.1f}")
    print(f"promised: anytime misses at most {1 - CONFIDENCE:.2f}")


if __name__ == "__main__":
    main()
