"""Hostile batches against the real server: is each answered quickly, and health kept?

Starts the server as ``make run`` does (:mod:`bench.probing`) and sends ``--copies``
(default 5) concurrent copies of one ``POST /v1/batch`` of 40 ``estimation-sample-size``
operations at margin 0.0039, confidence 0.999999, methods ["exact"] (about 5 KB; each
operation alone is a few tenths of a second of exact search), ``--rounds`` times (default
3). ``--operations 1`` sends batches of one such operation instead, which the cost model
admits: they show what the largest admitted work does to health. Meanwhile
``GET /v1/health`` is probed every 0.1 s with a 1 s timeout. Prints each batch's status
and time (target: every batch answered or refused in under 2 s), the health probes' p50,
p99 (target: under 200 ms) and maximum, and the load average.

Bounded: at most 20 copies and 10 rounds; loopback only; the server is stopped at the end.
Usage: ``.venv/bin/python -m bench.hostile_batch [--copies 5] [--rounds 3]``.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from concurrent.futures import ThreadPoolExecutor

import requests

from bench.probing import HealthProber, load_average, percentile, served

OPERATION = {"margin": 0.0039, "confidence": 0.999999, "methods": ["exact"]}


def hostile_body(count: int) -> bytes:
    operations = [
        {"id": f"estimate-{i:02d}", "operation": "estimation-sample-size", "request": OPERATION}
        for i in range(count)
    ]
    return json.dumps({"operations": operations}).encode()


def send(url: str, body: bytes) -> tuple[int, float, str]:
    began = time.perf_counter()
    answer = requests.post(f"{url}/v1/batch", data=body, timeout=60,
                           headers={"Content-Type": "application/json"})
    took = time.perf_counter() - began
    kind = answer.json().get("type", "") if answer.status_code != 200 else "answered"
    return answer.status_code, took, kind


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--copies", type=int, default=5)
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--operations", type=int, default=40,
                        help="operations per batch (1: the largest batch within the budget)")
    options = parser.parse_args(argv)
    if not (1 <= options.copies <= 20 and 1 <= options.rounds <= 10
            and 1 <= options.operations <= 100):
        parser.error("--copies must be 1 to 20, --rounds 1 to 10, --operations 1 to 100")
    body = hostile_body(options.operations)
    results: list[tuple[int, float, str]] = []
    with served() as server:
        print(f"load average before: {load_average()}")
        prober = HealthProber(server.url, timeout=1.0)
        prober.start()
        time.sleep(1)
        with ThreadPoolExecutor(options.copies) as pool:
            for _ in range(options.rounds):
                results += pool.map(lambda _: send(server.url, body), range(options.copies))
        time.sleep(1)
        prober.stop()
        print(f"load average after:  {load_average()}")
    times = [took for _, took, _ in results]
    kinds = sorted({f"{status} {kind}" for status, _, kind in results})
    print(f"{len(results)} batches of {len(body):,} bytes ({options.copies} at a time): "
          f"{', '.join(kinds)}; time p50 {percentile(times, 0.5) * 1000:.0f} ms, "
          f"max {max(times) * 1000:.0f} ms")
    print(f"/v1/health: {prober.summary()}")
    health_p99 = percentile([1000 * v for v in prober.latencies], 0.99)
    met = max(times) < 2 and health_p99 < 200 and not prober.failures
    print("targets (every batch < 2 s, health p99 < 200 ms, no failed probe):",
          "met" if met else "not met")
    return 0 if met else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
