"""Bearer tokens: only a digest is stored, and presented tokens are compared in constant time.

The digest is recomputed here with hashlib (SHA-256 of the whole token, the form the module
documents), independently of the code under test.
"""

from __future__ import annotations

import hashlib
import hmac
import inspect
import re

from sqlalchemy import inspect as sa_inspect
from sqlalchemy import text

from tests.api.support import bearer


def _all_stored_text(store) -> str:
    """Every value of every column of every table, as one text."""
    parts = []
    with store.engine.connect() as connection:
        for table in sa_inspect(connection).get_table_names():
            for row in connection.execute(text(f'SELECT * FROM "{table}"')):
                parts.extend(str(value) for value in row)
    return "\n".join(parts)


def test_tokens_are_stored_only_as_sha256_digests(sec_store, sec_tokens):
    from service.store.models import Token

    stored = _all_stored_text(sec_store)
    with sec_store.transaction() as session:
        rows = {row.id: row.sha256 for row in session.query(Token)}
    for token in sec_tokens.values():
        secret = token[len("fpt_"):].split("_", 1)[1]  # the secret itself may hold "_"
        assert token not in stored and secret not in stored
        token_id = token[len("fpt_"):].split("_", 1)[0]
        assert rows[token_id] == hashlib.sha256(token.encode("utf-8")).hexdigest()


def test_presented_tokens_are_compared_with_compare_digest(sec_app, sec_tokens, monkeypatch):
    import service.tokens

    calls: list[tuple[int, int]] = []
    real = hmac.compare_digest

    def observed(a, b):
        calls.append((len(a), len(b)))
        return real(a, b)

    monkeypatch.setattr(service.tokens.hmac, "compare_digest", observed)
    client = sec_app.test_client()
    good = sec_tokens["auditor"]
    wrong_secret = good[:-6] + ("A" * 6 if not good.endswith("A" * 6) else "B" * 6)
    unknown_id = "fpt_0123456789abcdef_" + good.rsplit("_", 1)[1]
    assert client.get("/v1/audit", headers=bearer(good)).status_code == 200
    assert client.get("/v1/audit", headers=bearer(wrong_secret)).status_code == 401
    assert client.get("/v1/audit", headers=bearer(unknown_id)).status_code == 401
    # One comparison per presented token, always of two full-length hex digests, also for an
    # unknown id (so that the answer time does not tell known ids from unknown ones).
    assert calls == [(64, 64)] * 3


def test_the_lookup_never_compares_digests_with_equality():
    import service.tokens

    source = inspect.getsource(service.tokens.identify)
    assert "compare_digest" in source
    assert not re.search(r"sha256\s*[!=]=|[!=]=\s*row\.sha256|token_digest\([^)]*\)\s*[!=]=",
                         source)
