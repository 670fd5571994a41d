"""Processes the fault tests start and break: their own redis-server, and the local stack.

* :class:`OwnRedis`: a ``redis-server`` on a free port of 127.0.0.1 with no persistence
  (``--save "" --appendonly no``), so that a restart brings it back empty: what a broker
  without its data looks like after a crash.
* :class:`LocalStack`: ``deploy/local-stack.sh start|stop`` on a PostgreSQL schema of the
  test's own and a broker URL the test chooses; the API under gunicorn, Celery worker nodes and
  beat.

Both stop only what they started, by pid.
"""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from tests.integration.support import TEST_SIGNING_KEY_FILE
from tests.integration.worker_processes import (
    REPO_ROOT,
    children_of,
    clean_environment,
    group_members,
    pid_alive,
)

STACK_SCRIPT = REPO_ROOT / "deploy" / "local-stack.sh"


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


class OwnRedis:
    """A redis-server of this test alone (see module notes)."""

    def __init__(self, directory: Path, port: int | None = None) -> None:
        self.directory = Path(directory)
        self.port = port or free_port()
        self.process: subprocess.Popen[bytes] | None = None
        self.binary = shutil.which("redis-server")

    @property
    def url(self) -> str:
        return f"redis://127.0.0.1:{self.port}/0"

    def start(self, timeout: float = 15.0) -> OwnRedis:
        if self.binary is None:
            raise FileNotFoundError("redis-server is not on PATH")
        self.directory.mkdir(parents=True, exist_ok=True)
        log = (self.directory / "redis.log").open("ab")
        try:
            self.process = subprocess.Popen(
                [self.binary, "--port", str(self.port), "--bind", "127.0.0.1",
                 "--save", "", "--appendonly", "no", "--dir", str(self.directory),
                 "--daemonize", "no", "--protected-mode", "yes"],
                stdout=log, stderr=subprocess.STDOUT, start_new_session=True)
        finally:
            log.close()
        self.wait_ping(timeout)
        return self

    def client(self):
        import redis

        return redis.Redis(host="127.0.0.1", port=self.port, socket_timeout=3,
                           socket_connect_timeout=3)

    def wait_ping(self, timeout: float) -> None:
        deadline = time.monotonic() + timeout
        last: Exception | None = None
        while time.monotonic() < deadline:
            try:
                if self.client().ping():
                    return
            except Exception as exc:  # noqa: BLE001 - not up yet
                last = exc
            if self.process is not None and self.process.poll() is not None:
                break
            time.sleep(0.05)
        raise RuntimeError(f"redis-server on port {self.port} did not answer PING: {last}; "
                           f"log: {(self.directory / 'redis.log').read_text()[-2000:]}")

    def kill(self) -> None:
        """SIGKILL the server: every queued and unacknowledged message is gone."""
        if self.process is not None and self.process.poll() is None:
            self.process.send_signal(signal.SIGKILL)
            self.process.wait(timeout=10)

    def restart_empty(self) -> None:
        self.kill()
        self.start()

    def stop(self) -> None:
        if self.process is not None and self.process.poll() is None:
            self.process.terminate()
            try:
                self.process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait(timeout=10)


@dataclass
class LocalStack:
    """``deploy/local-stack.sh`` with settings of the test's own (see module notes)."""

    stack_dir: Path
    database_url: str
    broker_url: str
    lease_owner: str
    workers: int = 2
    beat: bool = True
    extra_env: dict[str, str] = field(default_factory=dict)
    port: int = field(default_factory=free_port)

    @property
    def base_url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def env(self) -> dict[str, str]:
        settings = {
            "FLUXPROOF_STACK_DIR": str(self.stack_dir),
            "FLUXPROOF_BIND": f"127.0.0.1:{self.port}",
            "FLUXPROOF_BROKER_URL": self.broker_url,
            "FLUXPROOF_DATABASE_URL": self.database_url,
            "FLUXPROOF_STACK_LEASE_OWNER": self.lease_owner,
            "FLUXPROOF_STACK_WORKERS": str(self.workers),
            "FLUXPROOF_STACK_BEAT": "1" if self.beat else "0",
            "FLUXPROOF_STACK_STOP_TIMEOUT": "20",
            "FLUXPROOF_STACK_START_TIMEOUT": "90",
            # The key the test's own stores chain with (one key per installation).
            "FLUXPROOF_SIGNING_KEY_FILE": TEST_SIGNING_KEY_FILE,
            "WEB_CONCURRENCY": "2",
        }
        settings.update(self.extra_env)
        return clean_environment(settings)

    def _run(self, command: str, timeout: float = 180) -> subprocess.CompletedProcess[str]:
        return subprocess.run(["bash", str(STACK_SCRIPT), command], env=self.env(),
                              cwd=REPO_ROOT, capture_output=True, text=True, timeout=timeout)

    def start(self) -> LocalStack:
        done = self._run("start")
        if done.returncode != 0:
            raise RuntimeError(f"local-stack.sh start failed ({done.returncode}):\n"
                               f"{done.stdout}\n{done.stderr}\n{self.logs_tail()}")
        return self

    def stop(self) -> subprocess.CompletedProcess[str]:
        return self._run("stop")

    def pid(self, name: str) -> int:
        return int((self.stack_dir / f"{name}.pid").read_text())

    def worker_names(self) -> list[str]:
        return [f"worker-{n}" for n in range(1, self.workers + 1)]

    def pool_pids(self, name: str) -> list[int]:
        """Pool processes (they run the tasks) of one worker node."""
        return children_of(self.pid(name))

    def log(self, name: str) -> str:
        try:
            return (self.stack_dir / f"{name}.log").read_text(errors="replace")
        except FileNotFoundError:
            return ""

    def logs_tail(self, chars: int = 3000) -> str:
        parts = []
        for path in sorted(self.stack_dir.glob("*.log")):
            parts.append(f"--- {path.name}\n{path.read_text(errors='replace')[-chars:]}")
        return "\n".join(parts)

    def leftover_processes(self, pids: dict[str, int]) -> dict[str, int]:
        return {name: pid for name, pid in pids.items() if pid_alive(pid) or group_members(pid)}


def wait_until(predicate: Any, timeout: float, interval: float = 0.2,
               message: str = "condition") -> float:
    """Poll ``predicate`` until true; return the seconds waited; AssertionError on timeout."""
    started = time.monotonic()
    while True:
        if predicate():
            return time.monotonic() - started
        if time.monotonic() - started > timeout:
            raise AssertionError(f"{message} not reached within {timeout} s")
        time.sleep(interval)


def kill_pid(pid: int) -> None:
    os.kill(pid, signal.SIGKILL)
