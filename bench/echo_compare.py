"""The service against a trivial JSON echo app, under the same gunicorn settings, in one run.

Starts two servers with ``docker/gunicorn.conf.py`` and the same worker count on free
127.0.0.1 ports: the service, and ``bench/echo/echo_app.py`` (Flask parsing the JSON body
and answering it back). Then, for several rounds, drives them in turn with wrk
(``bench/echo/drive_lines.lua``), a fixed number of connections for a fixed time per run:

- the echo app, then ``POST /v1/sample-size`` and ``POST /v1/evaluation``, each with one
  repeated body (the README's Northwind Trading test of 4,200 purchase orders);
- the same three with bodies drawn at random from a grid of realistic inputs (tolerable
  and expected rates, confidence, population sizes from 200 to 250,000 items, samples of
  20 to 250 items with up to four deviations), 20,000 distinct bodies for each, so that
  the memos of a worker (1,024 plans and limits, 512 answers) can answer at most about
  one request in twenty.

Because the machine may be shared, each service run is compared with the echo run of the
same round and body kind; the table gives the median over rounds of requests per second,
of that ratio, of the server CPU per request (master and workers, from /proc/<pid>/stat),
of the echo's CPU per request over the service's (steadier than the requests per second
on a shared machine, whose speed moves from second to second) and of the
99th-percentile latency, with the load average before and after.

With ``--baseline DIR`` (a checkout of another revision, for example made with
``git worktree add /tmp/baseline main``) a third server runs that revision's service
under the same settings, and its sizing and evaluation runs join each round, so that a
change is measured against what it replaces in the same conditions;
``--baseline-workers N`` gives that server another worker count (``--baseline .`` with
``--baseline-workers 5`` compares this revision with 2 × cores + 1 workers).

Goals: sizing and evaluation at 0.8 × the echo's requests per second or more with the
repeated body, 0.6 × or more with random bodies.

Usage: ``.venv/bin/python bench/echo_compare.py [--workers N] [--rounds R (7)] [--seconds S (3)]
[--clients C] [--baseline DIR]`` (wrk must be installed: ``apt-get install -y wrk``).
"""

from __future__ import annotations

import argparse
import json
import os
import random
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(HERE / "load"))

import server_processes  # noqa: E402 - beside the load driver, after the path is set
import wrk_runs  # noqa: E402

from service.sampling.attributes import evaluate_sample, size_sample  # noqa: E402
from service.sampling.errors import SamplingError  # noqa: E402
from tests.functional.servers import (  # noqa: E402
    CONFIG,
    GUNICORN,
    HOST,
    Server,
    free_port,
    stop,
    wait_until_healthy,
)

SCRIPT = HERE / "echo" / "drive_lines.lua"
BODIES = HERE / "load" / "bodies"
GRID_BODIES = 20_000
SEED = 20261202
LABEL = "Northwind Trading purchase orders over 10,000, Q3 2026"
SHARE_REPEATED = 0.8
SHARE_RANDOM = 0.6


def _sizing_grid(rng: random.Random, count: int) -> list[str]:
    """Sizing bodies a firm's teams might send, each checked to be answered (not refused)."""
    bodies: list[str] = []
    while len(bodies) < count:
        tolerable = rng.choice([0.02, 0.03, 0.04, 0.05, 0.06, 0.07, 0.08, 0.1])
        expected = rng.choice([0.0, 0.0, 0.0025, 0.005, 0.0075, 0.01, 0.015, 0.02])
        if expected > tolerable / 2:
            continue
        confidence = rng.choice([0.9, 0.95, 0.95, 0.99])
        size = rng.randint(200, 250_000)
        try:
            size_sample(tolerable, expected, confidence, size)
        except SamplingError:
            continue
        bodies.append(json.dumps({
            "population": {"size": size, "label": LABEL}, "tolerable_rate": tolerable,
            "expected_rate": expected, "confidence": confidence,
        }))
    return bodies


def _evaluation_grid(rng: random.Random, count: int) -> list[str]:
    """Evaluation bodies: samples of 20 to 250 items with up to four deviations."""
    bodies: list[str] = []
    while len(bodies) < count:
        size = rng.randint(200, 250_000)
        sample = rng.randint(20, 250)
        deviations = rng.choice([0, 0, 0, 1, 1, 2, 3, 4])
        confidence = rng.choice([0.9, 0.95, 0.95, 0.99])
        tolerable = rng.choice([0.03, 0.05, 0.06, 0.08, 0.1])
        try:
            evaluate_sample(sample, deviations, confidence, tolerable, size)
        except SamplingError:
            continue
        bodies.append(json.dumps({
            "population": {"size": size, "label": LABEL}, "sample_size": sample,
            "deviations": deviations, "confidence": confidence, "tolerable_rate": tolerable,
        }))
    return bodies


def _one_line(path: Path) -> str:
    return json.dumps(json.loads(path.read_text()))


@dataclass(frozen=True)
class Target:
    """One kind of run: which server, which path, which bodies."""

    name: str
    bodies: str
    server: str
    path: str
    bodies_file: Path


def _start(name: str, app: str, workers: int, folder: Path, extra: list[str],
           root: Path = ROOT) -> Server:
    port = free_port()
    metrics = folder / f"metrics-{name}"
    metrics.mkdir()
    env = {**os.environ, "HOST": HOST, "PORT": str(port), "WEB_CONCURRENCY": str(workers),
           "PROMETHEUS_MULTIPROC_DIR": str(metrics)}
    env.pop("GUNICORN_ACCESS_LOG", None)
    log_path = folder / f"{name}.log"
    with log_path.open("wb") as log:
        # Our own argument list, no shell.
        process = subprocess.Popen(  # noqa: S603
            [str(GUNICORN), "--config", str(root / CONFIG.relative_to(ROOT)), *extra, app],
            cwd=root, env=env, stdout=log, stderr=subprocess.STDOUT,
        )
    return Server(url=f"http://{HOST}:{port}", process=process, log_path=log_path)


def _wait_for_echo(server: Server) -> None:
    import requests

    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        try:
            if requests.post(f"{server.url}/echo", json={"a": 1}, timeout=1).json() == {"a": 1}:
                return
        except requests.RequestException:
            time.sleep(0.1)
    raise SystemExit(f"the echo app did not answer:\n{server.log()[-2000:]}")


def _drive(server: Server, target: Target, clients: int,
           settings: wrk_runs.LoadSettings) -> tuple[wrk_runs.RunResult, float]:
    """One wrk run against ``server``; the result and the server CPU seconds it took."""
    master = server.process.pid
    before = server_processes.server_cpu_seconds(master)
    command = [
        wrk_runs.wrk_path(), f"--threads={min(settings.threads, clients)}",
        f"--connections={clients}", f"--duration={settings.seconds}s",
        f"--timeout={settings.timeout_seconds}s", f"--script={SCRIPT}",
        server.url, "--", target.path, str(target.bodies_file),
    ]
    # Our own argument list, no shell.
    process = subprocess.Popen(command,  # noqa: S603
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    result = wrk_runs.finish(process, f"{target.name} ({target.bodies})", clients, settings)
    return result, server_processes.server_cpu_seconds(master) - before


def _options() -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--workers", type=int, default=os.cpu_count() or 1,
                        help="gunicorn workers of both servers (default: the cores)")
    parser.add_argument("--rounds", type=int, default=7)
    parser.add_argument("--seconds", type=int, default=3, help="seconds per wrk run")
    parser.add_argument("--clients", type=int, default=8, help="wrk connections")
    parser.add_argument("--threads", type=int, default=2, help="wrk threads")
    parser.add_argument("--baseline", type=Path, default=None,
                        help="root of another revision whose service joins the runs")
    parser.add_argument("--baseline-workers", type=int, default=None,
                        help="workers of the baseline server (default: --workers)")
    return parser.parse_args()


def main() -> None:
    options = _options()
    settings = wrk_runs.LoadSettings(seconds=options.seconds, timeout_seconds=10,
                                     threads=options.threads)
    rng = random.Random(SEED)
    with tempfile.TemporaryDirectory(prefix="echo-compare-") as temporary:
        folder = Path(temporary)
        files = {
            ("sizing", "repeated"): [_one_line(BODIES / "sample-size.json")],
            ("evaluation", "repeated"): [_one_line(BODIES / "evaluation.json")],
            ("sizing", "random"): _sizing_grid(rng, GRID_BODIES),
            ("evaluation", "random"): _evaluation_grid(rng, GRID_BODIES),
        }
        paths: dict[tuple[str, str], Path] = {}
        for (kind, bodies), lines in files.items():
            paths[kind, bodies] = folder / f"{kind}-{bodies}.jsonl"
            paths[kind, bodies].write_text("\n".join(lines) + "\n")
        targets = [
            target
            for bodies in ("repeated", "random")
            for target in (
                Target("echo", bodies, "echo", "/echo", paths["sizing", bodies]),
                Target("sample-size", bodies, "service", "/v1/sample-size",
                       paths["sizing", bodies]),
                Target("evaluation", bodies, "service", "/v1/evaluation",
                       paths["evaluation", bodies]),
                *(() if options.baseline is None else (
                    Target("sample-size, baseline", bodies, "baseline", "/v1/sample-size",
                           paths["sizing", bodies]),
                    Target("evaluation, baseline", bodies, "baseline", "/v1/evaluation",
                           paths["evaluation", bodies]),
                )),
            )
        ]
        load_before = os.getloadavg()
        servers = {
            "service": _start("service", "service.wsgi:app", options.workers, folder, []),
            "echo": _start("echo", "echo_app:app", options.workers, folder,
                           ["--pythonpath", str(HERE / "echo")]),
        }
        if options.baseline is not None:
            servers["baseline"] = _start(
                "baseline", "service.wsgi:app", options.baseline_workers or options.workers,
                folder, [], options.baseline.resolve())
        try:
            for name in ("service", "baseline"):
                if name in servers:
                    wait_until_healthy(servers[name])
            _wait_for_echo(servers["echo"])
            time.sleep(2)  # let every worker boot
            results: dict[tuple[str, str], list[tuple[wrk_runs.RunResult, float]]] = {}
            ratios: dict[tuple[str, str], list[float]] = {}
            for round_number in range(options.rounds):
                echo_rps: dict[str, float] = {}
                for target in targets:
                    result, cpu = _drive(servers[target.server], target, options.clients,
                                         settings)
                    results.setdefault((target.name, target.bodies), []).append((result, cpu))
                    if target.server == "echo":
                        echo_rps[target.bodies] = result.rps
                    else:
                        ratios.setdefault((target.name, target.bodies), []).append(
                            result.rps / echo_rps[target.bodies])
                    print(f"round {round_number + 1}: {target.name} ({target.bodies}) "
                          f"{result.rps:.0f} req/s, {result.errors} errors", file=sys.stderr)
        finally:
            for server in servers.values():
                stop(server.process)
        load_after = os.getloadavg()

    baseline = "" if options.baseline is None else (
        f"; baseline {options.baseline} with "
        f"{options.baseline_workers or options.workers} workers")
    print(f"\nworkers {options.workers} per server{baseline}, {os.cpu_count()} cores, wrk "
          f"{options.clients} connections / {options.threads} threads, "
          f"{options.rounds} rounds of {options.seconds} s per run, alternating; "
          f"load average (1, 5, 15 min) before {_load(load_before)}, after "
          f"{_load(load_after)}\n")
    print("| endpoint | bodies | req/s (median) | × echo, same round (median) | goal | "
          "server CPU ms/request | echo's CPU ÷ this | p99 ms | errors |")
    print("|---|---|---|---|---|---|---|---|---|")
    echo_cpu: dict[str, float] = {}
    for target in targets:
        runs = results[target.name, target.bodies]
        rps = statistics.median(result.rps for result, _ in runs)
        cpu = statistics.median(1000 * seconds / max(1, r.requests) for r, seconds in runs)
        p99 = statistics.median(result.p99_ms for result, _ in runs)
        errors = sum(result.errors for result, _ in runs)
        if target.server == "echo":
            share, goal = "1", "—"
            echo_cpu[target.bodies] = cpu
        else:
            values = ratios[target.name, target.bodies]
            share = f"{statistics.median(values):.2f} ({', '.join(f'{v:.2f}' for v in values)})"
            wanted = SHARE_REPEATED if target.bodies == "repeated" else SHARE_RANDOM
            goal = f"≥ {wanted} {'met' if statistics.median(values) >= wanted else 'NOT met'}"
            if target.server == "baseline":
                goal = "(before)"
        print(f"| {target.name} | {target.bodies} | {rps:.0f} | {share} | {goal} | "
              f"{cpu:.2f} | {echo_cpu[target.bodies] / cpu:.2f} | {p99:.1f} | {errors} |")


def _load(values: tuple[float, float, float]) -> str:
    return ", ".join(f"{value:.2f}" for value in values)


if __name__ == "__main__":
    main()
