"""A bounded loopback load test: a fixed number of mixed reads and submissions against a real
HTTP server on 127.0.0.1; no errors; latency percentiles printed (not asserted: speed figures
are reported, never gates).

The server is the embedded deployment (``service.server.BackgroundServer``: Werkzeug, threaded;
SQLite store; runs on two executor threads in the same process). Eight client threads send
REQUESTS requests in a fixed mix: per 10 requests, 2 submissions of a new case, 4 record
reads, 2 case lists, 1 health, 1 audit page. The test gives up (fails) if the whole load has
not been sent within BOUND_S seconds; every submitted run must then finish ``succeeded``.
"""

from __future__ import annotations

import os
import statistics
import threading
import time
from concurrent.futures import ThreadPoolExecutor

import pytest
import requests

from tests.integration.invented_cases import distinct_steady_cases

REQUESTS = 1000
CLIENTS = 8
BOUND_S = 60.0
MIX = ("submit", "read_run", "list_cases", "read_run", "health", "submit", "read_run",
       "list_cases", "read_run", "audit")


@pytest.fixture
def served(tmp_path, monkeypatch):
    from service.app import create_app, shutdown_app
    from service.server import BackgroundServer
    from service.store import reset_default_store
    from tests.api.support import person_token

    for key in list(os.environ):
        if key.startswith("FLUXPROOF_"):
            monkeypatch.delenv(key)
    reset_default_store()
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"),
                      "DISPATCH": "embedded", "EMBEDDED_WORKERS": 2})
    store = app.extensions["fluxproof"].store
    tokens = {role: person_token(store, role, f"lin.load-{role}")
              for role in ("engineer", "auditor")}
    server = BackgroundServer(app).start()
    try:
        yield server.url, tokens, app
    finally:
        server.stop()
        shutdown_app(app)
        reset_default_store()


def _percentile(values: list[float], q: float) -> float:
    ordered = sorted(values)
    index = min(len(ordered) - 1, max(0, round(q / 100 * len(ordered)) - 1))
    return ordered[index]


@pytest.mark.slow
def test_mixed_load_on_loopback_has_no_errors(served):
    base_url, tokens, app = served
    engineer = {"Authorization": f"Bearer {tokens['engineer']}"}
    auditor = {"Authorization": f"Bearer {tokens['auditor']}"}
    documents = iter(distinct_steady_cases(REQUESTS, tags=["load"]))
    documents_lock = threading.Lock()
    with requests.Session() as session:
        first = session.post(f"{base_url}/v1/runs", json={"case": next(documents)},
                             headers=engineer, timeout=30)
    assert first.status_code == 202
    run_ids = [first.json()["run_id"]]
    latencies: dict[str, list[float]] = {kind: [] for kind in set(MIX)}
    errors: list[str] = []
    lock = threading.Lock()
    deadline = time.monotonic() + BOUND_S
    counter = iter(range(REQUESTS))

    def client() -> None:
        with requests.Session() as session:
            while time.monotonic() < deadline:
                with lock:
                    n = next(counter, None)
                if n is None:
                    return
                kind = MIX[n % len(MIX)]
                started = time.perf_counter()
                if kind == "submit":
                    with documents_lock:
                        body = {"case": next(documents)}
                    response = session.post(f"{base_url}/v1/runs", json=body,
                                            headers=engineer, timeout=30)
                    expected = 202
                elif kind == "read_run":
                    response = session.get(f"{base_url}/v1/runs/{run_ids[n % len(run_ids)]}",
                                           headers=engineer, timeout=30)
                    expected = 200
                elif kind == "list_cases":
                    response = session.get(f"{base_url}/v1/cases?limit=20", headers=engineer,
                                           timeout=30)
                    expected = 200
                elif kind == "health":
                    response = session.get(f"{base_url}/v1/health", timeout=30)
                    expected = 200
                else:
                    response = session.get(f"{base_url}/v1/audit?limit=50", headers=auditor,
                                           timeout=30)
                    expected = 200
                elapsed = time.perf_counter() - started
                with lock:
                    latencies[kind].append(elapsed)
                    if response.status_code != expected:
                        errors.append(f"{kind}: {response.status_code} {response.text[:200]}")
                    elif kind == "submit":
                        run_ids.append(response.json()["run_id"])

    wall_started = time.perf_counter()
    with ThreadPoolExecutor(max_workers=CLIENTS) as pool:
        for future in [pool.submit(client) for _ in range(CLIENTS)]:
            future.result()
    wall = time.perf_counter() - wall_started
    sent = sum(len(v) for v in latencies.values())
    assert sent == REQUESTS, f"only {sent} of {REQUESTS} requests sent within {BOUND_S} s"
    assert errors == []

    dispatcher = app.extensions["fluxproof"].dispatcher
    dispatcher.wait_idle(timeout=120)
    with requests.Session() as session:
        statuses = [session.get(f"{base_url}/v1/runs/{run_id}", headers=engineer,
                                timeout=30).json()["status"] for run_id in run_ids]
    assert statuses.count("succeeded") == len(run_ids), {s: statuses.count(s) for s in
                                                          set(statuses)}

    everything = [value for values in latencies.values() for value in values]
    lines = [f"LOAD loopback: {REQUESTS} requests, {CLIENTS} clients, {wall:.1f} s, "
             f"{REQUESTS / wall:.0f} req/s, 0 errors, {len(run_ids)} runs all succeeded",
             f"  all        p50 {1e3 * statistics.median(everything):7.1f} ms  "
             f"p95 {1e3 * _percentile(everything, 95):7.1f} ms  "
             f"p99 {1e3 * _percentile(everything, 99):7.1f} ms"]
    for kind in sorted(latencies):
        values = latencies[kind]
        lines.append(f"  {kind:<10} p50 {1e3 * statistics.median(values):7.1f} ms  "
                     f"p95 {1e3 * _percentile(values, 95):7.1f} ms  "
                     f"p99 {1e3 * _percentile(values, 99):7.1f} ms  (n={len(values)})")
    print("\n" + "\n".join(lines))
