"""Electronic signatures over the API (21 CFR Part 11 §11.50, §11.70, §11.100, §11.200).

Findings of issue 13 each test answers: no meaning of signature and no re-authentication at
signing; the case's author could sign a re-verification of their own case; a run whose verdict
is ``fail`` could be approved; a case loosening a limit to 1e6 passed with no mark. The
signature is the server's Ed25519 signature (checked with the published key, and failing on
any change of the record or of the signature) of the printed name, UTC time and meaning, bound
to the SHA-256 of the record.
"""

from __future__ import annotations

import pytest
from sqlalchemy import text

import worker.engine
from service.audit import list_events
from service.report.text import render_text
from service.runs import get_run_and_case
from service.signoffs import record_sha256, verify_signature
from tests.api.support import (
    SIGN,
    TEST_PASSWORD,
    bearer,
    controlled_result,
    count_rows,
    make_case,
    person_token,
    wait_for_run,
)


def _submit(client, token, case=None) -> str:
    response = client.post("/v1/runs", json={"case": case or make_case()},
                           headers=bearer(token))
    assert response.status_code == 202, response.get_json()
    return response.get_json()["run_id"]


def _sign(client, token, run_id, **body):
    return client.post(f"/v1/runs/{run_id}/signoffs",
                       json={"decision": "approved", "comment": "figures checked", **SIGN,
                             **body}, headers=bearer(token))


def test_the_signature_carries_name_meaning_time_and_verifies_with_the_published_key(
        client, store, tokens, controlled_engine):
    run_id = _submit(client, tokens["engineer"])
    reviewer = person_token(store, "reviewer", "rhea.signer", name="Rhea Signer")
    response = _sign(client, reviewer, run_id, meaning="responsibility")
    assert response.status_code == 201, response.get_json()
    signed = response.get_json()
    assert (signed["name"], signed["reviewer"], signed["meaning"]) == (
        "Rhea Signer", "rhea.signer", "responsibility")
    assert signed["at"].endswith("+00:00")  # UTC
    assert "password" not in signed
    key = client.get("/v1/meta/signing-key").get_json()
    assert key["algorithm"] == "Ed25519" and signed["key_id"] == key["key_id"]
    record = client.get(f"/v1/runs/{run_id}", headers=bearer(tokens["auditor"])).get_json()
    (stored,) = record["signoffs"]
    assert verify_signature(record, stored, key["public_key_pem"])
    # Any change of the record or of the signature, and it no longer verifies.
    changed = dict(record, quantities={"flux_outer": {"value": 9.9, "unit": "mol/(m^2*s)"}})
    assert not verify_signature(changed, stored, key["public_key_pem"])
    for field, value in (("name", "Someone Else"), ("meaning", "review"),
                         ("decision", "rejected"), ("at", "2000-01-01T00:00:00+00:00"),
                         ("signature", stored["signature"][:-4] + "AAA=")):
        assert not verify_signature(record, dict(stored, **{field: value}),
                                    key["public_key_pem"]), field


def test_the_signature_binds_the_stored_record_s_sha256(client, store, tokens,
                                                        controlled_engine):
    run_id = _submit(client, tokens["engineer"])
    signed = _sign(client, tokens["reviewer"], run_id).get_json()
    with store.engine.begin() as connection:
        stored = connection.execute(text("SELECT record FROM runs WHERE id = :id"),
                                    {"id": run_id}).scalar_one()
    import json

    document = json.loads(stored) if isinstance(stored, str) else stored
    assert signed["record_sha256"] == record_sha256(document)
    event = [e for e in list_events(store, kind="signoff.recorded")["items"]][0]
    assert event["actor"] == "rafael.reviewer"
    assert event["payload"]["record_sha256"] == signed["record_sha256"]
    assert event["payload"]["meaning"] == "approval"


def test_signing_needs_the_signers_own_password_again(client, store, tokens,
                                                      controlled_engine):
    run_id = _submit(client, tokens["engineer"])
    before = count_rows(store)["signoffs"]
    wrong = _sign(client, tokens["reviewer"], run_id, password="not my password")
    assert wrong.status_code == 401
    assert wrong.get_json()["errors"] == [{"path": "password", "message": "does not match"}]
    # Another person's password does not sign for the reviewer either.
    person_token(store, "engineer", "other.person", password="another long password")
    assert _sign(client, tokens["reviewer"], run_id,
                 password="another long password").status_code == 401
    missing = client.post(f"/v1/runs/{run_id}/signoffs",
                          json={"decision": "approved", "comment": "x", "meaning": "review"},
                          headers=bearer(tokens["reviewer"]))
    assert missing.status_code == 422
    assert [e["path"] for e in missing.get_json()["errors"]] == ["password"]
    assert count_rows(store)["signoffs"] == before
    failed = list_events(store, kind="auth.failed")["items"]
    assert [(e["actor"], e["subject"], e["payload"]["via"]) for e in failed] == [
        ("rafael.reviewer", run_id, "signature")] * 2
    assert _sign(client, tokens["reviewer"], run_id, password=TEST_PASSWORD).status_code == 201


@pytest.mark.parametrize("meaning", [None, "agreement"])
def test_a_signature_states_one_of_the_three_meanings(client, tokens, controlled_engine,
                                                      meaning):
    run_id = _submit(client, tokens["engineer"])
    body = {"decision": "approved", "comment": "x", "password": TEST_PASSWORD}
    if meaning is not None:
        body["meaning"] = meaning
    response = client.post(f"/v1/runs/{run_id}/signoffs", json=body,
                           headers=bearer(tokens["reviewer"]))
    assert response.status_code == 422
    assert [e["path"] for e in response.get_json()["errors"]] == ["meaning"]


def test_the_author_of_the_case_may_not_sign_a_run_of_it(client, store, tokens,
                                                         controlled_engine):
    from service.people import change_user

    author = person_token(store, "engineer", "ada.author")
    case_id = client.post("/v1/cases", json=make_case(title="authored"),
                          headers=bearer(author)).get_json()["case_id"]
    # Another engineer re-verifies the stored case; the author has become a reviewer.
    run = client.post("/v1/runs", json={"case_id": case_id}, headers=bearer(tokens["engineer"]))
    run_id = run.get_json()["run_id"]
    change_user(store, "ada.author", role="reviewer", actor="adi.admin")
    refused = _sign(client, author, run_id)
    assert refused.status_code == 403 and refused.get_json()["type"].endswith("/four-eyes")
    assert "wrote this case" in refused.get_json()["detail"]
    record = client.get(f"/v1/runs/{run_id}", headers=bearer(tokens["auditor"])).get_json()
    assert record["case_author"] == "ada.author" and record["signoffs"] == []
    assert _sign(client, tokens["reviewer"], run_id).status_code == 201


def test_a_failed_verification_cannot_be_approved(client, tokens, monkeypatch):
    monkeypatch.setattr(worker.engine, "check_case", lambda case, **_: controlled_result(
        case, {"flux_outer": 1.0}, verdict="fail"))
    run_id = _submit(client, tokens["engineer"])
    approved = _sign(client, tokens["reviewer"], run_id)
    assert approved.status_code == 409
    assert "cannot be approved" in approved.get_json()["detail"]
    rejected = _sign(client, tokens["reviewer"], run_id, decision="rejected", meaning="review")
    assert rejected.status_code == 201


def test_loosened_limits_are_deviations_and_their_approval_needs_a_justification(
        client, tokens):
    # The real engine (inline): a case loosening the mass balance limit to 1e6.
    run_id = _submit(client, tokens["engineer"],
                     make_case(title="loose", tolerances={"mass_balance": 1e6}))
    record = wait_for_run(client, tokens["auditor"], run_id)
    assert record["deviations"] == [{"check": "mass_balance", "default": 1e-6, "value": 1e6}]
    report = client.get(f"/v1/runs/{run_id}/report",
                        headers=bearer(tokens["auditor"])).get_data(as_text=True)
    assert "Deviations: this case loosens default limits" in report
    assert 'class="print-running"' in report  # repeated on every printed page
    refused = _sign(client, tokens["reviewer"], run_id)
    assert refused.status_code == 422
    assert refused.get_json()["errors"] == [{
        "path": "justification", "message": "required to approve a record with deviations"}]
    signed = _sign(client, tokens["reviewer"], run_id,
                   justification="bench data show the balance closes at 1e-3")
    assert signed.status_code == 201
    assert signed.get_json()["justification"] == "bench data show the balance closes at 1e-3"


def test_a_case_within_the_default_limits_has_no_deviations(client, tokens):
    run_id = _submit(client, tokens["engineer"],
                     make_case(title="tight", tolerances={"mass_balance": 1e-9}))
    assert wait_for_run(client, tokens["auditor"], run_id)["deviations"] == []


def test_the_signature_shows_in_the_html_and_the_text_report(client, store, tokens,
                                                             controlled_engine):
    run_id = _submit(client, tokens["engineer"])
    reviewer = person_token(store, "reviewer", "rhea.signer", name="Rhea Signer")
    signed = _sign(client, reviewer, run_id, meaning="review").get_json()
    html = client.get(f"/v1/runs/{run_id}/report",
                      headers=bearer(tokens["auditor"])).get_data(as_text=True)
    assert f"Signed: <strong>Rhea Signer</strong>, review, approved, {signed['at']} UTC" in html
    assert signed["signature"] in html and signed["record_sha256"] in html
    record, document = get_run_and_case(store, run_id)
    text_report = render_text(record, document)
    assert f"SIGNED: Rhea Signer (rhea.signer), review, approved, {signed['at']} UTC" \
        in text_report


@pytest.mark.parametrize("field,value", [
    ("title", "Implant \u202etxet.exe"),
    ("tags", ["ok", "hidden\u200btag"]),
    ("layers", [{"name": "mem\u2066brane", "thickness": "50 um",
                 "diffusivity": "1e-10 m^2/s", "partition": 1.0}]),
])
def test_invisible_characters_in_a_case_are_refused_naming_the_path(client, tokens, field,
                                                                    value):
    response = client.post("/v1/cases", json=make_case(**{field: value}),
                           headers=bearer(tokens["engineer"]))
    assert response.status_code == 422
    (error,) = response.get_json()["errors"]
    assert error["path"] == {"title": "title", "tags": "tags[1]",
                             "layers": "layers[0].name"}[field]
    assert "U+" in error["message"]


def test_a_lone_surrogate_in_a_title_is_a_422_naming_it(client, tokens):
    """Finding: a lone surrogate ("\\ud800") in a title was a 500."""
    body = text_case_with_title('"Implant \\ud800"')
    response = client.post("/v1/cases", data=body, content_type="application/json",
                           headers=bearer(tokens["engineer"]))
    assert response.status_code == 422, response.get_data(as_text=True)
    (error,) = response.get_json()["errors"]
    assert error["path"] == "title" and "U+D800" in error["message"]


def text_case_with_title(title_json: str) -> str:
    import json

    case = make_case()
    case.pop("title")
    return json.dumps(case)[:-1] + ', "title": ' + title_json + "}"


def test_invisible_characters_in_a_signoff_comment_are_refused(client, tokens,
                                                               controlled_engine):
    run_id = _submit(client, tokens["engineer"])
    response = _sign(client, tokens["reviewer"], run_id, comment="fine\u202e")
    assert response.status_code == 422
    assert [e["path"] for e in response.get_json()["errors"]] == ["comment"]
    multi_line = _sign(client, tokens["reviewer"], run_id, comment="line one\nline two")
    assert multi_line.status_code == 201
