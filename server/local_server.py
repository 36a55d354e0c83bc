"""Run ``probewise serve`` as a child process on a free loopback port.

Used by the browser tests, the fault tests and the load benchmark, which all need the real
server (uvicorn, its start-up and its shutdown) rather than an in-process test client.
"""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

STARTUP_DEADLINE_S = 60.0  # when to give up waiting for the server to answer


class ServerStartError(RuntimeError):
    """The server exited or did not answer in time; the message holds its log."""


def free_port() -> int:
    """A TCP port on 127.0.0.1 that nothing listens on now."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def probewise_command() -> list[str]:
    """The installed console script beside this Python, else the module."""
    script = Path(sys.executable).with_name("probewise")
    if script.is_file():
        return [str(script)]
    found = shutil.which("probewise")
    return [found] if found else [sys.executable, "-m", "probewise.cli"]


def start_server(
    db_path: Path,
    port: int,
    log_path: Path,
    *extra: str,
    probe_path: str = "/api/projects",
    cwd: Path | None = None,
) -> subprocess.Popen:
    """``probewise serve`` on 127.0.0.1:``port`` over ``db_path``; returns once it answers.

    Output goes to ``log_path`` (appended). Raises ServerStartError with the log when the
    process exits or ``probe_path`` does not answer within ``STARTUP_DEADLINE_S``.
    """
    with Path(log_path).open("a") as log:
        process = subprocess.Popen(
            [*probewise_command(), "serve", "--db", str(db_path), "--port", str(port), *extra],
            stdout=log,
            stderr=subprocess.STDOUT,
            env={**os.environ, "PYTHONUNBUFFERED": "1"},
            cwd=cwd,
        )
    deadline = time.monotonic() + STARTUP_DEADLINE_S
    while time.monotonic() < deadline and process.poll() is None:
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}{probe_path}", timeout=2.0):
                return process
        except urllib.error.HTTPError:  # an answer, even an error status, means it is up
            return process
        except OSError:  # refused or reset: not listening yet
            time.sleep(0.1)
    stop_server(process)
    raise ServerStartError(f"probewise serve did not start; its log:\n{Path(log_path).read_text()}")


def stop_server(process: subprocess.Popen) -> None:
    """Ctrl+C (a clean shutdown), then kill if it lingers."""
    if process.poll() is not None:
        return
    process.send_signal(signal.SIGINT)
    try:
        process.wait(timeout=20)
    except subprocess.TimeoutExpired:
        process.kill()
        process.wait(timeout=10)
