"""The role matrix over every API endpoint and every method, through HTTP.

The expected table below is written from the role table of README.md ("API (v1)"): engineers
submit, reviewers sign off, auditors read everything and the audit, admins start batches;
reading records is open to every role; health, the OpenAPI document and the public signing key
need no token. It is
compared with what the running app does, not with the app's own table; every route the app
serves under /v1 must appear here, so a new endpoint without a decision fails this test.
"""

from __future__ import annotations

import pytest

from tests.api.support import SIGN, bearer

ROLES = ("engineer", "reviewer", "auditor", "admin")
EVERYONE = frozenset(ROLES)
PUBLIC = "public"

#: (method, path template) -> roles allowed, or PUBLIC.
EXPECTED = {
    ("GET", "/v1/health"): PUBLIC,
    ("GET", "/v1/openapi.json"): PUBLIC,
    ("GET", "/v1/meta/signing-key"): PUBLIC,
    ("POST", "/v1/validate"): frozenset({"engineer"}),
    ("POST", "/v1/cases"): frozenset({"engineer"}),
    ("GET", "/v1/cases"): EVERYONE,
    ("GET", "/v1/cases/<case_id>"): EVERYONE,
    ("GET", "/v1/cases/<case_id>/runs"): EVERYONE,
    ("POST", "/v1/runs"): frozenset({"engineer"}),
    ("GET", "/v1/runs/<run_id>"): EVERYONE,
    ("GET", "/v1/runs/<run_id>/report"): EVERYONE,
    ("GET", "/v1/runs/<run_id>/report.pdf"): EVERYONE,
    ("POST", "/v1/runs/<run_id>/signoffs"): frozenset({"reviewer"}),
    ("POST", "/v1/batches"): frozenset({"admin"}),
    ("GET", "/v1/batches/<batch_id>"): EVERYONE,
    ("GET", "/v1/audit"): frozenset({"auditor", "admin"}),
    ("GET", "/v1/audit/verify"): frozenset({"auditor", "admin"}),
}
METHODS = ("GET", "POST", "PUT", "PATCH", "DELETE")


def _served_routes(app) -> dict[str, set[str]]:
    routes: dict[str, set[str]] = {}
    for rule in app.url_map.iter_rules():
        if rule.rule.startswith("/v1/"):
            routes.setdefault(rule.rule, set()).update(
                m for m in rule.methods if m not in ("HEAD", "OPTIONS"))
    return routes


def _url(template: str, ids: dict[str, str]) -> str:
    for name, value in ids.items():
        template = template.replace(f"<{name}>", value)
    return template


def _body(method: str, template: str, ids: dict[str, str]):
    from tests.api.support import make_case

    if method != "POST":
        return None
    return {"/v1/runs": {"case_id": ids["case_id"]},
            "/v1/runs/<run_id>/signoffs": {"decision": "rejected", **SIGN, "comment": "matrix"},
            "/v1/batches": {"all": True}}.get(template, make_case(title="role matrix"))


def test_every_served_endpoint_has_a_decision(sec_app):
    served = {(method, rule) for rule, methods in _served_routes(sec_app).items()
              for method in methods}
    assert served == set(EXPECTED)


@pytest.mark.parametrize("method,template", sorted(EXPECTED))
def test_each_role_gets_what_the_contract_gives_it(sec_app, sec_tokens, seeded, method,
                                                   template):
    client = sec_app.test_client()
    url = _url(template, seeded)
    allowed = EXPECTED[(method, template)]
    for role in ROLES:
        response = client.open(url, method=method, json=_body(method, template, seeded),
                               headers=bearer(sec_tokens[role]))
        if allowed == PUBLIC or role in allowed:
            assert response.status_code not in (401, 403), (role, response.get_json())
        else:
            assert response.status_code == 403, (role, response.status_code)
            problem = response.get_json()
            assert response.mimetype == "application/problem+json"
            assert problem["role"] == role and role not in problem["allowed_roles"]

    anonymous = client.open(url, method=method, json=_body(method, template, seeded))
    wrong = client.open(url, method=method, json=_body(method, template, seeded),
                        headers=bearer(sec_tokens["admin"][:-4] + "AAAA"))
    if allowed == PUBLIC:
        assert anonymous.status_code not in (401, 403)
    else:
        for response in (anonymous, wrong):
            assert response.status_code == 401
            assert response.mimetype == "application/problem+json"
            assert response.headers["WWW-Authenticate"].startswith("Bearer")


def test_methods_not_allowed_are_405_problem_documents(sec_app, sec_tokens, seeded):
    client = sec_app.test_client()
    checked = 0
    for rule, methods in _served_routes(sec_app).items():
        for method in METHODS:
            if method in methods:
                continue
            response = client.open(_url(rule, seeded), method=method,
                                   headers=bearer(sec_tokens["admin"]))
            assert response.status_code == 405, (method, rule, response.status_code)
            assert response.mimetype == "application/problem+json"
            assert response.get_json()["status"] == 405
            allow = {m.strip() for m in response.headers["Allow"].split(",")}
            assert methods <= allow
            checked += 1
    assert checked >= 40


def test_a_reviewer_cannot_sign_off_a_run_they_submitted(sec_app, sec_store):
    """Four-eyes: one person who submitted as an engineer and is a reviewer now may not
    approve their own submission."""
    from service.people import change_user
    from tests.api.support import make_case, person_token

    engineer = person_token(sec_store, "engineer", "solo.person")
    client = sec_app.test_client()
    run_id = client.post("/v1/runs", json={"case": make_case(title="four eyes")},
                         headers=bearer(engineer)).get_json()["run_id"]
    change_user(sec_store, "solo.person", role="reviewer", actor="arvo.sec-admin")
    reviewer = person_token(sec_store, "reviewer", "solo.person")
    response = client.post(f"/v1/runs/{run_id}/signoffs",
                           json={"decision": "approved", **SIGN, "comment": "mine"},
                           headers=bearer(reviewer))
    assert response.status_code == 403
    assert response.get_json()["type"].endswith("/four-eyes")
