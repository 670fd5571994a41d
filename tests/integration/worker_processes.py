"""Real Celery worker processes for the integration tests and the service benchmarks.

A :class:`WorkerProcess` is ``fluxproof worker`` started as a subprocess in a session of its
own, with an environment that holds only the settings given (broker, store) plus the
interpreter's basics. Its log goes to a file, which the tests read to know when the worker is
ready and when a given task message was handled. :meth:`WorkerProcess.stop` sends SIGTERM (a
warm shutdown), waits, and then kills the whole process group.
"""

from __future__ import annotations

import os
import re
import signal
import subprocess
import sys
import time
from collections.abc import Mapping
from pathlib import Path

from service.settings import ENV_PREFIX

READY_PATTERN = re.compile(r"celery@\S+ ready\.")
STARTUP_TIMEOUT_S = 60.0
STOP_TIMEOUT_S = 20.0
REPO_ROOT = Path(__file__).resolve().parents[2]


def clean_environment(settings: Mapping[str, str]) -> dict[str, str]:
    """This process's environment without any ``FLUXPROOF_*`` variable, plus ``settings``."""
    env = {key: value for key, value in os.environ.items() if not key.startswith(ENV_PREFIX)}
    env.update(settings)
    env["PYTHONUNBUFFERED"] = "1"
    env.setdefault("PYTHONPATH", str(REPO_ROOT))
    return env


def children_of(pid: int) -> list[int]:
    """Direct children of ``pid`` (Linux ``/proc``)."""
    children: list[int] = []
    task_dir = Path(f"/proc/{pid}/task")
    try:
        for task in task_dir.iterdir():
            text = (task / "children").read_text()
            children.extend(int(part) for part in text.split())
    except (FileNotFoundError, ProcessLookupError):
        return []
    return children


def parent_of(pid: int) -> int | None:
    """The parent pid of ``pid``, or None when there is no such process."""
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith("PPid:"):
                return int(line.split()[1])
    except FileNotFoundError:
        return None
    return None


def pid_alive(pid: int) -> bool:
    """True while ``pid`` exists and is not a zombie."""
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except (FileNotFoundError, IndexError):
        return False
    return state != "Z"


def group_members(pgid: int) -> list[int]:
    """Live processes whose process group is ``pgid``."""
    members = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
        except (FileNotFoundError, IndexError, ProcessLookupError):
            continue
        if fields[0] != "Z" and int(fields[2]) == pgid:
            members.append(int(entry.name))
    return members


class WorkerProcess:
    """One ``fluxproof worker`` subprocess (see module notes)."""

    def __init__(self, settings: Mapping[str, str], log_path: Path, *,
                 concurrency: int = 1) -> None:
        self.settings = dict(settings)
        self.log_path = Path(log_path)
        self.concurrency = concurrency
        self.process: subprocess.Popen[bytes] | None = None

    @property
    def pid(self) -> int:
        assert self.process is not None, "worker not started"
        return self.process.pid

    def start(self) -> WorkerProcess:
        self.log_path.parent.mkdir(parents=True, exist_ok=True)
        log = self.log_path.open("ab")
        try:
            self.process = subprocess.Popen(
                [sys.executable, "-m", "service.cli", "worker",
                 f"--concurrency={self.concurrency}", "--loglevel=INFO"],
                cwd=REPO_ROOT, env=clean_environment(self.settings), stdout=log,
                stderr=subprocess.STDOUT, start_new_session=True)
        finally:
            log.close()
        return self

    def log_text(self) -> str:
        try:
            return self.log_path.read_text(errors="replace")
        except FileNotFoundError:
            return ""

    def wait_ready(self, timeout: float = STARTUP_TIMEOUT_S) -> WorkerProcess:
        """Block until the worker logs that it is ready; raise with its log when it is not."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if READY_PATTERN.search(self.log_text()):
                return self
            if self.process is not None and self.process.poll() is not None:
                raise RuntimeError(f"worker exited with {self.process.returncode} before it "
                                   f"was ready; log:\n{self.log_text()[-4000:]}")
            time.sleep(0.1)
        raise RuntimeError(f"worker not ready after {timeout} s; log:\n"
                           f"{self.log_text()[-4000:]}")

    def pool_pids(self) -> list[int]:
        """The pids of the worker's pool processes (the processes that run tasks)."""
        return children_of(self.pid)

    def terminate(self) -> None:
        """Send SIGTERM (a warm shutdown) without waiting."""
        if self.process is not None and self.process.poll() is None:
            self.process.send_signal(signal.SIGTERM)

    def stop(self, timeout: float = STOP_TIMEOUT_S) -> int | None:
        """SIGTERM, wait up to ``timeout``, then SIGKILL the process group. Returns the exit
        status of the main process."""
        if self.process is None:
            return None
        pgid = self.process.pid
        if self.process.poll() is None:
            self.terminate()
            try:
                self.process.wait(timeout=timeout)
            except subprocess.TimeoutExpired:
                os.killpg(pgid, signal.SIGKILL)
                self.process.wait(timeout=10)
        deadline = time.monotonic() + 5
        while group_members(pgid) and time.monotonic() < deadline:
            time.sleep(0.05)
        if group_members(pgid):
            os.killpg(pgid, signal.SIGKILL)
        return self.process.returncode


def stop_all(workers: list[WorkerProcess], timeout: float = STOP_TIMEOUT_S) -> None:
    """Stop several workers at once: SIGTERM to all, then :meth:`WorkerProcess.stop` each."""
    for worker in workers:
        worker.terminate()
    for worker in workers:
        worker.stop(timeout)


def wait_for_log(workers: list[WorkerProcess], pattern: str, *, count: int = 1,
                 timeout: float = 60.0) -> int:
    """Wait until ``pattern`` (a regular expression) occurs ``count`` times across the logs
    of ``workers``; return the number of occurrences found."""
    regex = re.compile(pattern)
    deadline = time.monotonic() + timeout
    found = 0
    while time.monotonic() < deadline:
        found = sum(len(regex.findall(w.log_text())) for w in workers)
        if found >= count:
            return found
        time.sleep(0.05)
    logs = "\n".join(w.log_text()[-2000:] for w in workers)
    raise AssertionError(f"{pattern!r} seen {found} times, expected {count}, after {timeout} s;"
                         f" logs:\n{logs}")
