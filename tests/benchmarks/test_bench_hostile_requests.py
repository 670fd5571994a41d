"""Benchmark: the review's hostile documents answered quickly and in little memory.

Target (issue 13, bounded requests): each answered in under 1 s and under 1 GiB resident. Each
document goes through the real app (Flask test client, the embedded default's settings) in one
run; printed per document: the status, the wall time of the request, the peak of the Python
heap during it (tracemalloc, numpy's arrays included) and the process's resident high-water
mark afterwards. Nothing is asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import json
import resource
import time
import tracemalloc

from tests.api.support import bearer, make_case
from tests.security.hostile_cases import long_transient, steep_many_layer_steady

MIB = 2**20


def _hostile_requests() -> list[tuple[str, str, str, bytes | None]]:
    """(label, method, path, body) of each hostile request."""
    document = make_case()
    document["layers"][0]["name"] = "\ud800"
    surrogate = json.dumps(document, ensure_ascii=True).encode()
    return [
        ("JSON nested 100,000 deep", "POST", "/v1/validate",
         ('{"title": ' + "[" * 100_000 + "]" * 100_000 + "}").encode()),
        ("lone surrogate in a layer name", "POST", "/v1/cases", surrogate),
        ("offset 2^64 on /v1/cases", "GET", f"/v1/cases?offset={2**64}", None),
        ("offset 2^64 on /v1/audit", "GET", f"/v1/audit?offset={2**64}", None),
        ("100,000 bad layers", "POST", "/v1/validate",
         json.dumps(make_case(layers=[{}] * 100_000)).encode()),
        ("20 steep Michaelis-Menten layers, steady", "POST", "/v1/cases",
         json.dumps(steep_many_layer_steady()).encode()),
        ("long 20-layer transient", "POST", "/v1/cases", json.dumps(long_transient()).encode()),
    ]


def test_bench_hostile_requests(sec_app, sec_tokens):
    client = sec_app.test_client()
    headers = bearer(sec_tokens["admin"])
    client.post("/v1/validate", data=json.dumps(make_case()), content_type="application/json",
                headers=bearer(sec_tokens["engineer"]))  # warm: the engine's imports
    print()
    print(f"{'hostile request':44s} {'status':>6s} {'time s':>8s} {'heap peak MiB':>14s} "
          f"{'max RSS MiB':>12s} {'body bytes':>11s}")
    for label, method, path, body in _hostile_requests():
        token = sec_tokens["engineer"] if method == "POST" else sec_tokens["admin"]
        tracemalloc.start()
        started = time.perf_counter()
        if method == "POST":
            response = client.post(path, data=body, content_type="application/json",
                                   headers=bearer(token))
        else:
            response = client.get(path, headers=headers)
        elapsed = time.perf_counter() - started
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        print(f"{label:44s} {response.status_code:6d} {elapsed:8.3f} {peak / MIB:14.1f} "
              f"{rss:12.0f} {len(response.data):11d}")
