"""gunicorn settings for the service, all overridable from the environment.

HOST / PORT            where to listen (127.0.0.1:8000)
WEB_CONCURRENCY        worker processes (2 × cores + 1, at most 8)
GUNICORN_THREADS       threads per worker (1: the work is CPU-bound)
GUNICORN_TIMEOUT       seconds before a silent worker is restarted (30)
GUNICORN_MAX_REQUESTS  requests before a worker is recycled (2000, with jitter)
"""

import multiprocessing
import os


def _int(name: str, default: int) -> int:
    raw = os.environ.get(name)
    if raw is None:
        return default
    if not raw.strip().isdigit() or int(raw) < 1:
        raise SystemExit(f"{name}={raw!r}: must be a positive whole number")
    return int(raw)


bind = f"{os.environ.get('HOST', '127.0.0.1')}:{_int('PORT', 8000)}"
workers = _int("WEB_CONCURRENCY", min(2 * multiprocessing.cpu_count() + 1, 8))
threads = _int("GUNICORN_THREADS", 1)
timeout = _int("GUNICORN_TIMEOUT", 30)
graceful_timeout = _int("GUNICORN_GRACEFUL_TIMEOUT", 30)
keepalive = 5
max_requests = _int("GUNICORN_MAX_REQUESTS", 2000)
max_requests_jitter = max(1, max_requests // 10)
# Refuse oversized request lines and headers early; bodies are capped by the app.
limit_request_line = 8190
limit_request_fields = 100
accesslog = "-"
errorlog = "-"
access_log_format = (
    '{"time":"%(t)s","remote":"%(h)s","method":"%(m)s","path":"%(U)s",'
    '"status":%(s)s,"bytes":%(B)s,"duration_us":%(D)s,"request_id":"%({x-request-id}o)s"}'
)
preload_app = True
