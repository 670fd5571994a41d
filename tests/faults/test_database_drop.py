"""The database connection dropped under load: the API answers 503 problem documents (never a
500, never a hang) and nothing is half-written; when the database is back, so is the API.

The API (a real HTTP server on 127.0.0.1, runs executed inline after their commit) reaches
PostgreSQL through a TCP proxy of the test's own (:mod:`tests.faults.tcp_proxy`). While
clients submit cases and runs and read them, the proxy drops every connection and refuses new
ones; later it listens again.
"""

from __future__ import annotations

import threading
import time
import uuid
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest
import requests
from sqlalchemy import func, select

from tests.api.support import bearer
from tests.faults.support import create_tokens
from tests.faults.tcp_proxy import TcpProxy
from tests.integration.invented_cases import distinct_steady_cases
from tests.integration.real_services import POSTGRES_HOST, POSTGRES_PORT
from tests.integration.support import TEST_SIGNING_KEY_FILE

ALLOWED_DURING_FAULT = {200, 201, 202, 503}


@pytest.fixture
def proxied_api(pg_schema, migrated_store, monkeypatch, tmp_path):
    from service.app import create_app, shutdown_app
    from service.server import BackgroundServer
    from tests.api.support import app_keys

    for key in list(__import__("os").environ):
        if key.startswith("FLUXPROOF_"):
            monkeypatch.delenv(key)
    proxy = TcpProxy(POSTGRES_HOST, POSTGRES_PORT).start()
    app = create_app({"DATABASE_URL": proxy.url_for(pg_schema.user, pg_schema.name),
                      "AUTO_MIGRATE": False, "DISPATCH": "inline",
                      **app_keys(Path(TEST_SIGNING_KEY_FILE).parent)})
    server = BackgroundServer(app).start()
    try:
        yield server.url, proxy
    finally:
        server.stop()
        shutdown_app(app)
        proxy.stop()


def _invariants(store) -> dict[str, int]:
    """Counts that must agree if every write was whole: each case and run with its event."""
    from service.audit import verify_chain
    from service.store.models import AuditEvent, Case, Run

    with store.transaction() as session:
        def count(query):
            return session.execute(query).scalar_one()

        figures = {
            "cases": count(select(func.count()).select_from(Case)),
            "case_events": count(select(func.count()).select_from(AuditEvent)
                                 .where(AuditEvent.kind == "case.stored")),
            "runs": count(select(func.count()).select_from(Run)),
            "queued_events": count(select(func.count()).select_from(AuditEvent)
                                   .where(AuditEvent.kind == "run.queued")),
            "finished_runs": count(select(func.count()).select_from(Run)
                                   .where(Run.status.in_(("succeeded", "failed")))),
            "finished_events": count(select(func.count()).select_from(AuditEvent)
                                     .where(AuditEvent.kind == "run.finished")),
            "succeeded_without_record": count(
                select(func.count()).select_from(Run)
                .where(Run.status == "succeeded", Run.record.is_(None))),
        }
    figures["chain_ok"] = int(verify_chain(store).ok)
    return figures


def test_dropped_database_connection_gives_503_and_leaves_nothing_half_written(
        proxied_api, migrated_store):
    base_url, proxy = proxied_api
    store = migrated_store
    tokens = create_tokens(store)
    engineer = bearer(tokens["engineer"])
    tag = f"fault-db-{uuid.uuid4().hex[:8]}"
    documents = iter(distinct_steady_cases(4000, tags=[tag]))
    documents_lock = threading.Lock()

    first = requests.post(f"{base_url}/v1/runs", json={"case": next(documents)},
                          headers=engineer, timeout=30)
    assert first.status_code == 202, first.text
    accepted_runs = [first.json()["run_id"]]
    outcomes: list[tuple[str, int, str]] = []
    outcomes_lock = threading.Lock()
    stop = threading.Event()

    def client_loop(worker: int) -> None:
        with requests.Session() as session:
            n = 0
            while not stop.is_set():
                n += 1
                kind = ("submit_run", "store_case", "read_run", "list_cases")[(n + worker) % 4]
                try:
                    if kind in ("submit_run", "store_case"):
                        with documents_lock:
                            document = next(documents)
                        path = "/v1/runs" if kind == "submit_run" else "/v1/cases"
                        body = {"case": document} if kind == "submit_run" else document
                        response = session.post(base_url + path, json=body, headers=engineer,
                                                timeout=30)
                    elif kind == "read_run":
                        response = session.get(f"{base_url}/v1/runs/{accepted_runs[0]}",
                                               headers=engineer, timeout=30)
                    else:
                        response = session.get(f"{base_url}/v1/cases?limit=5",
                                               headers=engineer, timeout=30)
                except requests.RequestException as exc:
                    with outcomes_lock:
                        outcomes.append((kind, -1, repr(exc)))
                    continue
                with outcomes_lock:
                    outcomes.append((kind, response.status_code,
                                     response.headers.get("Content-Type", "")))
                    if kind == "submit_run" and response.status_code == 202:
                        accepted_runs.append(response.json()["run_id"])
                    if response.status_code == 503:
                        problem = response.json()
                        assert problem["status"] == 503 and problem["type"].endswith(
                            "/store-unavailable"), problem

    with ThreadPoolExecutor(max_workers=4) as pool:
        futures = [pool.submit(client_loop, w) for w in range(4)]
        time.sleep(1.5)
        cut_at = len(outcomes)
        proxy.cut()
        time.sleep(2.0)
        health = requests.get(f"{base_url}/v1/health", timeout=30)
        during = len(outcomes)
        proxy.restore()
        time.sleep(2.0)
        stop.set()
        for future in futures:
            future.result()

    statuses = [status for _kind, status, _ctype in outcomes]
    assert set(statuses) <= ALLOWED_DURING_FAULT, sorted(set(statuses))
    fault_window = statuses[cut_at:during]
    assert 503 in fault_window, f"no 503 while the store was cut: {set(fault_window)}"
    problems = [ctype for _k, status, ctype in outcomes if status == 503]
    assert all(ctype.startswith("application/problem+json") for ctype in problems)
    assert health.status_code == 503
    assert health.json()["store"]["state"] == "unavailable"

    # The database is back: the API answers again without a restart.
    after = requests.post(f"{base_url}/v1/runs", json={"case": next(documents)},
                          headers=engineer, timeout=30)
    assert after.status_code == 202, after.text
    assert requests.get(f"{base_url}/v1/health", timeout=30).status_code == 200

    figures = _invariants(store)
    assert figures["chain_ok"] == 1
    assert figures["cases"] == figures["case_events"]
    assert figures["runs"] == figures["queued_events"]
    assert figures["finished_runs"] == figures["finished_events"]
    assert figures["succeeded_without_record"] == 0
    from service.store.models import Run

    with store.transaction() as session:
        stored = set(session.execute(select(Run.id)).scalars())
    assert set(accepted_runs) <= stored, "a run answered 202 is missing from the store"
    print(f"\nFAULT database drop: {len(statuses)} requests, {statuses.count(503)} answered "
          f"503 problem documents, 0 other errors; {figures['runs']} runs and "
          f"{figures['cases']} cases each with its audit event, chain intact")
