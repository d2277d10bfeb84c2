"""Shared by the hostile-client benchmarks: the real server, and a health prober.

:func:`served` starts ``gunicorn --config docker/gunicorn.conf.py service.wsgi:app`` (what
``make run`` starts) on a free 127.0.0.1 port with the default settings, and stops it on
leaving. :class:`HealthProber` calls ``GET /v1/health`` in a loop from its own thread and
keeps each latency; a probe that fails or takes longer than its timeout counts as a
failure.
"""

from __future__ import annotations

import os
import tempfile
import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import requests

from tests.functional.servers import (
    Server,
    start_server,
    stop,
)


@contextmanager
def served() -> Iterator[Server]:
    """The production gunicorn on a free loopback port, stopped (by its pid) on leaving."""
    with tempfile.TemporaryDirectory(prefix="bench-hostile-") as folder:
        server = start_server(Path(folder), log_name="server.log")
        try:
            yield server
        finally:
            stop(server.process)


def percentile(values: list[float], share: float) -> float:
    """The nearest-rank percentile (``share`` in [0, 1]) of ``values``."""
    ordered = sorted(values)
    if not ordered:
        return float("nan")
    rank = max(1, round(share * len(ordered) + 0.5 - 1e-9))
    return ordered[min(rank, len(ordered)) - 1]


@dataclass
class HealthProber:
    """Probes ``/v1/health`` every ``interval`` seconds until stopped."""

    url: str
    timeout: float = 1.0
    interval: float = 0.1
    latencies: list[float] = field(default_factory=list)
    failures: list[str] = field(default_factory=list)
    _stop: threading.Event = field(default_factory=threading.Event)
    _thread: threading.Thread | None = None

    def start(self) -> None:
        self._thread = threading.Thread(target=self._run, daemon=True)
        self._thread.start()

    def stop(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join()

    def _run(self) -> None:
        session = requests.Session()
        while not self._stop.is_set():
            began = time.perf_counter()
            try:
                answer = session.get(f"{self.url}/v1/health", timeout=self.timeout)
                took = time.perf_counter() - began
                if answer.status_code != 200:
                    self.failures.append(f"status {answer.status_code}")
                else:
                    self.latencies.append(took)
            except requests.RequestException as exc:
                self.failures.append(type(exc).__name__)
                session = requests.Session()
            self._stop.wait(self.interval)

    def summary(self) -> str:
        ms = [1000 * value for value in self.latencies]
        return (
            f"{len(ms) + len(self.failures)} probes, {len(self.failures)} failed "
            f"(timeout {self.timeout:g} s); latency p50 {percentile(ms, 0.5):.1f} ms, "
            f"p99 {percentile(ms, 0.99):.1f} ms, max {max(ms, default=float('nan')):.1f} ms"
        )


def load_average() -> str:
    return " / ".join(f"{value:.2f}" for value in os.getloadavg())
