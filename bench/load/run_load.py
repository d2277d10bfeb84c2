"""Load test of the real server: gunicorn with the production config, driven by wrk.

Starts ``gunicorn --config docker/gunicorn.conf.py service.wsgi:app`` on a free
127.0.0.1 port with the production defaults (the worker count follows the cores unless
``--workers`` or WEB_CONCURRENCY says otherwise), checks every request body once with
requests, then runs wrk for each endpoint at each client count, one mixed run per client
count, and a last run during which one worker is killed. Prints a Markdown report: one
row per run with requests per second, median and 99th-percentile latency, errors, and
the throughput as a share of ``/v1/health`` at the same client count, then the goals:

- no error in any run;
- sizing and evaluation at 80 % or more of health's requests per second;
- 99th-percentile latency under 50 ms at 16 clients.

wrk runs on the same machine and takes its share of the cores; the report says so.
Usage: ``make load`` (``LOAD_SECONDS=5 make load`` for shorter runs), or
``.venv/bin/python bench/load/run_load.py --help``.
"""

from __future__ import annotations

import argparse
import os
import platform
import resource
import sys
import tempfile
import time
from dataclasses import dataclass, replace
from datetime import UTC, datetime
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
# The server helpers are shared with the functional tests, under the project root.
sys.path.insert(0, str(ROOT))

import calls  # noqa: E402 - the modules beside this script, after the path is set
import server_processes  # noqa: E402
import worker_kill  # noqa: E402
import wrk_runs  # noqa: E402

from tests.functional.servers import (  # noqa: E402
    start_server,
    stop,
)

SHARE_GOAL_PERCENT = 80
P99_GOAL_MS = 50.0
P99_GOAL_CLIENTS = 16
PAUSE_SECONDS = 1.0
HEALTH_AGAIN = "health, again at the end"


@dataclass(frozen=True)
class Options:
    seconds: int
    timeout_seconds: int
    clients: list[int]
    threads: int
    workers: int | None
    output: Path | None
    kill: bool


def parse_options(argv: list[str]) -> Options:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--seconds", type=int, default=10,
                        help="duration of each wrk run (default 10)")
    parser.add_argument("--timeout", type=int, default=5, dest="timeout_seconds", metavar="SECONDS",
                        help="seconds after which wrk counts a request as timed out (default 5)")
    parser.add_argument("--clients", default="16,64",
                        help="comma-separated connection counts (default 16,64)")
    parser.add_argument("--threads", type=int, default=os.cpu_count() or 1,
                        help="wrk threads (default: the number of cores)")
    parser.add_argument("--workers", type=int, default=None,
                        help="gunicorn workers (default: the production config's choice)")
    parser.add_argument("--output", type=Path, default=None,
                        help="also write the report to this file")
    parser.add_argument("--no-kill", action="store_false", dest="kill",
                        help="skip the run during which a worker is killed")
    args = parser.parse_args(argv)
    clients = [int(part) for part in args.clients.split(",") if part.strip()]
    if args.seconds < 1 or args.timeout_seconds < 1 or not clients or min(clients) < 1:
        parser.error("--seconds, --timeout and every --clients value must be at least 1")
    return Options(args.seconds, args.timeout_seconds, clients, args.threads, args.workers,
                   args.output, args.kill)


def cpu_model() -> str:
    for line in Path("/proc/cpuinfo").read_text().splitlines():
        if line.startswith("model name"):
            return line.split(":", 1)[1].strip()
    return platform.processor() or "unknown"


def _loads(averages: tuple[float, float, float]) -> str:
    return " / ".join(f"{value:.2f}" for value in averages)


def _reaped_children_cpu_seconds() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def measured_run(url: str, master: int, chosen: list[calls.Call], label: str, clients: int,
                 settings: wrk_runs.LoadSettings) -> wrk_runs.RunResult:
    """One wrk run, with the CPU time the server and wrk (the one child reaped) spent on it."""
    server_before = server_processes.server_cpu_seconds(master)
    client_before = _reaped_children_cpu_seconds()
    result = wrk_runs.run(url, chosen, label, clients, settings)
    return replace(
        result,
        server_cpu_seconds=server_processes.server_cpu_seconds(master) - server_before,
        client_cpu_seconds=_reaped_children_cpu_seconds() - client_before,
    )


def _ms(value: float | None) -> str:
    return "–" if value is None else f"{value:.2f}"


def progress(message: str) -> None:
    print(message, file=sys.stderr, flush=True)


def health_reference(results: list[wrk_runs.RunResult]) -> dict[int, float]:
    """Health's rps per client count: the mean of the runs at the start and at the end.

    Other work on the machine changes during a session of several minutes; health is run
    first and last so that the share is taken against the ceiling of the whole session,
    and the two rows show how much it moved.
    """
    runs: dict[int, list[float]] = {}
    for r in results:
        if r.label in (calls.HEALTH.name, HEALTH_AGAIN):
            runs.setdefault(r.clients, []).append(r.rps)
    return {clients: sum(rps) / len(rps) for clients, rps in runs.items()}


def table(results: list[wrk_runs.RunResult], health: dict[int, float]) -> list[str]:
    lines = ["| endpoint | clients | rps | p50 ms | p99 ms | errors | % of health rps "
             "| server CPU ms/req | wrk CPU ms/req |",
             "|---|---:|---:|---:|---:|---:|---:|---:|---:|"]
    for r in results:
        share = f"{100 * r.rps / health[r.clients]:.0f} %" if r.clients in health else "–"
        errors = f"{r.errors}" if not r.errors else (
            f"{r.errors} ({r.socket_errors} socket, {r.status_errors} status)")
        lines.append(f"| {r.label} | {r.clients} | {r.rps:,.0f} | {r.p50_ms:.1f} | "
                     f"{r.p99_ms:.1f} | {errors} | {share} "
                     f"| {_ms(r.cpu_ms_per_request(r.server_cpu_seconds))} "
                     f"| {_ms(r.cpu_ms_per_request(r.client_cpu_seconds))} |")
    return lines


def _mean_cpu_ms(results: list[wrk_runs.RunResult], labels: tuple[str, ...]) -> float | None:
    values = [r.cpu_ms_per_request(r.server_cpu_seconds) for r in results if r.label in labels]
    known = [value for value in values if value]
    return sum(known) / len(known) if known else None


def cpu_shares(results: list[wrk_runs.RunResult]) -> str:
    """Health's server CPU ms per request over sizing's and evaluation's: the rps share
    each would reach where the server's CPU is the only limit."""
    health = _mean_cpu_ms(results, (calls.HEALTH.name, HEALTH_AGAIN))
    if health is None:
        return "not measured"
    parts = [f"health {health:.2f} ms"]
    for call in (calls.SIZING, calls.EVALUATION):
        cost = _mean_cpu_ms(results, (call.name,))
        if cost is not None:
            parts.append(f"{call.name} {cost:.2f} ms, so {100 * health / cost:.0f} %")
    return "; ".join(parts)


def goals(results: list[wrk_runs.RunResult], health: dict[int, float]) -> list[str]:
    """Each goal, met or missed, with the runs that decide it."""
    failing = [f"{r.label} at {r.clients} ({r.errors})" for r in results if r.errors]
    lines = ["- No errors: " + ("met." if not failing else "missed: " + ", ".join(failing))]
    shares = [(r, 100 * r.rps / health[r.clients]) for r in results
              if r.label in (calls.SIZING.name, calls.EVALUATION.name)]
    low = [f"{r.label} at {r.clients} clients {share:.0f} %" for r, share in shares
           if share < SHARE_GOAL_PERCENT]
    shown = ", ".join(f"{r.label} {r.clients}: {share:.0f} %" for r, share in shares)
    lines.append(f"- Sizing and evaluation at ≥ {SHARE_GOAL_PERCENT} % of health's rps: "
                 + ("met" if not low else "missed") + f" ({shown}).")
    lines.append("  The same share from the server CPU time per request, which other work on "
                 "the machine disturbs less than the rps: " + cpu_shares(results) + ".")
    slow = [f"{r.label} {r.p99_ms:.0f} ms" for r in results
            if r.clients == P99_GOAL_CLIENTS and r.p99_ms >= P99_GOAL_MS]
    lines.append(f"- p99 < {P99_GOAL_MS:.0f} ms at {P99_GOAL_CLIENTS} clients: "
                 + ("met." if not slow else "missed by " + ", ".join(slow) + "."))
    return lines


@dataclass(frozen=True)
class Session:
    """What one invocation measured, with the facts needed to read it."""

    argv: list[str]
    options: Options
    wrk_version: str
    load_before: tuple[float, float, float]
    load_after: tuple[float, float, float]
    workers: int
    boots: int
    results: list[wrk_runs.RunResult]
    killed: worker_kill.KillResult | None


def _plural(count: int, noun: str) -> str:
    return f"{count:,} {noun}" + ("" if count == 1 else "s")


def report(session: Session) -> str:
    """The Markdown report: machine and server facts, the table, the goals, the kill run."""
    options, results = session.options, session.results
    health = health_reference(results)
    cores = len(os.sched_getaffinity(0))
    command = " ".join(["bench/load/run_load.py", *session.argv])
    lines = [
        f"Load run of {datetime.now(UTC):%Y-%m-%d %H:%M} UTC: `{command}`.",
        "",
        f"Machine: {cores} cores (`nproc`), {cpu_model()}, Python {platform.python_version()}, "
        f"{session.wrk_version}; load average (1, 5, 15 min) {_loads(session.load_before)} "
        f"before the run, {_loads(session.load_after)} after. "
        f"Server: gunicorn, production config, {session.workers} threaded workers"
        + (" (--workers)" if options.workers is not None else " (its default for the cores)")
        + f". wrk: {options.threads} threads, {options.seconds} s per run, "
        f"timeout {options.timeout_seconds} s. wrk and the server share the {cores} cores, "
        "so every figure is lower than the server alone would reach.",
        "",
        *table(results, health),
        "",
        "The share of health is taken against the mean of health's first and last runs "
        "at the same client count. CPU ms/req: CPU time the server (master and every "
        "worker, those recycled included) and wrk spent in the run, per completed request. "
        f"Mixed run: {calls.mix_description(calls.MIXED)}. Workers booted during the whole "
        f"session: {session.boots} ({session.workers} at start; the rest replace workers "
        "recycled after max_requests, or killed).",
        "",
        *goals(results, health),
    ]
    killed = session.killed
    if killed is not None:
        run = killed.run
        lines += [
            "",
            f"One of {killed.workers_before} workers SIGKILLed half-way through a "
            f"{options.seconds} s run of {calls.SIZING.name} at {run.clients} clients: "
            f"{_plural(run.errors, 'error')} ({run.socket_errors} socket, "
            f"{run.status_errors} status) of {_plural(run.requests, 'request')}, "
            f"{run.rps:,.0f} rps, p99 {run.p99_ms:.1f} ms; workers afterwards: "
            f"{killed.workers_after}; master logged the kill: "
            + ("yes." if killed.kill_logged else "no."),
        ]
    return "\n".join(lines) + "\n"


def main(argv: list[str]) -> int:
    options = parse_options(argv)
    settings = wrk_runs.LoadSettings(options.seconds, options.timeout_seconds, options.threads)
    version = wrk_runs.wrk_version()
    load_before = os.getloadavg()
    # WEB_CONCURRENCY only if asked: the production default otherwise.
    server = start_server(
        Path(tempfile.mkdtemp(prefix="sampling-load-")),
        {} if options.workers is None else {"WEB_CONCURRENCY": str(options.workers)},
        log_name="server.log",
    )
    results: list[wrk_runs.RunResult] = []
    killed = None
    try:
        master = server.process.pid
        workers = server_processes.settled_worker_count(master)
        for call in [*calls.ENDPOINTS, *calls.MIXED]:
            calls.check(server.url, call)
        runs = [(call.name, [call]) for call in calls.ENDPOINTS]
        runs += [("mixed", calls.MIXED), (HEALTH_AGAIN, [calls.HEALTH])]
        for label, chosen in runs:
            for clients in options.clients:
                progress(f"{label} at {clients} clients for {options.seconds} s ...")
                results.append(measured_run(server.url, master, chosen, label, clients,
                                            settings))
                time.sleep(PAUSE_SECONDS)
        if options.kill:
            clients = options.clients[0]
            progress(f"{calls.SIZING.name} at {clients} clients, killing one worker ...")
            killed = worker_kill.kill_one_worker_during(
                server.url, master, server.log_path, calls.SIZING, clients, settings)
    finally:
        stop(server.process)
    text = report(Session(
        argv=argv, options=options, wrk_version=version, load_before=load_before,
        load_after=os.getloadavg(), workers=workers,
        boots=server.log().count("Booting worker"), results=results, killed=killed,
    ))
    print(text)
    if options.output is not None:
        options.output.write_text(text, encoding="utf-8")
    progress(f"server log: {server.log_path}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
