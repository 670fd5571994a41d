"""Browser pages: security headers on every HTML page, and CSRF protection of every form.

Headers checked (common practice for server-rendered pages, OWASP Secure Headers):
Content-Security-Policy with frame-ancestors 'none', X-Content-Type-Options: nosniff,
X-Frame-Options: DENY, Referrer-Policy; the session cookie HttpOnly and SameSite.
"""

from __future__ import annotations

import re

from tests.api.support import SIGN, TEST_PASSWORD, bearer
from tests.ui.support import login_of, sign_in

CSRF_FIELD = re.compile(r'name="csrf_token"\s+value="([^"]+)"')


def _signed_in(client, token: str):
    response = sign_in(client, token)
    assert response.status_code == 303, response.get_data(as_text=True)[:500]
    return client


def _assert_html_headers(response) -> None:
    assert response.mimetype == "text/html"
    policy = response.headers["Content-Security-Policy"]
    assert "frame-ancestors 'none'" in policy and "default-src 'none'" in policy
    assert "script-src" not in policy or "'unsafe-inline'" not in policy.split("script-src")[1]
    assert response.headers["X-Content-Type-Options"] == "nosniff"
    assert response.headers["X-Frame-Options"] == "DENY"
    assert response.headers["Referrer-Policy"]


def test_every_html_page_carries_the_security_headers(sec_app, sec_tokens, seeded):
    client = _signed_in(sec_app.test_client(), sec_tokens["auditor"])
    pages = ["/ui/login", "/ui/runs", f"/ui/runs/{seeded['run_id']}",
             f"/ui/cases/{seeded['case_id']}", f"/ui/batches/{seeded['batch_id']}",
             "/ui/audit"]
    for page in pages:
        response = client.get(page)
        assert response.status_code == 200, (page, response.status_code)
        _assert_html_headers(response)
    report = sec_app.test_client().get(f"/v1/runs/{seeded['run_id']}/report",
                                       headers=bearer(sec_tokens["auditor"]))
    assert report.status_code == 200
    _assert_html_headers(report)


def test_the_session_cookie_is_httponly_and_samesite(sec_app, sec_tokens):
    client = sec_app.test_client()
    page = client.get("/ui/login")
    csrf = CSRF_FIELD.search(page.get_data(as_text=True)).group(1)
    response = client.post("/ui/login", data={"login": login_of(client, sec_tokens["reviewer"]),
                                              "password": TEST_PASSWORD, "csrf_token": csrf})
    cookie = next(v for k, v in response.headers.items()
                  if k == "Set-Cookie" and v.startswith("fluxproof_session="))
    assert "HttpOnly" in cookie and "SameSite=Lax" in cookie


def test_forms_without_the_csrf_token_are_refused(sec_app, sec_tokens, seeded):
    client = sec_app.test_client()
    client.get("/ui/login")  # the session now has a token; the form below does not send it
    person = {"login": login_of(client, sec_tokens["reviewer"]), "password": TEST_PASSWORD}
    refused = client.post("/ui/login", data=person)
    assert refused.status_code == 400
    forged = client.post("/ui/login", data={**person, "csrf_token": "forged"})
    assert forged.status_code == 400

    _signed_in(client, sec_tokens["reviewer"])
    run_page = client.get(f"/ui/runs/{seeded['run_id']}").get_data(as_text=True)
    assert CSRF_FIELD.search(run_page), "the sign-off form must carry a CSRF field"
    action = re.search(r'<form method="post" action="([^"]*signoff[^"]*)"', run_page).group(1)
    no_token = client.post(action,
                           data={"decision": "approved", **SIGN, "comment": "forged"})
    assert no_token.status_code == 400
    other_site = client.post(action,
                             data={"decision": "approved", **SIGN, "comment": "forged",
                                   "csrf_token": CSRF_FIELD.search(run_page).group(1)},
                             headers={"Origin": "https://elsewhere.invalid"})
    assert other_site.status_code == 400
    record = sec_app.test_client().get(f"/v1/runs/{seeded['run_id']}",
                                       headers=bearer(sec_tokens["auditor"])).get_json()
    assert record["signoffs"] == []  # none of the refused forms signed anything
    accepted = client.post(action, data={"decision": "approved", **SIGN, "comment": "checked",
                                         "csrf_token": CSRF_FIELD.search(run_page).group(1)})
    assert accepted.status_code in (200, 303), accepted.status_code  # the real form works
