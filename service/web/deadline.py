"""Per-request deadline: work still running at the deadline is stopped with a 503.

A request's work runs inside :func:`guard`. One watchdog thread per process sleeps until
the earliest deadline of the requests in progress; when one passes, it raises
:class:`DeadlineExceeded` in that request's thread through the interpreter's
``PyThreadState_SetAsyncExc``. The interpreter delivers such an exception at the next
bytecode boundary of that thread, so Python loops (the searches of the sampling core) stop
within microseconds, while a single long call into C (one numpy or scipy call on a large
array, a DuckDB query) stops only when it returns; the cost model
(:mod:`service.http.costs`) keeps those calls short. :func:`guard` turns the exception
into a ``503`` problem with ``Retry-After``, and on a normal exit withdraws an exception
that was set but not yet delivered, so nothing leaks into the code after it.

``DeadlineExceeded`` derives from ``BaseException``: the core's ``except Exception``
clauses do not swallow it.
"""

from __future__ import annotations

import ctypes
import heapq
import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager

from service.web.problems import Problem

DEADLINE_EXCEEDED = "/problems/deadline-exceeded"
#: Seconds a client is asked to wait before trying again.
RETRY_AFTER = 5


class DeadlineExceeded(BaseException):
    """Raised in a request thread whose deadline has passed."""


class _Watchdog:
    """One thread that raises :class:`DeadlineExceeded` in threads whose deadline passed."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._wake = threading.Condition(self._lock)
        # (expiry, token, thread id); a token is live while it is in self._live.
        self._heap: list[tuple[float, int, int]] = []
        self._live: set[int] = set()
        self._fired: set[int] = set()
        self._next_token = 0
        self._thread: threading.Thread | None = None
        self._pid: int | None = None

    def arm(self, expiry: float) -> int:
        with self._lock:
            self._ensure_thread()
            self._next_token += 1
            token = self._next_token
            heapq.heappush(self._heap, (expiry, token, threading.get_ident()))
            self._live.add(token)
            # The watchdog sleeps until the earliest expiry in the heap (or for ever when it
            # is empty); it needs waking only when this one is now the earliest. Withdrawn
            # entries stay in the heap until their time, so a steady stream of requests
            # does not wake it once per request.
            if self._heap[0][1] == token:
                self._wake.notify()
            return token

    def disarm(self, token: int) -> bool:
        """Withdraw ``token``; whether its exception was already raised in the thread."""
        with self._lock:
            self._live.discard(token)
            fired = token in self._fired
            self._fired.discard(token)
            return fired

    def _ensure_thread(self) -> None:
        import os

        # A thread does not survive fork: gunicorn forks workers from a preloaded master.
        if self._thread is None or self._pid != os.getpid() or not self._thread.is_alive():
            self._pid = os.getpid()
            self._heap = [entry for entry in self._heap if entry[1] in self._live]
            self._thread = threading.Thread(
                target=self._run, name="request-deadline", daemon=True
            )
            self._thread.start()

    def _run(self) -> None:
        with self._lock:
            while True:
                while self._heap and self._heap[0][1] not in self._live:
                    heapq.heappop(self._heap)
                if not self._heap:
                    self._wake.wait()
                    continue
                expiry, token, thread_id = self._heap[0]
                delay = expiry - time.monotonic()
                if delay > 0:
                    self._wake.wait(delay)
                    continue
                heapq.heappop(self._heap)
                self._live.discard(token)
                self._fired.add(token)
                _raise_in(thread_id, DeadlineExceeded)


def _raise_in(thread_id: int, exception: type[BaseException] | None) -> None:
    """Set (or, with None, clear) the asynchronous exception of thread ``thread_id``."""
    ctypes.pythonapi.PyThreadState_SetAsyncExc(
        ctypes.c_ulong(thread_id), ctypes.py_object(exception) if exception else None
    )


_WATCHDOG = _Watchdog()
_DEPTH = threading.local()


def problem(seconds: float) -> Problem:
    return Problem(
        503,
        "Service Unavailable",
        f"the request did not finish within its deadline of {seconds:g} s and was stopped; "
        "ask for less work in one request (a smaller batch, a wider margin), or try again",
        DEADLINE_EXCEEDED,
        headers={"Retry-After": str(RETRY_AFTER)},
    )


@contextmanager
def guard(seconds: float, started: float | None = None) -> Iterator[None]:
    """Run the block under a deadline of ``seconds`` from ``started`` (a
    ``time.monotonic()`` value, default now); past it, raise a 503 :class:`Problem`.

    Nested guards (a batch running single operations) use the outermost deadline.
    """
    if getattr(_DEPTH, "value", 0):
        _DEPTH.value += 1
        try:
            yield
        finally:
            _DEPTH.value -= 1
        return
    begin = time.monotonic() if started is None else started
    token = _WATCHDOG.arm(begin + seconds)
    _DEPTH.value = 1
    try:
        try:
            yield
        finally:
            _DEPTH.value = 0
            if _WATCHDOG.disarm(token):
                # Fired, but perhaps not yet delivered: withdraw it so it cannot surface later.
                _raise_in(threading.get_ident(), None)
    except DeadlineExceeded:
        raise problem(seconds) from None
