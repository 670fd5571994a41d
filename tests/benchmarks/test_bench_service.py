"""Benchmarks of the service on the real stack: Redis, PostgreSQL, worker processes, gunicorn.

(a) Batch re-verification of 2,000 stored, distinct, steady cases through Redis and two worker
    processes (one pool process each; this machine has 2 cores), measured from the batch's
    start to the batch closed (its row finished, drift stored), polled every 0.1 s with one
    cheap status read so that the polling does not take CPU from the workers. Three passes in
    one run, side by side: the default
    ``FLUXPROOF_WORKER_PREFETCH_MULTIPLIER`` with no earlier records (no drift to compare), then
    the earlier setting (prefetch 1) and the default again, both comparing every case with
    the records before them, as the nightly batch does. Printed: cases/s end to end (target
    >= 100) and runs lost (target 0), with where the time goes (engine time per case, the rest
    of each run in the worker, batch creation, dispatch) and SQL statements per run.
(b) ``POST /v1/runs`` latency against gunicorn on 127.0.0.1 with two workers solving the
    submitted runs on the same cores. The stated load: an open loop of 2,000 requests offered at
    a fixed 50 requests/s from 8 client threads (40 s; each latency counted from the moment its
    request was due, so a client falling behind shows up as latency). Printed: p50 / p99 (target
    p99 <= 50 ms at that load). For information also a single client (service time) and a closed
    loop of 8 threads sending as fast as they can (which saturates the 2 cores; its p99 is a
    queue length, not a service figure); then a profile of the request in-process.

Figures are printed, never asserted (shared, noisy machine). Only what the benchmark creates is
touched: a leased Redis database and a PostgreSQL schema of its own, dropped at the end.
Run with ``make bench``.
"""

from __future__ import annotations

import cProfile
import io
import os
import pstats
import re
import signal
import socket
import statistics
import subprocess
import sys
import threading
import time
from collections.abc import Iterator
from datetime import datetime
from pathlib import Path

import pytest
import requests

from tests.api.support import app_keys
from tests.integration.invented_cases import distinct_steady_cases
from tests.integration.real_services import (
    PostgresSchema,
    RedisLease,
    ServiceMissing,
    postgres_user,
    require_redis,
)
from tests.integration.support import TEST_SIGNING_KEY_FILE
from tests.integration.worker_processes import (
    REPO_ROOT,
    WorkerProcess,
    clean_environment,
    group_members,
    stop_all,
)

BATCH_CASES = 2000
BATCH_TIMEOUT_S = 300.0
LOAD_REQUESTS = 2000
LOAD_THREADS = 8
OFFERED_RATE = 50.0  # requests per second of the open-loop phase
CLOSED_LOOP_REQUESTS = 1000
LOAD_WALL_LIMIT_S = 60.0
#: The prefetch multiplier of the code before this benchmark's changes (for the side by side).
EARLIER_PREFETCH = 1
SEQUENTIAL_REQUESTS = 200
PROFILE_REQUESTS = 200
BENCH_ACTOR = "bench.service"


@pytest.fixture(scope="module")
def services_present() -> None:
    # Stores built on PostgreSQL from a URL alone (and their workers) find the key here.
    os.environ.setdefault("FLUXPROOF_SIGNING_KEY_FILE", TEST_SIGNING_KEY_FILE)
    try:
        require_redis()
        postgres_user()
    except ServiceMissing as exc:
        if os.environ.get("CI"):
            pytest.fail(f"CI is set and a required service is missing: {exc}", pytrace=False)
        pytest.skip(f"service benchmark needs real Redis and PostgreSQL: {exc}")


@pytest.fixture
def schema(services_present) -> Iterator[PostgresSchema]:
    from service.store import Store
    from service.store.migrate import upgrade

    created = PostgresSchema.create(prefix="fluxproof_bench")
    store = Store(created.url)
    try:
        upgrade(store)
    finally:
        store.dispose()
    yield created
    created.drop()


@pytest.fixture
def lease(services_present) -> Iterator[RedisLease]:
    taken = RedisLease.take()
    yield taken
    taken.release()


def _settings(schema: PostgresSchema, lease: RedisLease) -> dict[str, str]:
    return {"FLUXPROOF_DATABASE_URL": schema.url, "FLUXPROOF_BROKER_URL": lease.url,
            "FLUXPROOF_AUTO_MIGRATE": "false",
            "FLUXPROOF_SIGNING_KEY_FILE": TEST_SIGNING_KEY_FILE}


def _start_workers(schema, lease, log_dir: Path, count: int = 2, *,
                   prefetch: int | None = None, concurrency: int = 1) -> list[WorkerProcess]:
    settings = _settings(schema, lease)
    if prefetch is not None:
        settings["FLUXPROOF_WORKER_PREFETCH_MULTIPLIER"] = str(prefetch)
    workers = [WorkerProcess(settings, log_dir / f"worker-{n}-p{prefetch}-c{concurrency}.log",
                             concurrency=concurrency).start()
               for n in range(1, count + 1)]
    for worker in workers:
        worker.wait_ready()
    return workers


def _percentile(values: list[float], fraction: float) -> float:
    ordered = sorted(values)
    if not ordered:
        return float("nan")
    index = min(len(ordered) - 1, max(0, round(fraction * (len(ordered) - 1))))
    return ordered[index]


def _ms(seconds: float) -> str:
    return f"{seconds * 1e3:.1f} ms"


class StatementCounter:
    """Counts the SQL statements an engine sends (each one a round trip to PostgreSQL), plus
    the pool's connection checkouts (each one a ``SELECT 1`` when ``pool_pre_ping`` is on)."""

    def __init__(self, engine) -> None:
        from sqlalchemy import event

        self.statements = 0
        self.checkouts = 0
        self._engine = engine
        event.listen(engine, "before_cursor_execute", self._statement)
        event.listen(engine.pool, "checkout", self._checkout)

    def _statement(self, *_args) -> None:
        self.statements += 1

    def _checkout(self, *_args) -> None:
        self.checkouts += 1

    def close(self) -> None:
        from sqlalchemy import event

        event.remove(self._engine, "before_cursor_execute", self._statement)
        event.remove(self._engine.pool, "checkout", self._checkout)


def _per_run_statements(store) -> str:
    """SQL statements per execute_run, measured in-process: a lone run and a batch run."""
    from service.batches import start_batch
    from service.runs import create_run, execute_run

    documents = distinct_steady_cases(40, tags=["bench-count"])
    lone = [create_run(store, actor=BENCH_ACTOR, document=d)["run_id"] for d in documents[:10]]
    execute_run(lone[0], store)
    counter = StatementCounter(store.engine)
    try:
        for run_id in lone[1:]:
            execute_run(run_id, store)
        lone_figures = (counter.statements / 9, counter.checkouts / 9)
        for document in documents[10:]:
            create_run(store, actor=BENCH_ACTOR, document=document)
        batch = start_batch(store, actor=BENCH_ACTOR, tag="bench-count")
        counter.statements = counter.checkouts = 0
        for run_id in batch["run_ids"]:
            execute_run(run_id, store)
        runs = len(batch["run_ids"])
        batch_figures = (counter.statements / runs, counter.checkouts / runs)
    finally:
        counter.close()
    return (f"  SQL per execute_run (in-process count): lone run {lone_figures[0]:.1f} statements"
            f" + {lone_figures[1]:.1f} pool checkouts; run of a batch of {runs} "
            f"{batch_figures[0]:.1f} statements + {batch_figures[1]:.1f} checkouts")


# --- (a) batch re-verification ----------------------------------------------------------------


def _store_cases(store, documents: list[dict]) -> None:
    from service.cases import store_case_in, validate_document

    for start in range(0, len(documents), 200):
        with store.transaction() as session:
            for document in documents[start:start + 200]:
                validate_document(document)
                store_case_in(session, document, BENCH_ACTOR)


def _run_and_wait(store, dispatcher, *, tag: str, timeout: float) -> dict:
    """Start a batch of the cases tagged ``tag``, send it, wait for it; return figures."""
    from service.batches import get_batch, start_batch

    started = time.perf_counter()
    batch = start_batch(store, actor=BENCH_ACTOR, tag=tag)
    queued = time.perf_counter()
    dispatcher.send(batch["run_ids"])
    sent = time.perf_counter()
    deadline = sent + timeout
    # Poll the batch row's own status (one cheap read), not the whole batch document: that is
    # ~11 ms of CPU for 2,000 runs, which ten times a second would take a tenth of a core from
    # the workers being measured. The row says "finished" once the batch is closed, its drift
    # stored, in the same commit.
    from sqlalchemy import select

    from service.store.models import Batch

    status_of = select(Batch.status).where(Batch.id == batch["batch_id"])
    while store.read_scalar(status_of) != "finished" and time.perf_counter() <= deadline:
        time.sleep(0.1)
    finished = time.perf_counter()
    state = get_batch(store, batch["batch_id"])
    return {"batch": batch, "state": state, "create_s": queued - started,
            "send_s": sent - queued, "total_s": finished - started}


def _run_breakdown(store, batch_id: str) -> dict:
    from sqlalchemy import func, select

    from service.store.models import AuditEvent, Run

    with store.transaction() as session:
        runs = session.execute(select(Run).where(Run.batch_id == batch_id)).scalars().all()
        run_ids = [r.id for r in runs]
        finished_events = session.execute(
            select(func.count()).select_from(AuditEvent)
            .where(AuditEvent.kind == "run.finished", AuditEvent.subject.in_(run_ids))
        ).scalar_one()
        engine, in_worker, workers = [], [], set()
        for run in runs:
            if run.record and run.started_at and run.finished_at:
                provenance = run.record.get("provenance") or {}
                engine.append((datetime.fromisoformat(provenance["finished_at"])
                               - datetime.fromisoformat(provenance["started_at"])
                               ).total_seconds())
                in_worker.append((run.finished_at - run.started_at).total_seconds())
                workers.add(provenance.get("worker"))
        statuses = [r.status for r in runs]
    return {"runs": len(runs), "finished_events": finished_events, "engine": engine,
            "in_worker": in_worker, "workers": workers,
            "succeeded": statuses.count("succeeded"), "failed": statuses.count("failed"),
            "unfinished": sum(s not in ("succeeded", "failed") for s in statuses)}


TASK_RUNTIME = re.compile(r"fluxproof\.execute_run\[[^\]]+\] succeeded in ([0-9.e-]+)s")


def _task_runtimes(workers: list[WorkerProcess], offsets: list[int]) -> list[float]:
    """Celery's own runtime of each execute_run task (in the pool process), from the logs."""
    return [float(value) for worker, offset in zip(workers, offsets, strict=True)
            for value in TASK_RUNTIME.findall(worker.log_text()[offset:])]


def test_batch_reverification_throughput(schema, lease, tmp_path):
    from service.dispatch import CeleryDispatcher
    from service.settings import DEFAULTS, settings_from_env
    from service.store import Store

    store = Store(schema.url)
    settings = settings_from_env(clean_environment(_settings(schema, lease)))
    dispatcher = CeleryDispatcher(settings)
    workers: list[WorkerProcess] = []
    default_prefetch = int(DEFAULTS["WORKER_PREFETCH_MULTIPLIER"])
    try:
        tag = "bench-reverify"
        documents = distinct_steady_cases(BATCH_CASES, tags=[tag])
        stored_at = time.perf_counter()
        _store_cases(store, documents)
        store_s = time.perf_counter() - stored_at
        # A few other cases to warm every pool process up (imports, unit registry) first.
        _store_cases(store, distinct_steady_cases(8, tags=["bench-warmup"])[::-1])

        passes = []
        for label, prefetch, concurrency in (
                (f"prefetch {default_prefetch} (default), first pass (no baseline)",
                 default_prefetch, 1),
                (f"prefetch {EARLIER_PREFETCH} (earlier setting), drift vs the pass before",
                 EARLIER_PREFETCH, 1),
                (f"prefetch {default_prefetch} (default), drift vs the pass before",
                 default_prefetch, 1),
                (f"for information: 2 pool processes per worker (4 in all), prefetch "
                 f"{default_prefetch}, drift vs the pass before", default_prefetch, 2)):
            workers = _start_workers(schema, lease, tmp_path, prefetch=prefetch,
                                     concurrency=concurrency)
            warm = _run_and_wait(store, dispatcher, tag="bench-warmup", timeout=120)
            assert warm["state"]["status"] == "finished", warm["state"]["counts"]
            offsets = [len(w.log_text()) for w in workers]
            figures = _run_and_wait(store, dispatcher, tag=tag, timeout=BATCH_TIMEOUT_S)
            figures["label"] = label
            figures["task_s"] = _task_runtimes(workers, offsets)
            figures["breakdown"] = _run_breakdown(store, figures["batch"]["batch_id"])
            figures["queue_left"] = lease.client().llen("celery")
            passes.append(figures)
            stop_all(workers)
            workers = []
        statements = _per_run_statements(store)
    finally:
        stop_all(workers)
        dispatcher.shutdown()
        store.dispose()

    print(f"\n[bench service] batch re-verification: {BATCH_CASES} stored distinct steady cases"
          f" (single- and two-layer slabs), Redis + 2 worker processes x 1 pool process, "
          f"PostgreSQL; {os.cpu_count()} cores")
    print(f"  storing the {BATCH_CASES} cases (validation + insert + audit): {store_s:.1f} s")
    for figures in passes:
        b = figures["breakdown"]
        n = figures["batch"]["run_ids"]
        rate = len(n) / figures["total_s"]
        lost = len(n) - b["succeeded"] - b["failed"]
        print(f"  {figures['label']}: {len(n)} runs in {figures['total_s']:.1f} s end to end = "
              f"{rate:.0f} cases/s (target >= 100); lost {lost} (target 0); succeeded "
              f"{b['succeeded']}, failed {b['failed']}, run.finished events "
              f"{b['finished_events']}, drifted {len(figures['state']['drifted'])}, batch "
              f"{figures['state']['status']}, messages left in the queue "
              f"{figures['queue_left']}")
        if b["engine"]:
            print(f"    create batch {figures['create_s']:.2f} s, send {figures['send_s']:.2f} s; "
                  f"per run: engine median {_ms(statistics.median(b['engine']))}, in worker "
                  f"(claim..store) median {_ms(statistics.median(b['in_worker']))} p99 "
                  f"{_ms(_percentile(b['in_worker'], 0.99))}; wall per run per pool process "
                  f"{_ms(figures['total_s'] * len(b['workers']) / len(n))}; whole task in "
                  f"the pool process "
                  f"(Celery's figure) median {_ms(statistics.median(figures['task_s']))}; "
                  f"pool processes used {len(b['workers'])}")
    if len(passes) >= 3:
        earlier, now = passes[1], passes[2]
        print(f"  side by side (both with drift): prefetch {default_prefetch} / prefetch "
              f"{EARLIER_PREFETCH} end-to-end rate = "
              f"{earlier['total_s'] / now['total_s']:.2f}x")
    print(statements)
    print(f"  load average during the run (1, 5, 15 min): {os.getloadavg()}")


# --- (b) POST /v1/runs latency ----------------------------------------------------------------


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def _start_gunicorn(schema, lease, log_dir: Path, port: int) -> subprocess.Popen:
    keys = {f"FLUXPROOF_{name}": value
            for name, value in app_keys(Path(TEST_SIGNING_KEY_FILE).parent).items()}
    env = clean_environment({**_settings(schema, lease), **keys,
                             "FLUXPROOF_BIND": f"127.0.0.1:{port}",
                             "FLUXPROOF_ACCESS_LOG": str(log_dir / "access.log"),
                             "FLUXPROOF_ERROR_LOG": str(log_dir / "api.log")})
    process = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "-c", str(REPO_ROOT / "deploy" / "gunicorn.conf.py"),
         "service.wsgi:app"], cwd=REPO_ROOT, env=env, start_new_session=True,
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        try:
            if requests.get(f"http://127.0.0.1:{port}/v1/health", timeout=10).status_code == 200:
                return process
        except requests.RequestException:
            pass
        if process.poll() is not None:
            break
        time.sleep(0.2)
    _stop_process(process)
    raise RuntimeError(f"gunicorn did not become healthy; see {log_dir / 'api.log'}")


def _stop_process(process: subprocess.Popen) -> None:
    if process.poll() is None:
        process.send_signal(signal.SIGTERM)
        try:
            process.wait(timeout=30)
        except subprocess.TimeoutExpired:
            os.killpg(process.pid, signal.SIGKILL)
            process.wait(timeout=10)
    if group_members(process.pid):
        os.killpg(process.pid, signal.SIGKILL)


def _load(url: str, token: str, documents: list[dict], threads: int = LOAD_THREADS,
          rate: float | None = None) -> dict:
    """POST each document once from ``threads`` threads; latencies of the 202 answers.

    With ``rate`` (requests/s) the load is an open loop: request ``i`` is due at ``i / rate``
    seconds after the start and its latency is counted from then, so a request that waits for
    a free client thread counts that wait. Without it every thread sends its next request as
    soon as the last one is answered (closed loop).
    """
    latencies: list[float] = []
    late: list[float] = []
    errors: list[str] = []
    lock = threading.Lock()
    cursor = iter(range(len(documents)))
    started = time.perf_counter()
    deadline = started + LOAD_WALL_LIMIT_S

    def client() -> None:
        with requests.Session() as session:
            session.headers["Authorization"] = f"Bearer {token}"
            while time.perf_counter() < deadline:
                with lock:
                    index = next(cursor, None)
                if index is None:
                    return
                due = time.perf_counter() if rate is None else started + index / rate
                wait = due - time.perf_counter()
                if wait > 0:
                    time.sleep(wait)
                sent = time.perf_counter()
                response = session.post(f"{url}/v1/runs", json={"case": documents[index]},
                                        timeout=30)
                answered = time.perf_counter()
                with lock:
                    if response.status_code == 202:
                        latencies.append(answered - due)
                        late.append(max(0.0, sent - due))
                    else:
                        errors.append(f"{response.status_code}: {response.text[:200]}")

    pool = [threading.Thread(target=client) for _ in range(threads)]
    for thread in pool:
        thread.start()
    for thread in pool:
        thread.join()
    return {"latencies": latencies, "late": late, "errors": errors,
            "wall_s": time.perf_counter() - started, "offered": len(documents)}


def _server_times(access_log: Path, skip_lines: int) -> tuple[list[float], int]:
    lines = access_log.read_text().splitlines()
    times = [int(line.rsplit(" ", 1)[1].removesuffix("us")) / 1e6
             for line in lines[skip_lines:] if '"POST /v1/runs ' in line]
    return times, len(lines)


def _profile_in_process(schema, lease) -> str:
    from service.app import create_app, shutdown_app
    from tests.api.support import person_token

    app = create_app({"TESTING": True, "DATABASE_URL": schema.url, "BROKER_URL": lease.url,
                      "DISPATCH": "celery", "AUTO_MIGRATE": False})
    try:
        store = app.extensions["fluxproof"].store
        token = person_token(store, "engineer", "bench.profile")
        client = app.test_client()
        headers = {"Authorization": f"Bearer {token}"}
        documents = distinct_steady_cases(PROFILE_REQUESTS + 20, tags=["bench-profile"])
        for document in documents[:20]:
            client.post("/v1/runs", json={"case": document}, headers=headers)
        counter = StatementCounter(store.engine)
        started = time.perf_counter()
        for document in documents[20:20 + PROFILE_REQUESTS // 2]:
            client.post("/v1/runs", json={"case": document}, headers=headers)
        unprofiled = (time.perf_counter() - started) / (PROFILE_REQUESTS // 2)
        counter.close()
        statements = counter.statements / (PROFILE_REQUESTS // 2)
        checkouts = counter.checkouts / (PROFILE_REQUESTS // 2)
        profiler = cProfile.Profile()
        started = time.perf_counter()
        profiler.enable()
        for document in documents[20 + PROFILE_REQUESTS // 2:]:
            client.post("/v1/runs", json={"case": document}, headers=headers)
        profiler.disable()
        per_request = (time.perf_counter() - started) / (PROFILE_REQUESTS // 2)
    finally:
        shutdown_app(app)
    out = io.StringIO()
    stats = pstats.Stats(profiler, stream=out)
    stats.sort_stats("cumulative").print_stats(
        r"(service|schemas|sqlalchemy/orm/session|kombu/messaging|celery/app/base|"
        r"psycopg/cursor|redis/client|werkzeug/test|marshmallow/schema|pint)", 22)
    lines = [line for line in out.getvalue().splitlines() if line.strip()]
    table = [line for line in lines if "/" in line or "ncalls" in line]
    return (f"  in-process, Flask test client, same PostgreSQL and Redis, one thread: "
            f"{_ms(unprofiled)} per POST /v1/runs, {statements:.1f} SQL statements + "
            f"{checkouts:.1f} pool checkouts each; then {PROFILE_REQUESTS // 2} more under "
            f"cProfile ({_ms(per_request)} each), top by cumulative time:\n    "
            + "\n    ".join(table[:24]))


def test_post_runs_latency_under_loopback_load(schema, lease, tmp_path):
    from service.store import Store
    from tests.api.support import person_token

    store = Store(schema.url)
    try:
        token = person_token(store, "engineer", "bench.load")
    finally:
        store.dispose()
    port = _free_port()
    url = f"http://127.0.0.1:{port}"
    gunicorn = _start_gunicorn(schema, lease, tmp_path, port)
    phases = []
    workers: list[WorkerProcess] = []
    access_log = tmp_path / "access.log"
    try:
        warm = distinct_steady_cases(40, tags=["bench-load-warmup"])
        _load(url, token, warm)
        _times, seen = _server_times(access_log, 0)
        workers = _start_workers(schema, lease, tmp_path)
        for label, clients, count, rate in (
                ("1 client thread, sequential (service time), 2 workers solving", 1,
                 SEQUENTIAL_REQUESTS, None),
                (f"STATED LOAD: open loop, {LOAD_REQUESTS} requests offered at "
                 f"{OFFERED_RATE:.0f} req/s from {LOAD_THREADS} client threads, 2 workers "
                 "solving", LOAD_THREADS, LOAD_REQUESTS, OFFERED_RATE),
                (f"for information: closed loop, {LOAD_THREADS} client threads as fast as "
                 f"they can ({CLOSED_LOOP_REQUESTS} requests), 2 workers solving",
                 LOAD_THREADS, CLOSED_LOOP_REQUESTS, None)):
            documents = distinct_steady_cases(count, tags=[f"bench-load-{len(phases)}"])
            result = _load(url, token, documents, threads=clients, rate=rate)
            time.sleep(0.5)  # the access log is written after the response
            result["server"], seen = _server_times(access_log, seen)
            result["label"] = label
            phases.append(result)
    finally:
        stop_all(workers)
        _stop_process(gunicorn)

    web_workers = os.environ.get("WEB_CONCURRENCY") or f"{2 * (os.cpu_count() or 1) + 1}"
    print(f"\n[bench service] POST /v1/runs (a new distinct case each, stored + queued to Redis)"
          f" against gunicorn on 127.0.0.1 ({web_workers} sync workers, {os.cpu_count()} cores),"
          f" PostgreSQL store, 2 worker processes solving the runs on the same cores; at most "
          f"{LOAD_WALL_LIMIT_S:.0f} s per phase")
    for result in phases:
        lat = result["latencies"]
        server = result["server"]
        print(f"  {result['label']}: {len(lat)} of {result['offered']} answered 202 in "
              f"{result['wall_s']:.1f} s ({len(lat) / result['wall_s']:.0f} req/s), errors "
              f"{len(result['errors'])}; client p50 {_ms(_percentile(lat, 0.5))}, p90 "
              f"{_ms(_percentile(lat, 0.9))}, p99 {_ms(_percentile(lat, 0.99))} (target p99 <= "
              f"50 ms at the stated load), max {_ms(max(lat))}; sent late (no free client "
              f"thread) p99 {_ms(_percentile(result['late'], 0.99))}; inside gunicorn p50 "
              f"{_ms(_percentile(server, 0.5))}, p99 {_ms(_percentile(server, 0.99))}")
        for error in result["errors"][:3]:
            print(f"    error: {error}")
    lease.clean()
    print(_profile_in_process(schema, lease))
    print(f"  load average during the run (1, 5, 15 min): {os.getloadavg()}")
