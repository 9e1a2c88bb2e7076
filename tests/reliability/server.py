"""The real server for reliability tests: ``python -m service`` as a process on 127.0.0.1."""

from __future__ import annotations

import signal
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import httpx

from service.launch import free_port
from service.launch import service_environment as environment

PROJECT_ROOT = Path(__file__).resolve().parents[2]


def resident_kib(pid: int) -> int:
    """The resident set size of a process, in KiB (VmRSS of /proc/<pid>/status)."""
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1])
    raise RuntimeError(f"no VmRSS for process {pid}")


@dataclass
class Server:
    process: subprocess.Popen
    base: str
    log_path: Path

    @property
    def pid(self) -> int:
        return self.process.pid

    def stop(self, timeout: float = 20.0) -> int:
        """SIGTERM, then wait (SIGKILL after ``timeout``); the exit status."""
        if self.process.poll() is None:
            self.process.send_signal(signal.SIGTERM)
            try:
                self.process.wait(timeout=timeout)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait(timeout=10)
        return self.process.returncode

    def log(self) -> str:
        return self.log_path.read_text(errors="replace") if self.log_path.exists() else ""


def start_server(log_dir: Path, *args: str, env: dict[str, str] | None = None) -> Server:
    """Start the service on a free loopback port and wait until it is ready (at most 60 s)."""
    port = free_port()
    log_path = log_dir / f"server-{port}.log"
    log = log_path.open("wb")
    process = subprocess.Popen(
        [sys.executable, "-m", "service", "--host", "127.0.0.1", "--port", str(port), *args],
        cwd=PROJECT_ROOT,
        env=environment(**(env or {})),
        stdout=log,
        stderr=subprocess.STDOUT,
    )
    log.close()
    server = Server(process, f"http://127.0.0.1:{port}", log_path)
    deadline = time.monotonic() + 60.0
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise RuntimeError(f"the server stopped at start-up:\n{server.log()}")
        try:
            if httpx.get(f"{server.base}/ready", timeout=1.0).status_code == 200:
                return server
        except httpx.TransportError:
            pass
        time.sleep(0.2)
    server.stop()
    raise RuntimeError(f"the server did not become ready:\n{server.log()}")
