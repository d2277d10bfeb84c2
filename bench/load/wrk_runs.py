"""Run wrk with ``drive.lua`` and read back what it measured.

wrk keeps a fixed number of connections busy for a fixed time and records every
response's latency; ``drive.lua`` supplies the requests and prints the summary as one
JSON line. Errors are wrk's own counts: socket errors (connect, read, write, timeout)
and responses with status 400 or above (the service sends no 1xx or 3xx, so these are
exactly the answers that are not 2xx).
"""

from __future__ import annotations

import json
import shutil
import subprocess
from dataclasses import dataclass
from pathlib import Path

from calls import Call

SCRIPT = Path(__file__).resolve().parent / "drive.lua"
RESULT_MARK = "LOAD_RESULT "
INSTALL_HINT = (
    "wrk is not installed. It is the HTTP load generator this driver uses; on Debian or "
    "Ubuntu install it with `apt-get install -y wrk` (as root, after `apt-get update`), "
    "then run `make load` again."
)


def wrk_path() -> str:
    """The wrk executable; ``SystemExit`` with the install hint when it is absent."""
    found = shutil.which("wrk")
    if found is None:
        raise SystemExit(INSTALL_HINT)
    return found


def wrk_version() -> str:
    # wrk has no --version: with a bad option it prints its banner and usage, and exits 1.
    # The argument list is fixed, no shell is involved.
    completed = subprocess.run([wrk_path(), "-v"],  # noqa: S603
                               capture_output=True, text=True, timeout=10, check=False)
    return (completed.stdout or completed.stderr).splitlines()[0].split(" Copyright")[0]


@dataclass(frozen=True)
class RunResult:
    """One wrk run: what was sent, how many answers came back, how fast, how many failed."""

    label: str
    clients: int
    requests: int
    seconds: float
    socket_errors: int
    status_errors: int
    p50_ms: float
    p99_ms: float
    max_ms: float
    server_cpu_seconds: float | None = None
    client_cpu_seconds: float | None = None

    @property
    def rps(self) -> float:
        return self.requests / self.seconds

    @property
    def errors(self) -> int:
        return self.socket_errors + self.status_errors

    def cpu_ms_per_request(self, seconds: float | None) -> float | None:
        if seconds is None or not self.requests:
            return None
        return 1000 * seconds / self.requests


@dataclass(frozen=True)
class LoadSettings:
    """How hard and how long each run drives the server."""

    seconds: int
    timeout_seconds: int
    threads: int


def start(url: str, calls: list[Call], clients: int,
          settings: LoadSettings) -> subprocess.Popen[str]:
    """Start one wrk run in the background; :func:`finish` waits for it and reads it."""
    command = [
        wrk_path(), f"--threads={min(settings.threads, clients)}",
        f"--connections={clients}", f"--duration={settings.seconds}s",
        f"--timeout={settings.timeout_seconds}s", f"--script={SCRIPT}", url,
        "--", *(call.spec() for call in calls),
    ]
    # Our own argument list, no shell: the calls come from calls.py.
    return subprocess.Popen(command,  # noqa: S603
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def finish(process: subprocess.Popen[str], label: str, clients: int,
           settings: LoadSettings) -> RunResult:
    """Wait for the run (bounded: its duration plus a margin) and parse its summary."""
    try:
        stdout, stderr = process.communicate(
            timeout=settings.seconds + settings.timeout_seconds + 30)
    except subprocess.TimeoutExpired:
        process.kill()
        process.communicate()
        raise SystemExit(f"wrk did not finish the {label} run in time") from None
    lines = [line for line in stdout.splitlines() if line.startswith(RESULT_MARK)]
    if process.returncode != 0 or not lines:
        raise SystemExit(f"wrk failed on the {label} run (exit {process.returncode}):\n"
                         f"{stdout[-2000:]}{stderr[-2000:]}")
    summary = json.loads(lines[-1][len(RESULT_MARK):])
    return RunResult(
        label=label,
        clients=clients,
        requests=summary["requests"],
        seconds=summary["duration_us"] / 1e6,
        socket_errors=sum(summary[kind] for kind in ("connect", "read", "write", "timeout")),
        status_errors=summary["status"],
        p50_ms=summary["p50_us"] / 1000,
        p99_ms=summary["p99_us"] / 1000,
        max_ms=summary["max_us"] / 1000,
    )


def run(url: str, calls: list[Call], label: str, clients: int,
        settings: LoadSettings) -> RunResult:
    """One complete wrk run of ``calls`` with ``clients`` connections."""
    return finish(start(url, calls, clients, settings), label, clients, settings)
