"""Start and stop the real gunicorn server (docker/gunicorn.conf.py) on a free loopback port.

Every functional test that needs a server goes through :func:`running_server`, so the
start-up wait, the log capture and the shutdown are written once.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import pytest
import requests

ROOT = Path(__file__).resolve().parents[2]
GUNICORN = Path(sys.executable).parent / "gunicorn"
CONFIG = ROOT / "docker" / "gunicorn.conf.py"
HOST = "127.0.0.1"
START_SECONDS = 30.0
STOP_SECONDS = 15.0


class ServerFailed(RuntimeError):
    """gunicorn exited or did not answer in time; the message ends with its log."""


@dataclass
class Server:
    """A running gunicorn: its base URL, its process and the file its output goes to."""

    url: str
    process: subprocess.Popen[bytes]
    log_path: Path

    def log(self) -> str:
        return self.log_path.read_text(errors="replace")


def stat_fields(pid: int) -> list[str] | None:
    """The fields of /proc/<pid>/stat after the command name (which sits in parentheses
    and may hold spaces): state, parent pid, ...; None once the process has gone."""
    try:
        text = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    return text[text.rindex(")") + 2:].split()


def worker_pids(master: int) -> set[int]:
    """Pids of the live processes whose parent is ``master``: the gunicorn workers."""
    children = set()
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            fields = stat_fields(int(entry.name))
            if fields is not None and int(fields[1]) == master and fields[0] != "Z":
                children.add(int(entry.name))
    return children


def free_port() -> int:
    """A TCP port on 127.0.0.1 that was free a moment ago."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind((HOST, 0))
        return int(sock.getsockname()[1])


def gunicorn_command() -> list[str]:
    return [str(GUNICORN), "--config", str(CONFIG), "service.wsgi:app"]


def wait_until_healthy(server: Server, seconds: float = START_SECONDS) -> None:
    """Poll ``/v1/health`` until it answers 200; raise :class:`ServerFailed` otherwise."""
    deadline = time.monotonic() + seconds
    while True:
        if server.process.poll() is not None:
            raise ServerFailed(
                f"gunicorn exited with {server.process.returncode}:\n{server.log()[-3000:]}"
            )
        try:
            if requests.get(f"{server.url}/v1/health", timeout=1).status_code == 200:
                return
        except requests.RequestException:
            pass
        if time.monotonic() > deadline:
            raise ServerFailed(f"gunicorn did not answer within {seconds:.0f} s:\n"
                               + server.log()[-3000:])
        time.sleep(0.1)


def stop(process: subprocess.Popen[bytes], seconds: float = STOP_SECONDS) -> None:
    """SIGTERM, then SIGKILL if it has not exited within ``seconds``."""
    if process.poll() is not None:
        return
    process.send_signal(signal.SIGTERM)
    try:
        process.wait(timeout=seconds)
    except subprocess.TimeoutExpired:
        process.kill()
        process.wait(timeout=seconds)


def start_server(
    log_dir: Path, env: Mapping[str, str] | None = None, log_name: str = "server-{port}.log"
) -> Server:
    """gunicorn with the production config on a free port, once it answers; ``env`` adds or
    overrides variables.

    The server's own output goes to ``log_dir/log_name`` (``{port}`` replaced). A server that
    exits or does not answer in time is stopped and :class:`ServerFailed` raised.
    """
    port = free_port()
    full_env = {**os.environ, "HOST": HOST, "PORT": str(port), **(env or {})}
    log_path = log_dir / log_name.format(port=port)
    with log_path.open("wb") as log:
        process = subprocess.Popen(
            gunicorn_command(), cwd=ROOT, env=full_env, stdout=log, stderr=subprocess.STDOUT
        )
    server = Server(url=f"http://{HOST}:{port}", process=process, log_path=log_path)
    try:
        wait_until_healthy(server)
    except BaseException:
        stop(process)
        raise
    return server


@contextmanager
def running_server(
    log_dir: Path, env: Mapping[str, str] | None = None, workers: int = 2
) -> Iterator[Server]:
    """gunicorn with the production config on a free port; ``env`` adds or overrides variables.

    The server's own output (access and service logs) goes to ``log_dir/server-PORT.log``.
    A server that exits or does not answer in time fails the test, with the end of its log.
    """
    try:
        server = start_server(log_dir, {"WEB_CONCURRENCY": str(workers), **(env or {})})
    except ServerFailed as failure:
        pytest.fail(str(failure))
    try:
        yield server
    finally:
        stop(server.process)
