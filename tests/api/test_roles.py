"""The role matrix: every endpoint x every role (and no token) -> allowed or refused.

The expected access is written out below, independently of ``service.auth.ROLE_MATRIX``; the
parameters come from both, so changing either one alone fails a test.
"""

from __future__ import annotations

import pytest

from service.api import PUBLIC, ROLE_MATRIX
from tests.api.support import SIGN, bearer, make_case

ROLES = ("engineer", "reviewer", "auditor", "admin")
ALL = frozenset(ROLES)

# endpoint: (method, url template, roles allowed; None = public)
EXPECTED_ACCESS = {
    "api.health": ("GET", "/v1/health", None),
    "api.openapi": ("GET", "/v1/openapi.json", None),
    "api.signing_key": ("GET", "/v1/meta/signing-key", None),
    "api.validate": ("POST", "/v1/validate", {"engineer"}),
    "api.create_case": ("POST", "/v1/cases", {"engineer"}),
    "api.list_cases": ("GET", "/v1/cases", ALL),
    "api.get_case": ("GET", "/v1/cases/{case_id}", ALL),
    "api.list_case_runs": ("GET", "/v1/cases/{case_id}/runs", ALL),
    "api.create_run": ("POST", "/v1/runs", {"engineer"}),
    "api.get_run": ("GET", "/v1/runs/{run_id}", ALL),
    "api.get_run_report": ("GET", "/v1/runs/{run_id}/report", ALL),
    "api.get_run_report_pdf": ("GET", "/v1/runs/{run_id}/report.pdf", ALL),
    "api.create_signoff": ("POST", "/v1/runs/{run_id}/signoffs", {"reviewer"}),
    "api.create_batch": ("POST", "/v1/batches", {"admin"}),
    "api.get_batch": ("GET", "/v1/batches/{batch_id}", ALL),
    "api.list_audit": ("GET", "/v1/audit", {"auditor", "admin"}),
    "api.verify_audit": ("GET", "/v1/audit/verify", {"auditor", "admin"}),
}

ENDPOINTS = sorted(set(EXPECTED_ACCESS) | set(ROLE_MATRIX) | set(PUBLIC))


def test_code_matrix_equals_the_written_table():
    in_code = {e: set(r) for e, r in ROLE_MATRIX.items()}
    in_code.update({e: None for e in PUBLIC})
    written = {e: (set(spec[2]) if spec[2] is not None else None)
               for e, spec in EXPECTED_ACCESS.items()}
    assert in_code == written


def test_every_route_of_the_app_is_in_the_matrix(app):
    # Every /v1 route is in the API's matrix; the browser pages under /ui have their own
    # access table (tested in tests/ui) and static files need none.
    endpoints = {rule.endpoint for rule in app.url_map.iter_rules()
                 if rule.rule.startswith("/v1/")}
    assert endpoints == set(ROLE_MATRIX) | set(PUBLIC)
    others = {rule.rule for rule in app.url_map.iter_rules() if not rule.rule.startswith("/v1/")}
    assert all(r.startswith(("/ui", "/static")) for r in others), others


def _body(endpoint: str, ids: dict[str, str]) -> dict | None:
    return {
        "api.validate": make_case(),
        "api.create_case": make_case(title="role matrix: another case"),
        "api.create_run": {"case_id": ids["case_id"]},
        "api.create_signoff": {"decision": "approved", **SIGN, "comment": "role matrix check"},
        "api.create_batch": {"tag": "service-test"},
    }.get(endpoint)


@pytest.fixture
def ids(client, tokens, controlled_engine):
    """A stored case, a finished run and a batch (the engine's figures do not matter here)."""
    response = client.post("/v1/runs", json={"case": make_case()},
                           headers=bearer(tokens["engineer"]))
    assert response.status_code == 202
    run_id = response.get_json()["run_id"]
    case_id = response.get_json()["case_id"]
    batch = client.post("/v1/batches", json={"all": True}, headers=bearer(tokens["admin"]))
    assert batch.status_code == 202
    return {"run_id": run_id, "case_id": case_id, "batch_id": batch.get_json()["batch_id"]}


@pytest.mark.parametrize("who", [*ROLES, None])
@pytest.mark.parametrize("endpoint", ENDPOINTS)
def test_access(endpoint, who, client, tokens, ids):
    assert endpoint in EXPECTED_ACCESS, f"{endpoint} is in the code's matrix but not the table"
    method, template, allowed = EXPECTED_ACCESS[endpoint]
    url = template.format(**ids)
    headers = bearer(tokens[who]) if who else {}
    body = _body(endpoint, ids)
    response = client.open(url, method=method, json=body, headers=headers)
    code_roles = None if endpoint in PUBLIC else ROLE_MATRIX.get(endpoint, frozenset())
    for roles in (allowed, code_roles):
        if roles is None:
            assert response.status_code in (200, 503)
        elif who is None:
            assert response.status_code == 401
            assert response.headers["WWW-Authenticate"].startswith("Bearer")
            assert response.mimetype == "application/problem+json"
        elif who in roles:
            assert response.status_code not in (401, 403, 500), response.get_data(as_text=True)
        else:
            assert response.status_code == 403, response.get_data(as_text=True)
            assert response.mimetype == "application/problem+json"
            assert response.get_json()["role"] == who


def test_invalid_and_revoked_tokens_are_401(client, store, tokens):
    from service.tokens import create_token, revoke_token

    for token in ("nonsense", "fpt_unknown_secret", tokens["auditor"] + "x"):
        response = client.get("/v1/cases", headers=bearer(token))
        assert response.status_code == 401
        assert "invalid_token" in response.headers["WWW-Authenticate"]
    token_id, token = create_token(store, login="ana.auditor", name="short-lived",
                                   actor="os:test")
    assert client.get("/v1/cases", headers=bearer(token)).status_code == 200
    assert revoke_token(store, token_id, actor="os:test")
    assert client.get("/v1/cases", headers=bearer(token)).status_code == 401
    assert client.get("/v1/cases", headers={"Authorization": "Basic abc"}).status_code == 401
