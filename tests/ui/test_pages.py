"""The pages under /ui/: sign-in and session, CSRF, roles per page, sign-off and four-eyes,
filters, history, batches, audit, headers and accessibility basics.

These test the service's own behaviour, so the engine is replaced by one whose figures the
test chooses (``controlled_engine``); no figure here is a check of the engine.
"""

from __future__ import annotations

import re
from html.parser import HTMLParser

import pytest
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from sqlalchemy import select, text

from service.audit import list_events
from service.people import change_user
from service.store.models import Signoff
from service.ui import signin
from tests.api.support import ROLE_NAMES, SIGN, TEST_PASSWORD, bearer, make_case
from tests.ui.support import csrf_of, page_csrf, queue_and_run, sign_in

ROLES = ("engineer", "reviewer", "auditor", "admin")


@pytest.fixture
def run_id(store, controlled_engine) -> str:
    return queue_and_run(store, make_case(tags=["nightly", "membrane"]))


def _signed(client, tokens, role: str):
    response = sign_in(client, tokens[role])
    assert response.status_code == 303, response.get_data(as_text=True)
    return client


# --- sign-in, session, CSRF --------------------------------------------------------------

def test_a_stranger_is_sent_to_the_sign_in_form(client, run_id):
    response = client.get(f"/ui/runs/{run_id}")
    assert response.status_code == 303
    assert response.headers["Location"] == f"/ui/login?next=/ui/runs/{run_id}"
    assert client.post(f"/ui/runs/{run_id}/signoff", data={}).status_code == 400  # no CSRF


def test_sign_in_sets_a_signed_http_only_lax_cookie_without_the_token(client, tokens):
    response = sign_in(client, tokens["reviewer"], next_path="/ui/batches")
    assert response.status_code == 303 and response.headers["Location"] == "/ui/batches"
    cookie = response.headers["Set-Cookie"]
    assert cookie.startswith("fluxproof_session=")
    assert "HttpOnly" in cookie and "SameSite=Lax" in cookie and "Path=/ui" in cookie
    # fpt_<hex id>_<secret>: the secret (token_urlsafe) may itself contain "_"
    secret_part = tokens["reviewer"].split("_", 2)[2]
    assert len(secret_part) >= 40
    assert secret_part not in cookie and tokens["reviewer"] not in cookie
    page = client.get("/ui/runs").get_data(as_text=True)
    assert "Signed in as <strong>rafael.reviewer</strong> (reviewer)" in page


def test_sign_in_refuses_a_bad_password_and_a_missing_csrf_field(client, store, tokens):
    form = client.get("/ui/login").get_data(as_text=True)
    for login, password in (("rafael.reviewer", "not the password"),
                            ("nobody.at.all", TEST_PASSWORD)):
        bad = client.post("/ui/login", data={"login": login, "password": password,
                                             "csrf_token": csrf_of(form)})
        assert bad.status_code == 401
        assert "these do not match an active account" in bad.get_data(as_text=True)
    empty = client.post("/ui/login", data={"login": " ", "password": "",
                                           "csrf_token": csrf_of(form)})
    assert empty.status_code == 422 and "give both" in empty.get_data(as_text=True)
    forged = client.post("/ui/login", data={"login": "rafael.reviewer",
                                            "password": TEST_PASSWORD})
    assert forged.status_code == 400 and "csrf_token" in forged.get_data(as_text=True)
    # A token is not a password: the form takes no token.
    as_token = client.post("/ui/login", data={"login": "rafael.reviewer",
                                              "password": tokens["reviewer"],
                                              "csrf_token": csrf_of(form)})
    assert as_token.status_code == 401
    assert client.get("/ui/runs").status_code == 303  # still not signed in
    failed = [e for e in list_events(store, kind="auth.failed")["items"]]
    assert [(e["actor"], e["payload"]["via"]) for e in failed] == [
        ("rafael.reviewer", "sign-in form"), ("nobody.at.all", "sign-in form"),
        ("rafael.reviewer", "sign-in form")]


def test_sign_in_never_redirects_off_the_site(client, tokens):
    for target in ("//evil.example/x", "https://evil.example/", "/v1/audit", "/ui\\..\\x"):
        response = sign_in(client, tokens["auditor"], next_path=target)
        assert response.headers["Location"] == "/ui/runs", target


def test_a_post_from_another_origin_is_refused(client, tokens, run_id):
    _signed(client, tokens, "reviewer")
    csrf = page_csrf(client, f"/ui/runs/{run_id}")
    response = client.post(f"/ui/runs/{run_id}/signoff",
                           data={"csrf_token": csrf, "decision": "approved", **SIGN,
                                 "comment": "x"},
                           headers={"Origin": "https://evil.example"})
    assert response.status_code == 400 and "another site" in response.get_data(as_text=True)


def test_signoff_without_or_with_a_foreign_csrf_token_is_refused(app, client, store, tokens,
                                                                 run_id):
    _signed(client, tokens, "reviewer")
    other = app.test_client()
    _signed(other, tokens, "reviewer")
    foreign = page_csrf(other, f"/ui/runs/{run_id}")
    for data in ({"decision": "approved", **SIGN, "comment": "x"},
                 {"decision": "approved", **SIGN, "comment": "x", "csrf_token": foreign}):
        response = client.post(f"/ui/runs/{run_id}/signoff", data=data)
        assert response.status_code == 400
    with store.transaction() as session:
        assert session.execute(select(Signoff)).first() is None


def test_sign_out_needs_the_csrf_token_and_ends_the_session(client, tokens):
    _signed(client, tokens, "auditor")
    assert client.post("/ui/logout", data={}).status_code == 400
    cookie = client.get_cookie("fluxproof_session", path="/ui").value
    response = client.post("/ui/logout", data={"csrf_token": page_csrf(client, "/ui/runs")})
    assert response.status_code == 303
    assert client.get("/ui/runs").status_code == 303
    # The old cookie, replayed (as someone who copied it would), opens nothing any more.
    replay = app_client_with_cookie(client, cookie)
    assert replay.get("/ui/runs").status_code == 303


def app_client_with_cookie(client, cookie: str):
    other = client.application.test_client()
    other.set_cookie("fluxproof_session", cookie, path="/ui")
    return other


def test_the_cookie_holds_only_a_random_id_stored_as_its_digest(client, store, tokens):
    from service.browser_sessions import session_digest
    from service.store.models import BrowserSession

    _signed(client, tokens, "auditor")
    cookie = client.get_cookie("fluxproof_session", path="/ui").value
    assert len(cookie) == 43 and "." not in cookie  # token_urlsafe(32); nothing signed in it
    with store.transaction() as session:
        rows = session.execute(select(BrowserSession).where(
            BrowserSession.user_id.is_not(None))).scalars().all()
        assert [row.id_sha256 for row in rows] == [session_digest(cookie)]


def test_disabling_a_person_ends_their_sessions_at_once(client, store, tokens):
    from service.people import disable_user

    _signed(client, tokens, "auditor")
    assert client.get("/ui/runs").status_code == 200
    disable_user(store, "ana.auditor", actor="adi.admin")
    assert client.get("/ui/runs").status_code == 303
    assert sign_in(client, "ana.auditor").status_code == 401


def _age_session(store, **ago):
    from datetime import timedelta

    from service.store.models import BrowserSession, utc_now

    with store.transaction() as session:
        for row in session.execute(select(BrowserSession)).scalars():
            for column, minutes in ago.items():
                setattr(row, column, utc_now() - timedelta(minutes=minutes))


def test_an_idle_session_must_sign_in_again(client, store, tokens):
    _signed(client, tokens, "auditor")
    assert client.get("/ui/runs").status_code == 200
    _age_session(store, last_seen_at=29)
    assert client.get("/ui/runs").status_code == 200  # within the 30 minutes
    _age_session(store, last_seen_at=31)
    response = client.get("/ui/runs")
    assert response.status_code == 303
    assert "idle timeout" in client.get(response.headers["Location"]).get_data(as_text=True)


def test_a_session_ends_hours_after_sign_in_however_busy(client, store, tokens):
    _signed(client, tokens, "auditor")
    _age_session(store, signed_in_at=7 * 60 + 59)
    assert client.get("/ui/runs").status_code == 200
    _age_session(store, signed_in_at=8 * 60 + 1)
    assert client.get("/ui/runs").status_code == 303


def test_sign_in_and_out_are_audited_with_the_person(client, store, tokens):
    _signed(client, tokens, "auditor")
    client.post("/ui/logout", data={"csrf_token": page_csrf(client, "/ui/runs")})
    events = list_events(store)["items"]
    assert [(e["kind"], e["actor"]) for e in events if e["kind"].startswith("auth.")] == [
        ("auth.signed_in", "ana.auditor"), ("auth.signed_out", "ana.auditor")]


@pytest.mark.parametrize("setting,https,secure", [
    ("auto", False, False), ("auto", True, True), (True, False, True), (False, True, False)])
def test_the_cookie_is_secure_over_tls_or_when_forced(app, client, tokens, setting, https,
                                                      secure):
    app.config["SESSION_COOKIE_SECURE"] = setting
    base = "https://localhost" if https else "http://localhost"
    form = client.get("/ui/login", base_url=base).get_data(as_text=True)
    response = client.post("/ui/login", base_url=base, data={
        "login": "ana.auditor", "password": TEST_PASSWORD, "csrf_token": csrf_of(form)})
    assert response.status_code == 303
    cookie = response.headers["Set-Cookie"]
    assert ("; Secure" in cookie) is secure, cookie


def test_behind_a_trusted_tls_proxy_the_cookie_is_secure(data_dir, tokens):
    from service.app import create_app, shutdown_app

    app = create_app({"TESTING": True, "DATA_DIR": str(data_dir), "DISPATCH": "inline",
                      "PROXY_FIX_HOPS": 1})
    try:
        client = app.test_client()
        proxied = {"X-Forwarded-Proto": "https"}
        form = client.get("/ui/login", headers=proxied).get_data(as_text=True)
        response = client.post("/ui/login", headers=proxied, data={
            "login": "ana.auditor", "password": TEST_PASSWORD, "csrf_token": csrf_of(form)})
        assert response.status_code == 303 and "; Secure" in response.headers["Set-Cookie"]
    finally:
        shutdown_app(app)


# --- roles per page ----------------------------------------------------------------------

def _pages(run_id: str, case_id: str, batch_id: str) -> dict[str, str]:
    return {"runs": "/ui/runs", "run": f"/ui/runs/{run_id}",
            "report": f"/ui/runs/{run_id}/report", "record": f"/ui/runs/{run_id}/record.json",
            "record_pdf": f"/ui/runs/{run_id}/record.pdf",
            "case": f"/ui/cases/{case_id}", "batches": "/ui/batches",
            "batch": f"/ui/batches/{batch_id}", "audit": "/ui/audit"}


@pytest.mark.parametrize("role", ROLES)
def test_each_page_for_each_role(app, store, tokens, run_id, role):
    from service.batches import start_batch
    from service.runs import get_record

    case_id = get_record(store, run_id)["case_id"]
    batch_id = start_batch(store, actor="adi.admin", all_cases=True)["batch_id"]
    client = _signed(app.test_client(), tokens, role)
    for name, path in _pages(run_id, case_id, batch_id).items():
        response = client.get(path)
        expected = 403 if name == "audit" and role in ("engineer", "reviewer") else 200
        assert response.status_code == expected, (role, name)
        if response.mimetype == "application/pdf":
            assert response.get_data().startswith(b"%PDF-")
            continue
        body = response.get_data(as_text=True)
        if expected == 403:
            assert f"you are signed in as {ROLE_NAMES[role]} ({role})" in body
            assert response.mimetype == "text/html"
        if response.mimetype == "text/html":
            assert "<script" not in body  # readable without JavaScript: there is none
            assert "do not replace, design verification testing" in body
    nav = client.get("/ui/runs").get_data(as_text=True)
    assert ('href="/ui/audit"' in nav) == (role in ("auditor", "admin"))


def test_the_run_page_links_its_archival_pdf(client, tokens, run_id):
    _signed(client, tokens, "reviewer")
    page = client.get(f"/ui/runs/{run_id}").get_data(as_text=True)
    assert f'href="/ui/runs/{run_id}/record.pdf">Archival record (PDF)</a>' in page
    pdf = client.get(f"/ui/runs/{run_id}/record.pdf")
    assert pdf.mimetype == "application/pdf" and pdf.get_data().startswith(b"%PDF-")
    assert f'filename="record-{run_id}.pdf"' in pdf.headers["Content-Disposition"]
    assert client.get("/ui/runs/none/record.pdf").status_code == 404


def test_missing_things_are_html_404_pages(client, tokens):
    _signed(client, tokens, "auditor")
    for path in ("/ui/runs/none", "/ui/cases/none", "/ui/batches/none"):
        response = client.get(path)
        assert response.status_code == 404 and response.mimetype == "text/html"


def test_security_headers_on_pages_and_the_report(client, tokens, run_id):
    _signed(client, tokens, "auditor")
    responses = [client.get("/ui/runs"), client.get(f"/ui/runs/{run_id}"), client.get("/ui/login"),
                 client.get(f"/v1/runs/{run_id}/report", headers=bearer(tokens["auditor"]))]
    for response in responses:
        policy = response.headers["Content-Security-Policy"]
        assert "default-src 'none'" in policy and "script-src" not in policy
        assert "frame-ancestors 'none'" in policy and "form-action 'self'" in policy
        assert response.headers["X-Content-Type-Options"] == "nosniff"
        assert response.headers["X-Frame-Options"] == "DENY"
        assert response.headers["Referrer-Policy"] == "same-origin"
    assert responses[1].headers["Cache-Control"] == "no-store"
    css = client.get("/ui/static/fluxproof.css")
    try:
        assert css.status_code == 200 and "@media print" in css.get_data(as_text=True)
    finally:
        css.close()


# --- sign-off and four-eyes --------------------------------------------------------------

def test_a_reviewer_approves_and_the_record_is_signed(client, store, tokens, run_id):
    _signed(client, tokens, "reviewer")
    page = client.get(f"/ui/runs/{run_id}").get_data(as_text=True)
    assert "Approve this record" in page and "Reject this record" in page
    response = client.post(f"/ui/runs/{run_id}/signoff",
                           data={"csrf_token": csrf_of(page), "decision": "approved", **SIGN,
                                 "comment": "flux and mass balance checked"})
    assert response.status_code == 303 and response.headers["Location"] == f"/ui/runs/{run_id}"
    signed = client.get(f"/ui/runs/{run_id}").get_data(as_text=True)
    assert "Signed off: approved" in signed
    assert "flux and mass balance checked" in signed and "Approve this record" not in signed
    assert "Already signed off (approved by rafael.reviewer)" in signed
    record = client.get(f"/v1/runs/{run_id}", headers=bearer(tokens["auditor"])).get_json()
    assert record["signoffs"][0]["reviewer"] == "rafael.reviewer"
    events = client.get("/v1/audit?kind=signoff.recorded",
                        headers=bearer(tokens["auditor"])).get_json()["items"]
    assert [e["subject"] for e in events] == [run_id]


def test_a_reviewer_rejects_with_reasons(client, tokens, run_id):
    _signed(client, tokens, "reviewer")
    csrf = page_csrf(client, f"/ui/runs/{run_id}")
    client.post(f"/ui/runs/{run_id}/signoff", data={"csrf_token": csrf, "decision": "rejected",
                                                    **SIGN,
                                                    "comment": "wrong diffusivity basis"})
    page = client.get(f"/ui/runs/{run_id}").get_data(as_text=True)
    assert "decision-rejected" in page and "wrong diffusivity basis" in page


def test_the_signoff_form_names_what_is_missing(client, store, tokens, run_id):
    _signed(client, tokens, "reviewer")
    csrf = page_csrf(client, f"/ui/runs/{run_id}")
    response = client.post(f"/ui/runs/{run_id}/signoff",
                           data={"csrf_token": csrf, "decision": "maybe", "comment": "  "})
    assert response.status_code == 422
    body = response.get_data(as_text=True)
    assert "<code>decision</code>: expected one of approved, rejected" in body
    assert "<code>comment</code>: write the reasons" in body
    with store.transaction() as session:
        assert session.execute(select(Signoff)).first() is None


def test_the_submitter_sees_why_they_cannot_approve_their_own_run(app, store, tokens, run_id):
    # The submitter (erin.engineer) is a reviewer now.
    change_user(store, "erin.engineer", role="reviewer", actor="adi.admin")
    client = app.test_client()
    sign_in(client, "erin.engineer")
    page = client.get(f"/ui/runs/{run_id}").get_data(as_text=True)
    assert "You submitted this run (erin.engineer), so you cannot sign it off" in page
    assert "four-eyes" in page and "Approve this record" not in page
    forced = client.post(f"/ui/runs/{run_id}/signoff",
                         data={"csrf_token": csrf_of(page), "decision": "approved", **SIGN,
                               "comment": "my own work looks fine"})
    assert forced.status_code == 403  # refused by sign_off with the reason the page gave
    assert "You submitted this run (erin.engineer), so you cannot sign it off" \
        in forced.get_data(as_text=True)
    with store.transaction() as session:
        assert session.execute(select(Signoff)).first() is None


def test_an_engineer_has_no_signoff_form_and_is_refused(client, store, tokens, run_id):
    _signed(client, tokens, "engineer")
    page = client.get(f"/ui/runs/{run_id}").get_data(as_text=True)
    assert "Sign-off is for reviewers; you are signed in as erin.engineer (engineer)" in page
    assert "You submitted this run (erin.engineer)" in page
    assert "Approve this record" not in page
    forced = client.post(f"/ui/runs/{run_id}/signoff",
                         data={"csrf_token": csrf_of(page), "decision": "approved", **SIGN,
                               "comment": "x"})
    assert forced.status_code == 403
    with store.transaction() as session:
        assert session.execute(select(Signoff)).first() is None


def test_signing_on_the_page_takes_the_meaning_and_the_password_again(client, store, tokens,
                                                                      run_id):
    _signed(client, tokens, "reviewer")
    page = client.get(f"/ui/runs/{run_id}").get_data(as_text=True)
    assert 'name="meaning"' in page and 'name="password"' in page
    form = {"csrf_token": csrf_of(page), "decision": "approved", "comment": "checked",
            "meaning": "approval"}
    missing = client.post(f"/ui/runs/{run_id}/signoff", data=form)
    assert missing.status_code == 422
    assert "<code>password</code>: give your password again" in missing.get_data(as_text=True)
    wrong = client.post(f"/ui/runs/{run_id}/signoff", data={**form, "password": "nope"})
    assert wrong.status_code == 401 and "the password is not yours" in wrong.get_data(
        as_text=True)
    with store.transaction() as session:
        assert session.execute(select(Signoff)).first() is None
    signed = client.post(f"/ui/runs/{run_id}/signoff", data={**form, "password": TEST_PASSWORD})
    assert signed.status_code == 303
    page = client.get(f"/ui/runs/{run_id}").get_data(as_text=True)
    assert 'id="signature-line"' in page and "approval, approved" in page


def test_a_failed_verification_offers_only_rejection(client, store, tokens, monkeypatch):
    import worker.engine
    from tests.api.support import controlled_result

    monkeypatch.setattr(worker.engine, "check_case", lambda case, **_: controlled_result(
        case, {"flux_outer": 1.0}, verdict="fail"))
    failing = queue_and_run(store, make_case(title="a verification that fails"))
    _signed(client, tokens, "reviewer")
    page = client.get(f"/ui/runs/{failing}").get_data(as_text=True)
    assert "a failed verification cannot be approved" in page
    assert "Approve this record" not in page and "Reject this record" in page
    forced = client.post(f"/ui/runs/{failing}/signoff", data={
        "csrf_token": csrf_of(page), "decision": "approved", "comment": "x",
        "meaning": "approval", "password": TEST_PASSWORD})
    assert forced.status_code == 409


def test_deviations_show_on_the_run_page_and_ask_for_a_justification(client, store, tokens):
    # The real engine: a case that loosens the mass balance limit.
    loose = queue_and_run(store, make_case(title="loose limits",
                                           tolerances={"mass_balance": 1e6}))
    _signed(client, tokens, "reviewer")
    page = client.get(f"/ui/runs/{loose}").get_data(as_text=True)
    assert 'id="deviations"' in page and "<code>mass_balance</code>" in page
    assert 'name="justification"' in page
    form = {"csrf_token": csrf_of(page), "decision": "approved", "comment": "checked",
            "meaning": "approval", "password": TEST_PASSWORD}
    refused = client.post(f"/ui/runs/{loose}/signoff", data=form)
    assert refused.status_code == 422
    assert "<code>justification</code>: required to approve" in refused.get_data(as_text=True)
    accepted = client.post(f"/ui/runs/{loose}/signoff",
                           data={**form, "justification": "bench data cover it"})
    assert accepted.status_code == 303
    page = client.get(f"/ui/runs/{loose}").get_data(as_text=True)
    assert "Justification of the deviations" in page and "bench data cover it" in page


def test_a_failed_run_cannot_be_signed(client, store, tokens, controlled_engine):
    controlled_engine.status = "failed"
    failed = queue_and_run(store, make_case(title="a run that fails"))
    _signed(client, tokens, "reviewer")
    page = client.get(f"/ui/runs/{failed}").get_data(as_text=True)
    assert "Only a succeeded run can be signed off; this one is failed" in page
    assert "controlled failure" in page


# --- lists, filters, history, batches, audit ---------------------------------------------

@pytest.fixture
def mixed_runs(store, tokens, monkeypatch):
    """Runs with every filter's cases: pass/fail, tags, signed, drifted."""
    import worker.engine
    from service.batches import start_batch
    from service.runs import execute_run
    from service.signoffs import sign_off
    from service.tokens import identify
    from tests.api.support import controlled_result

    figures = {"flux_outer": 2.0e-6}

    def engine(case):
        verdict = "fail" if "failing" in case["title"] else "pass"
        return controlled_result(case, dict(figures), verdict=verdict)

    monkeypatch.setattr(worker.engine, "check_case", engine)
    passing = queue_and_run(store, make_case(title="passing case", tags=["nightly"]))
    failing = queue_and_run(store, make_case(title="failing case", tags=["other"]))
    reviewer = identify(store, tokens["reviewer"])
    sign_off(store, passing, reviewer, decision="approved", comment="ok", meaning="approval",
             password=TEST_PASSWORD, key=Ed25519PrivateKey.generate())
    figures["flux_outer"] = 2.5e-6  # the re-verification moves this figure
    batch = start_batch(store, actor="adi.admin", tag="nightly")
    for batch_run in batch["run_ids"]:
        execute_run(batch_run, store)
    return {"passing": passing, "failing": failing, "drifted": batch["run_ids"][0],
            "batch_id": batch["batch_id"]}


def _listed(client, query: str) -> set[str]:
    response = client.get(f"/ui/runs?{query}")
    assert response.status_code == 200, response.get_data(as_text=True)
    return set(re.findall(r'href="/ui/runs/([0-9a-f-]{36})"', response.get_data(as_text=True)))


def test_runs_list_filters(client, tokens, mixed_runs):
    _signed(client, tokens, "auditor")
    runs = mixed_runs
    assert _listed(client, "") == {runs["passing"], runs["failing"], runs["drifted"]}
    assert _listed(client, "verdict=fail") == {runs["failing"]}
    assert _listed(client, "verdict=pass") == {runs["passing"], runs["drifted"]}
    assert _listed(client, "tag=nightly") == {runs["passing"], runs["drifted"]}
    assert _listed(client, "signed=yes") == {runs["passing"]}
    assert _listed(client, "signed=no") == {runs["failing"], runs["drifted"]}
    assert _listed(client, "drifted=yes") == {runs["drifted"]}
    assert _listed(client, "drifted=no&tag=nightly") == {runs["passing"]}
    bad = client.get("/ui/runs?verdict=maybe&signed=perhaps")
    assert bad.status_code == 422
    body = bad.get_data(as_text=True)
    assert "<code>verdict</code>: expected one of pass, fail" in body
    assert "<code>signed</code>: expected one of yes, no" in body


def test_case_history_puts_runs_side_by_side_with_a_trend(client, store, tokens, mixed_runs):
    from service.runs import get_record

    _signed(client, tokens, "auditor")
    case_id = get_record(store, mixed_runs["passing"])["case_id"]
    page = client.get(f"/ui/cases/{case_id}").get_data(as_text=True)
    for run in (mixed_runs["passing"], mixed_runs["drifted"]):
        assert f'href="/ui/runs/{run}"' in page
    assert 'data value="2e-06"' in page and 'data value="2.5e-06"' in page
    svg = re.search(r"<svg\b.*?</svg>", page, re.DOTALL).group(0)
    assert 'id="trend-flux_outer"' in svg and 'id="tolerance-band"' in svg
    assert "approved" in page and "batch" in page


def test_trend_needs_two_succeeded_runs(client, store, tokens, run_id):
    from service.runs import get_record

    _signed(client, tokens, "auditor")
    case_id = get_record(store, run_id)["case_id"]
    page = client.get(f"/ui/cases/{case_id}").get_data(as_text=True)
    assert "A trend needs at least two succeeded runs" in page and "<svg" not in page


def test_batch_page_shows_progress_then_drift(client, store, tokens, mixed_runs):
    from service.batches import start_batch

    _signed(client, tokens, "auditor")
    finished = client.get(f"/ui/batches/{mixed_runs['batch_id']}").get_data(as_text=True)
    assert "1 of 1 runs finished (finished)" in finished
    assert 'http-equiv="refresh"' not in finished
    assert "<code>flux_outer</code>" in finished and ">0.25</data>" in finished
    pending = start_batch(store, actor="adi.admin", all_cases=True)  # queued, not executed
    waiting = client.get(f"/ui/batches/{pending['batch_id']}").get_data(as_text=True)
    assert 'http-equiv="refresh" content="3"' in waiting
    assert '<progress id="batch-progress" max="2" value="0">' in waiting
    assert "Drift is computed when every run of the batch has finished" in waiting
    listing = client.get("/ui/batches").get_data(as_text=True)
    assert mixed_runs["batch_id"][:8] in listing and pending["batch_id"][:8] in listing


def test_audit_page_shows_the_chain_check_and_a_broken_chain(client, store, tokens, run_id):
    _signed(client, tokens, "auditor")
    page = client.get("/ui/audit").get_data(as_text=True)
    assert "Chain intact" in page and "run.finished" in page
    only = client.get(f"/ui/audit?kind=run.queued&subject={run_id}").get_data(as_text=True)
    assert only.count("<td>run.queued</td>") == 1 and "<td>run.finished</td>" not in only
    assert client.get("/ui/audit?kind=nonsense").status_code == 422
    with store.engine.begin() as connection:
        connection.execute(text("UPDATE audit_events SET actor = 'mallory' WHERE seq = 2"))
    broken = client.get("/ui/audit").get_data(as_text=True)
    assert "Chain BROKEN at event 2" in broken


# --- accessibility basics ----------------------------------------------------------------

class _FormControls(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.controls: list[str | None] = []
        self.labels: set[str] = set()

    def handle_starttag(self, tag, attrs):
        attributes = dict(attrs)
        if tag in ("input", "select", "textarea") and attributes.get("type") != "hidden":
            self.controls.append(attributes.get("id"))
        if tag == "label" and attributes.get("for"):
            self.labels.add(attributes["for"])


def test_every_form_control_has_a_label(client, tokens, run_id):
    pages = {"/ui/login": client.get("/ui/login").get_data(as_text=True)}
    _signed(client, tokens, "reviewer")
    pages.update({path: client.get(path).get_data(as_text=True)
                  for path in ("/ui/runs", f"/ui/runs/{run_id}")})
    admin = _signed(client.application.test_client(), tokens, "admin")
    pages["/ui/audit"] = admin.get("/ui/audit").get_data(as_text=True)
    for path, html in pages.items():
        parser = _FormControls()
        parser.feed(html)
        assert parser.controls, path
        for control in parser.controls:
            assert control and control in parser.labels, (path, control)
        assert '<html lang="en">' in html


def test_every_page_has_an_access_rule(app):
    """Fail closed: a /ui/ route without an entry in PAGE_ROLES or OPEN_PAGES is refused to
    everyone, so every route must be listed on purpose."""
    pages = {rule.endpoint for rule in app.url_map.iter_rules()
             if rule.endpoint.startswith("ui.")}
    assert pages == set(signin.PAGE_ROLES) | set(signin.OPEN_PAGES)
    for endpoint, roles in signin.PAGE_ROLES.items():
        assert roles and roles <= set(ROLES), endpoint
