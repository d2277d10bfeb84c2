"""The gunicorn master's workers and the CPU time the server spends, read from /proc.

/proc/<pid>/stat gives a process's parent and its CPU time; the master's fields also
hold the CPU time of the children it has reaped, so workers recycled or killed during
a run are still counted.
"""

from __future__ import annotations

import os
import time
from pathlib import Path

from tests.functional.servers import stat_fields, worker_pids

REPLACEMENT_SECONDS = 15.0
SETTLE_SECONDS = 1.0
TICKS_PER_SECOND = os.sysconf("SC_CLK_TCK")


def settled_worker_count(master: int) -> int:
    """The number of workers once it has not changed for a second (they boot one by one).

    The server answers as soon as its first worker is up; the others follow within a
    moment. Bounded by ``REPLACEMENT_SECONDS``.
    """
    count, since = len(worker_pids(master)), time.monotonic()
    deadline = since + REPLACEMENT_SECONDS
    while time.monotonic() < deadline and time.monotonic() - since < SETTLE_SECONDS:
        time.sleep(0.1)
        now = len(worker_pids(master))
        if now != count:
            count, since = now, time.monotonic()
    return count


def _children(master: int) -> list[list[str]]:
    """The stat fields of every child of ``master``, zombies included."""
    found = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            fields = stat_fields(int(entry.name))
            if fields is not None and int(fields[1]) == master:
                found.append(fields)
    return found


def server_cpu_seconds(master: int) -> float:
    """CPU seconds used so far by the master, its workers and the workers it reaped.

    A worker that has exited but is not yet reaped still shows its CPU time in /proc, so
    zombies count. A worker reaped between reading the master and reading its children
    would be missed, so the reading is retried until the master's total for reaped
    children did not change meanwhile.
    """
    for _ in range(10):
        before = stat_fields(master)
        if before is None:
            return 0.0
        children = _children(master)
        after = stat_fields(master)
        if after is not None and after[13:15] == before[13:15]:
            break
    # utime, stime, then cutime and cstime: the reaped children's user and system time.
    ticks = sum(int(value) for value in before[11:15])
    ticks += sum(int(fields[11]) + int(fields[12]) for fields in children)
    return ticks / TICKS_PER_SECOND
