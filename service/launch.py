"""Start the service as a child process on a free 127.0.0.1 port, for tools, the demo and tests.

    with LocalService() as service:
        client = LifetimeClient(service.url)

runs ``python -m service --host 127.0.0.1 --port <free port>`` with this interpreter, waits
(bounded) until ``GET /ready`` answers 200, and on leaving stops the process (SIGTERM, then
SIGKILL after a grace period). Its output goes to a log file when one is given, else it is
discarded. Only the standard library and the client are imported.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path
from typing import IO, Any, Union

from service.client import LifetimeClient, LifetimeServiceError

#: the folder that holds the ``service`` package: the child imports the same code
CODE_ROOT = Path(__file__).resolve().parents[1]


def free_port() -> int:
    """A port on 127.0.0.1 that nothing listens on right now."""
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def service_environment(**settings: str) -> dict[str, str]:
    """This process's environment without LIFETIME_* settings, plus ``settings``."""
    env = {k: v for k, v in os.environ.items() if not k.startswith("LIFETIME_")}
    env["PYTHONPATH"] = str(CODE_ROOT) + (
        os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else ""
    )
    env.update(settings)
    return env


def spawn(port: int, log: Union[IO[bytes], int] = subprocess.DEVNULL, **settings: str) -> subprocess.Popen:
    """Start ``python -m service`` on 127.0.0.1:``port`` without waiting for it."""
    return subprocess.Popen(
        [sys.executable, "-m", "service", "--host", "127.0.0.1", "--port", str(port)],
        cwd=CODE_ROOT,
        env=service_environment(**settings),
        stdout=log,
        stderr=subprocess.STDOUT,
    )


def stop(process: subprocess.Popen, grace: float = 15.0) -> int:
    """SIGTERM, wait at most ``grace`` seconds, then SIGKILL; the exit status."""
    if process.poll() is None:
        process.send_signal(signal.SIGTERM)
        try:
            process.wait(timeout=grace)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=10)
    return process.returncode


class LocalService:
    """The service in a child process on a free loopback port (see the module docstring)."""

    def __init__(
        self,
        *,
        log_path: Union[Path, None] = None,
        ready_timeout: float = 60.0,
        **settings: str,
    ):
        self.log_path = log_path
        self.ready_timeout = ready_timeout
        self.settings = settings
        self.port = 0
        self.process: Union[subprocess.Popen, None] = None

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def start(self) -> LocalService:
        self.port = free_port()
        log: Any = self.log_path.open("wb") if self.log_path else subprocess.DEVNULL
        try:
            self.process = spawn(self.port, log, **self.settings)
        finally:
            if self.log_path:
                log.close()
        deadline = time.monotonic() + self.ready_timeout
        with LifetimeClient(self.url, retries=0, timeout=5.0) as client:
            while True:
                try:
                    client.ready()
                    break
                except LifetimeServiceError as exc:
                    if exc.status not in (None, 503):
                        raise
                    problem = exc
                if self.process.poll() is not None or time.monotonic() > deadline:
                    code = self.stop()
                    raise RuntimeError(
                        f"the service did not become ready on {self.url} (exit status {code}): "
                        f"{problem}" + (f"; its log is {self.log_path}" if self.log_path else "")
                    )
                time.sleep(0.1)
        return self

    def stop(self) -> Union[int, None]:
        if self.process is None:
            return None
        return stop(self.process)

    def __enter__(self) -> LocalService:
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()
