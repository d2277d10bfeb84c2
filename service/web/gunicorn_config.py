"""gunicorn settings for the service, every one overridable from the environment.

``docker/gunicorn.conf.py`` and the ``attribute-sampling serve`` command both load this
module, so the container, ``make run`` and the console command serve the same way.

======================== ======================== =============================================
variable                 default                  meaning
======================== ======================== =============================================
HOST                     127.0.0.1                address to listen on (the image sets 0.0.0.0)
PORT                     8000                     port to listen on
WEB_CONCURRENCY          cores, at most 8         worker processes (see below)
GUNICORN_THREADS         128                      threads per worker: each request, and each
                                                  slow client, holds one thread, not a worker
GUNICORN_TIMEOUT         30                       seconds before a silent worker is restarted
GUNICORN_HEADER_TIMEOUT  10                       seconds to receive a request's head (408)
GUNICORN_READ_TIMEOUT    30                       seconds a body may pause between bytes
GUNICORN_GRACEFUL_TIMEOUT 30                      seconds in-flight requests get after SIGTERM
GUNICORN_MAX_REQUESTS    20000                    requests before a worker is recycled (+10 %
                                                  random jitter, so workers do not all restart
                                                  at once)
GUNICORN_ACCESS_LOG      unset                    1 adds gunicorn's own access line to the
                                                  app's one JSON line per request
PROMETHEUS_MULTIPROC_DIR a new temporary folder   where workers keep their metric files
======================== ======================== =============================================

Workers: one per core. The work is CPU-bound and holds the interpreter lock, so more
workers than cores only add context switches and cache misses: on a 2-core machine,
2 × cores + 1 workers cost more server CPU per request than 2 workers for the same
throughput (``bench/echo_compare.py``, figures in BENCHMARKS.md).

Recycling: a worker is replaced after about 20,000 requests, as a guard against a leak,
not because one is known: a worker's memory levels off at about 110 MB once its bounded
memos are full (some 15,000 requests). Each replacement costs about 90 ms of CPU and the
memos' contents; at 2,000 requests it cost the random-body benchmark about 0.1 ms a
request (BENCHMARKS.md). The master freezes its objects before forking (``pre_fork``),
so that a new worker's first garbage collection does not copy the preloaded app's pages.

Worker model: the threaded worker of :mod:`service.web.gunicorn_worker` (gunicorn's
``gthread`` with a deadline on reading a request's head and problem+json for the errors
gunicorn answers itself). Connections wait in the worker's poller; a slow or stalled
client holds one of the worker's threads for at most the header timeout, and the other
threads keep answering. Threads add no throughput: they are there for waiting clients.
Work is bounded per request by the cost budget and the request deadline
(:mod:`service.settings`), which is below the worker timeout.

Metrics: with several worker processes each keeps its own counters, so the Prometheus
client runs in multiprocess mode. The folder is emptied when the server starts, and a
worker's files are marked dead when it exits, so ``/metrics`` sums every live worker and
every finished request.
"""

from __future__ import annotations

import gc
import multiprocessing
import os
import tempfile
from pathlib import Path
from typing import Any

# The settings module needs only the standard library, so this import does not load the
# Prometheus client before _metrics_dir has exported its folder.
from service.settings import whole_number

__all__ = [
    "access_log_format", "accesslog", "bind", "child_exit", "control_socket_disable",
    "errorlog", "graceful_timeout", "keepalive", "limit_request_fields",
    "limit_request_line", "logger_class", "max_requests", "max_requests_jitter",
    "on_starting", "pre_fork", "preload_app", "threads", "timeout", "worker_abort", "worker_class",
    "worker_connections", "workers",
]

METRICS_DIR_VARIABLE = "PROMETHEUS_MULTIPROC_DIR"


def _int(name: str, default: int) -> int:
    raw = os.environ.get(name)
    if raw is None:
        return default
    try:
        return whole_number(raw)
    except ValueError as exc:
        raise SystemExit(f"{name}={exc}") from None


def _metrics_dir() -> str:
    """The multiprocess metrics folder, exported before the app is imported.

    A folder named in the environment must exist (the app checks it and stops start-up
    otherwise); without one, a new temporary folder is made.
    """
    chosen = os.environ.get(METRICS_DIR_VARIABLE) or tempfile.mkdtemp(prefix="sampling-metrics-")
    os.environ[METRICS_DIR_VARIABLE] = chosen
    return chosen


bind = f"{os.environ.get('HOST', '127.0.0.1')}:{_int('PORT', 8000)}"
workers = _int("WEB_CONCURRENCY", min(multiprocessing.cpu_count(), 8))
worker_class = "service.web.gunicorn_worker.ServiceWorker"
threads = _int("GUNICORN_THREADS", 128)
# Connections one worker holds open, idle or not (gunicorn's default).
worker_connections = 1000
timeout = _int("GUNICORN_TIMEOUT", 30)
graceful_timeout = _int("GUNICORN_GRACEFUL_TIMEOUT", 30)
keepalive = 5
max_requests = _int("GUNICORN_MAX_REQUESTS", 20000)
max_requests_jitter = max(1, max_requests // 10)
# Refuse oversized request lines and headers early; bodies are capped by the app.
limit_request_line = 8190
limit_request_fields = 100
# The app writes one JSON line per request (service.web.context); gunicorn's own access line,
# in the layout below, is added only when GUNICORN_ACCESS_LOG=1.
logger_class = "service.web.gunicorn_worker.ServiceLogger"
accesslog = "-" if os.environ.get("GUNICORN_ACCESS_LOG") == "1" else None
errorlog = "-"
access_log_format = (
    '{"time":"%(t)s","remote":"%(h)s","method":"%(m)s","path":"%(U)s",'
    '"status":%(s)s,"bytes":%(B)s,"duration_us":%(D)s,"request_id":"%({x-request-id}o)s"}'
)
# gunicorn 27 would otherwise open a control socket in the home folder, shared by every
# server of the user and impossible on the image's read-only file system.
control_socket_disable = True
# The app is imported once in the master, so a bad setting stops start-up before any
# worker is forked, with the message on standard error.
preload_app = True
metrics_dir = _metrics_dir()


def on_starting(server: Any) -> None:
    """Remove metric files a previous run left in the folder."""
    folder = Path(metrics_dir)
    for stale in folder.glob("*.db") if folder.is_dir() else ():
        stale.unlink()


def pre_fork(server: Any, worker: Any) -> None:
    """Keep the preloaded app's objects out of the collector's reach in the workers.

    A worker's first full collection would otherwise touch every object the master
    imported, copying most of its memory pages (copy-on-write) each time a worker starts
    or is recycled. Objects made after the fork are collected as usual.
    """
    gc.freeze()


def child_exit(server: Any, worker: Any) -> None:
    """Mark a finished worker's gauges dead, so in-flight counts do not linger."""
    from prometheus_client import multiprocess

    multiprocess.mark_process_dead(worker.pid)


def worker_abort(worker: Any) -> None:
    """Count a worker the master stops for not answering within the timeout.

    Runs in the worker, on the master's SIGABRT; its counter file outlives it, so
    ``/metrics`` keeps the count. Its requests in flight get no answer.
    """
    from service.web.metrics import worker_aborts

    worker_aborts().inc()
