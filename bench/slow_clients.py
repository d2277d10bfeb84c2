"""Slow clients against the real server: do stalled connections starve the workers?

Starts the server as ``make run`` does (:mod:`bench.probing`), opens ``--stallers``
connections (default 200) on 127.0.0.1 that each send the start of a request head and
then one fragment of a header line every ``--every`` seconds (default 5), never finishing
the head; a staller whose connection the server closes opens a new one at once. Meanwhile
``GET /v1/health`` is probed every 0.1 s for ``--seconds`` (default 30) with a 1 s timeout.
Prints the probes' p50, p99 and maximum latency, the failed probes (target: none, every
probe answered within 1 s), how often the server closed a staller, and the load average.

Bounded: at most 1,000 stallers and 300 s; loopback only; the server is stopped at the end.
Usage: ``.venv/bin/python -m bench.slow_clients [--stallers 200] [--seconds 30]``.
"""

from __future__ import annotations

import argparse
import selectors
import socket
import sys
import time

from bench.probing import HealthProber, load_average, served


def _open(host: str, port: int, number: int) -> socket.socket:
    sock = socket.create_connection((host, port), timeout=5)
    sock.setblocking(False)
    sock.send(f"GET /v1/health HTTP/1.1\r\nHost: {host}\r\nX-Staller-{number}: ".encode())
    return sock


def stall(host: str, port: int, count: int, every: float, seconds: float) -> dict[str, int]:
    """Keep ``count`` stalled connections open for ``seconds``; counts of what happened."""
    selector = selectors.DefaultSelector()
    counts = {"opened": 0, "closed_by_server": 0, "answers_408": 0}
    for number in range(count):
        selector.register(_open(host, port, number), selectors.EVENT_READ, number)
        counts["opened"] += 1
    next_send = time.monotonic() + every
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        for key, _ in selector.select(timeout=max(0.0, min(next_send, end) - time.monotonic())):
            sock = key.fileobj
            assert isinstance(sock, socket.socket)
            try:
                data = sock.recv(65536)
            except OSError:
                data = b""
            if b" 408 " in data.split(b"\r\n", 1)[0]:
                counts["answers_408"] += 1
            selector.unregister(sock)
            sock.close()
            counts["closed_by_server"] += 1
            selector.register(_open(host, port, key.data), selectors.EVENT_READ, key.data)
            counts["opened"] += 1
        if time.monotonic() >= next_send:
            for key in list(selector.get_map().values()):
                sock = key.fileobj
                assert isinstance(sock, socket.socket)
                try:
                    sock.send(b"a")
                except OSError:
                    continue
            next_send += every
    for key in list(selector.get_map().values()):
        key.fileobj.close()  # type: ignore[union-attr]
    selector.close()
    return counts


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--stallers", type=int, default=200)
    parser.add_argument("--every", type=float, default=5.0)
    parser.add_argument("--seconds", type=float, default=30.0)
    options = parser.parse_args(argv)
    if not (1 <= options.stallers <= 1000 and 1 <= options.seconds <= 300):
        parser.error("--stallers must be 1 to 1000 and --seconds 1 to 300")
    with served() as server:
        host, port = server.url.removeprefix("http://").split(":")
        print(f"load average before: {load_average()}")
        prober = HealthProber(server.url, timeout=1.0)
        prober.start()
        counts = stall(host, int(port), options.stallers, options.every, options.seconds)
        prober.stop()
        print(f"load average after:  {load_average()}")
    print(f"{options.stallers} stallers, one fragment every {options.every:g} s, "
          f"{options.seconds:g} s: {counts}")
    print(f"/v1/health: {prober.summary()}")
    return 0 if not prober.failures else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
