"""``deploy/local-stack.sh``: start the stack, run a case through it, stop it, leave nothing."""

from __future__ import annotations

import os
import socket
import subprocess
from pathlib import Path

import pytest
import requests

from tests.integration.invented_cases import two_layer_case
from tests.integration.real_services import PostgresSchema, RedisLease
from tests.integration.worker_processes import (
    REPO_ROOT,
    clean_environment,
    group_members,
    parent_of,
    pid_alive,
)

SCRIPT = REPO_ROOT / "deploy" / "local-stack.sh"


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def _stack(command: str, env: dict[str, str], timeout: float = 150) -> subprocess.CompletedProcess:
    return subprocess.run(["bash", str(SCRIPT), command], env=env, cwd=REPO_ROOT,
                          capture_output=True, text=True, timeout=timeout)


@pytest.fixture
def stack_env(real_services, tmp_path: Path):
    schema = PostgresSchema.create(prefix="fluxproof_it_stack")
    lease = RedisLease.take()
    port = _free_port()
    env = clean_environment({
        "FLUXPROOF_STACK_DIR": str(tmp_path / "stack"),
        "FLUXPROOF_BIND": f"127.0.0.1:{port}",
        "FLUXPROOF_BROKER_URL": lease.url,
        "FLUXPROOF_DATABASE_URL": schema.url,
        "FLUXPROOF_STACK_LEASE_OWNER": lease.owner,
        "FLUXPROOF_STACK_STOP_TIMEOUT": "20",
        "FLUXPROOF_STACK_START_TIMEOUT": "90",
        "WEB_CONCURRENCY": "2",
    })
    try:
        yield env, schema
    finally:
        _stack("stop", env)  # harmless when the test stopped it already
        lease.release()
        schema.drop()


def test_local_stack_starts_runs_a_case_and_stops_cleanly(stack_env):
    from service.client import Client
    from service.store import Store
    from tests.api.support import person_token

    env, schema = stack_env
    stack_dir = Path(env["FLUXPROOF_STACK_DIR"])
    base_url = f"http://{env['FLUXPROOF_BIND']}"

    started = _stack("start", env)
    assert started.returncode == 0, started.stdout + started.stderr
    pid_files = sorted(stack_dir.glob("*.pid"))
    assert [p.stem for p in pid_files] == ["api", "worker-1", "worker-2"]
    pids = {p.stem: int(p.read_text()) for p in pid_files}
    assert all(pid_alive(pid) for pid in pids.values())

    status = _stack("status", env)
    assert status.returncode == 0, status.stdout + status.stderr

    health = requests.get(f"{base_url}/v1/health", timeout=10)
    assert health.status_code == 200
    body = health.json()
    assert body["store"] == {"state": "ok", "mode": "postgresql"}
    assert body["broker"]["state"] == "ok" and body["broker"]["mode"] == "celery"

    # The stack migrated this schema; its processes keep their key and the chain's anchor in
    # the stack's directory (deploy/local-stack.sh).
    store = Store(schema.url, {"DATABASE_URL": schema.url,
                               "SIGNING_KEY_FILE": str(stack_dir / "signing_key.pem"),
                               "AUDIT_ANCHOR_FILE": str(stack_dir / "audit_anchor.jsonl")})
    try:
        token = person_token(store, "engineer", "sol.stack-engineer")
    finally:
        store.dispose()
    with Client(base_url, token) as client:
        run_id = client.submit(two_layer_case(38.0, 1.3e-10, tags=["it-stack"]))
        record = client.wait(run_id, timeout=90)
    assert record["status"] == "succeeded", record.get("error")
    worker_pid = int(record["provenance"]["worker"].rsplit(":", 1)[1])
    assert parent_of(worker_pid) in {pids["worker-1"], pids["worker-2"]}
    assert "POST /v1/runs" in (stack_dir / "access.log").read_text()

    stopped = _stack("stop", env)
    assert stopped.returncode == 0, stopped.stdout + stopped.stderr
    assert not list(stack_dir.glob("*.pid"))
    left = {name: pid for name, pid in pids.items() if pid_alive(pid) or group_members(pid)}
    assert left == {}, f"processes left after stop: {left}"
    with pytest.raises(requests.ConnectionError):
        requests.get(f"{base_url}/v1/health", timeout=5)
    assert _stack("status", env).returncode == 3
    assert os.path.exists(stack_dir / "api.log")
