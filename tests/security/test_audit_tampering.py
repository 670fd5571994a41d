"""Audit tampering is detected over HTTP: a changed event, a removed event, a rewritten head.

Each tampering is done directly in the database (as someone with database access would), and
``GET /v1/audit/verify`` must then report the chain broken at the right event.
"""

from __future__ import annotations

import pytest
from sqlalchemy import func, select, update

from tests.api.support import bearer


def _verify(app, tokens):
    response = app.test_client().get("/v1/audit/verify", headers=bearer(tokens["auditor"]))
    assert response.status_code == 200
    return response.get_json()


@pytest.mark.parametrize("tampering", ["payload", "actor", "delete_middle", "delete_last",
                                       "head"])
def test_tampering_is_reported_at_the_changed_event(sec_app, sec_store, sec_tokens, seeded,
                                                    tampering):
    from service.store.models import AuditEvent, AuditHead

    before = _verify(sec_app, sec_tokens)
    assert before["ok"] is True and before["events"] >= 8
    middle = before["events"] // 2
    with sec_store.transaction() as session:
        last = session.execute(select(func.max(AuditEvent.seq))).scalar_one()
        if tampering == "payload":
            event = session.get(AuditEvent, middle)
            event.payload = {**event.payload, "verdict": "pass", "note": "edited"}
        elif tampering == "actor":
            session.execute(update(AuditEvent).where(AuditEvent.seq == middle)
                            .values(actor="someone.else"))
        elif tampering == "delete_middle":
            session.delete(session.get(AuditEvent, middle))
        elif tampering == "delete_last":
            session.delete(session.get(AuditEvent, last))
        else:
            session.execute(update(AuditHead).values(hash="f" * 64))
    after = _verify(sec_app, sec_tokens)
    assert after["ok"] is False
    expected_seq = {"payload": middle, "actor": middle, "delete_middle": middle,
                    "delete_last": last, "head": None}[tampering]
    if expected_seq is not None:
        assert after["first_broken"]["seq"] == expected_seq, after
    assert after["first_broken"]["reason"]
