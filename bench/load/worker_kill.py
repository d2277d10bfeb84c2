"""Fault figures: SIGKILL one gunicorn worker in the middle of a wrk run, count what failed.

With the threaded workers a worker holds the connections it has accepted (kept alive
between requests), so a kill costs the requests in flight on them and the connections
themselves; the master forks a replacement and the other workers keep taking connections
from the shared listening socket. The run shows how many of the requests actually failed.
"""

from __future__ import annotations

import os
import signal
import time
from dataclasses import dataclass
from pathlib import Path

import wrk_runs
from calls import Call
from server_processes import REPLACEMENT_SECONDS, worker_pids


@dataclass(frozen=True)
class KillResult:
    """The run during which a worker was killed, and how the master answered the loss."""

    run: wrk_runs.RunResult
    workers_before: int
    workers_after: int
    killed: int
    kill_logged: bool


def kill_one_worker_during(url: str, master: int, log: Path, call: Call, clients: int,
                           settings: wrk_runs.LoadSettings) -> KillResult:
    """Run wrk on ``call`` and SIGKILL one worker half-way through the run.

    ``log`` is the server's output, where the master reports the killed worker. Workers
    are also recycled after ``max_requests`` during a run, so new pids alone would not
    show the replacement: the master's line about the kill and the worker count back at
    its number do.
    """
    before = worker_pids(master)
    if not before:
        raise SystemExit(f"no worker process found under the gunicorn master {master}")
    process = wrk_runs.start(url, [call], clients, settings)
    time.sleep(settings.seconds / 2)
    victim = max(worker_pids(master))  # any worker is as busy as another
    os.kill(victim, signal.SIGKILL)
    run = wrk_runs.finish(process, f"{call.name}, one worker killed", clients, settings)
    deadline = time.monotonic() + REPLACEMENT_SECONDS
    while len(worker_pids(master)) < len(before) and time.monotonic() < deadline:
        time.sleep(0.1)
    logged = f"Worker (pid:{victim}) was sent SIGKILL" in log.read_text(errors="replace")
    return KillResult(run=run, workers_before=len(before),
                      workers_after=len(worker_pids(master)), killed=victim,
                      kill_logged=logged)
