"""Benchmark: what the keyed, anchored audit chain costs (issue #13, tamper evidence).

Measured side by side in one run: one event's chain hash by the old rule (plain SHA-256) and
by the keyed rule (HMAC-SHA256, pre-keyed), one checkpoint (Ed25519 signature and one append
to the anchor file), one SQLite transaction writing a token and its event (chained and
checkpointed), and ``verify_chain`` over a store of runs with their records, per run.
Figures printed, nothing asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import statistics
import time

from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

from service import audit
from service.runs import create_run, execute_run
from service.store import Store
from service.store.audit_chain import event_hash
from service.store.audit_seal import AuditSeal, ChainHead
from service.store.migrate import upgrade
from service.tokens import create_token
from tests.api.support import make_case, person_token

#: A run.finished payload as the service writes it (the record hash is an invented value).
PAYLOAD = {"status": "succeeded", "verdict": "pass", "error": None, "attempts": 1,
           "record_sha256": "ab" * 32}
RUNS = 40


def _per_call_seconds(fn, calls: int, repeats: int = 7) -> float:
    """Median over ``repeats`` batches of the time per call."""
    batches = []
    for _ in range(repeats):
        start = time.perf_counter()
        for _ in range(calls):
            fn()
        batches.append((time.perf_counter() - start) / calls)
    return statistics.median(batches)


def test_audit_seal_costs(tmp_path, monkeypatch):
    for key in ("FLUXPROOF_SIGNING_KEY_FILE", "FLUXPROOF_AUDIT_ANCHOR_FILE"):
        monkeypatch.delenv(key, raising=False)
    seal = AuditSeal(Ed25519PrivateKey.generate(), tmp_path / "bench_anchor.jsonl")
    at = "2026-12-05T00:00:00.000000+00:00"
    plain = _per_call_seconds(
        lambda: event_hash("0" * 64, 12, at, "worker", "run.finished", "r" * 36, PAYLOAD), 5000)
    keyed = _per_call_seconds(
        lambda: event_hash("0" * 64, 12, at, "worker", "run.finished", "r" * 36, PAYLOAD,
                           seal.chain_key), 5000)
    head = ChainHead("bench", 12, "ab" * 32, 1)
    checkpoint = _per_call_seconds(lambda: seal.write_checkpoint(head), 300)

    store = Store(f"sqlite:///{tmp_path / 'bench.sqlite3'}")
    try:
        upgrade(store)

        person_token(store, "auditor", "bench.auditor")

        def one_event_transaction() -> None:  # a token stored with its token.created
            create_token(store, login="bench.auditor", actor="bench")

        transaction = _per_call_seconds(one_event_transaction, 50, repeats=5)
        for n in range(RUNS):
            run_id = create_run(store, actor="bench.engineer",
                                document=make_case(title=f"bench {n}"))["run_id"]
            execute_run(run_id, store, actor="bench.worker")
        start = time.perf_counter()
        report = audit.verify_chain(store)
        verify = time.perf_counter() - start
    finally:
        store.dispose()

    print()
    print(f"event hash, plain SHA-256 (before revision 0007): {plain * 1e6:9.2f} us")
    print(f"event hash, HMAC-SHA256 under the chain key:      {keyed * 1e6:9.2f} us")
    print(f"  keyed / plain:                                  {keyed / plain:9.2f}")
    print(f"checkpoint (Ed25519 signature + append):          {checkpoint * 1e6:9.1f} us")
    print(f"SQLite transaction, a token and its event (chained, checkpointed): "
          f"{transaction * 1e3:7.2f} ms")
    print(f"  checkpoint / transaction:                       {checkpoint / transaction:9.2f}")
    print(f"verify_chain, {report.events} events and {RUNS} runs with records: "
          f"{verify * 1e3:7.1f} ms ({verify / RUNS * 1e3:.2f} ms per run)")
    assert report.ok, report.findings
