"""Prometheus metrics of the HTTP layer, served at ``GET /metrics``.

======================================== ========= ======================================
metric                                   type      labels
======================================== ========= ======================================
sampling_http_requests_total             counter   endpoint, method, status
sampling_http_request_duration_seconds   histogram endpoint, method
sampling_http_requests_in_flight         gauge     (none): requests being answered now
sampling_server_answers_total            counter   status: answers gunicorn wrote itself
                                                   (malformed requests, 408, 414, 431, 500)
sampling_worker_aborts_total             counter   (none): workers stopped by the master
                                                   for not answering within its timeout
======================================== ========= ======================================

``endpoint`` is the route's path as declared (``/v1/sample-size``), or ``unmatched`` for
a path the service does not have, so a scan of random paths cannot create new series.

Under gunicorn every worker is its own process; the official client's multiprocess mode
(``PROMETHEUS_MULTIPROC_DIR``, set up by :mod:`service.web.gunicorn_config`) keeps each
worker's values in a file of that folder, and ``/metrics`` adds them up, whichever
worker answers the scrape. Without the variable (a single process, as in the tests) the
values are the process's own.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from functools import cache
from pathlib import Path
from typing import Any

from flask import Blueprint, Flask, Response, g, request
from prometheus_client import (
    REGISTRY,
    CollectorRegistry,
    Counter,
    Gauge,
    Histogram,
    disable_created_metrics,
    multiprocess,
    values,
)
from prometheus_client.exposition import choose_encoder

from service.settings import SettingsError

MULTIPROCESS_VARIABLE = "PROMETHEUS_MULTIPROC_DIR"
UNMATCHED = "unmatched"
# Seconds; the service answers most requests in a few milliseconds, the largest
# selections and batches in seconds.
BUCKETS = (0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0)

# The ``_created`` series (when each series was first seen) mean nothing to a reader
# of this service's figures, and multiprocess mode cannot sum them.
disable_created_metrics()  # type: ignore[no-untyped-call]



@cache
def server_answers() -> Counter:
    """Answers the HTTP server wrote itself, outside the app
    (:mod:`service.web.gunicorn_worker`)."""
    return Counter(
        "sampling_server_answers", "Answers written by the HTTP server itself.", ["status"]
    )


@cache
def worker_aborts() -> Counter:
    """Workers the master stopped after its timeout; their requests in flight got no answer."""
    return Counter("sampling_worker_aborts", "Workers stopped by the master's timeout.")


@dataclass(frozen=True)
class Instruments:
    requests: Counter
    duration: Histogram
    in_flight: Gauge


@cache
def instruments() -> Instruments:
    """The service's metrics, made once per process on first use.

    Not at import: in multiprocess mode making a gauge opens its file, and a bad
    PROMETHEUS_MULTIPROC_DIR must first get the clear message of
    :func:`check_multiprocess_directory`, which :func:`register` runs before this.
    """
    return Instruments(
        requests=Counter(
            "sampling_http_requests", "HTTP requests answered.", ["endpoint", "method", "status"]
        ),
        duration=Histogram(
            "sampling_http_request_duration_seconds",
            "Time from the request reaching the application to its answer.",
            ["endpoint", "method"],
            buckets=BUCKETS,
        ),
        in_flight=Gauge(
            "sampling_http_requests_in_flight",
            "Requests being answered now.",
            multiprocess_mode="livesum",
        ),
    )


bp = Blueprint("metrics", __name__)


class MetricsDirectoryError(SettingsError):
    """PROMETHEUS_MULTIPROC_DIR names no writable folder."""


def check_multiprocess_directory() -> None:
    """Stop start-up with a clear message when the multiprocess folder is unusable.

    The client chooses between single- and multiprocess values when it is first imported;
    a folder named only afterwards would be read by ``/metrics`` but never written, and
    every scrape would come back empty.
    """
    chosen = os.environ.get(MULTIPROCESS_VARIABLE)
    if chosen is None:
        return
    folder = Path(chosen)
    if not folder.is_dir() or not os.access(folder, os.W_OK):
        raise MetricsDirectoryError(
            f"{MULTIPROCESS_VARIABLE}={chosen[:200]!r}: must name a writable folder"
        )
    if values.ValueClass is values.MutexValue:
        raise MetricsDirectoryError(
            f"{MULTIPROCESS_VARIABLE} was set after the Prometheus client was imported; "
            "set it before the application is imported (service.web.gunicorn_config does)"
        )


def _endpoint() -> str:
    rule = request.url_rule
    return UNMATCHED if rule is None else rule.rule


def _start() -> None:
    g.metrics_started = time.perf_counter()
    instruments().in_flight.inc()


def _record(response: Response) -> Response:
    started = g.get("metrics_started")
    if started is not None:
        observe(_endpoint(), request.method, response.status_code, time.perf_counter() - started)
    return response


# The labelled series of each (endpoint, method, status) seen, looked up once: endpoints are
# route patterns (or one name for unmatched paths), so the set is small and bounded.
_SERIES: dict[tuple[str, str, int], tuple[Any, Any]] = {}


def observe(endpoint: str, method: str, status: int, seconds: float) -> None:
    """Count one answered request and its duration."""
    series = _SERIES.get((endpoint, method, status))
    if series is None:
        measured = instruments()
        series = (
            measured.requests.labels(endpoint, method, str(status)),
            measured.duration.labels(endpoint, method),
        )
        _SERIES[(endpoint, method, status)] = series
    count, duration = series
    count.inc()
    duration.observe(seconds)


def _finish(_: BaseException | None) -> None:
    if g.pop("metrics_started", None) is not None:
        instruments().in_flight.dec()


@bp.get("/metrics")
def metrics() -> Response:
    """The metrics, summed over every worker.

    The Prometheus text format (0.0.4) by default; OpenMetrics when the scraper's
    ``Accept`` asks for ``application/openmetrics-text``.
    """
    registry = REGISTRY
    if MULTIPROCESS_VARIABLE in os.environ:
        registry = CollectorRegistry()
        multiprocess.MultiProcessCollector(registry)  # type: ignore[no-untyped-call]
    encode, content_type = choose_encoder(request.headers.get("Accept", ""))
    return Response(encode(registry), content_type=content_type)


def register(app: Flask) -> None:
    """Count every request of ``app`` and serve ``/metrics``."""
    check_multiprocess_directory()
    instruments()
    server_answers()
    worker_aborts()
    app.before_request(_start)
    app.after_request(_record)
    app.teardown_request(_finish)
    app.register_blueprint(bp)
