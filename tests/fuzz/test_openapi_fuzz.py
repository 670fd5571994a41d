"""Schemathesis against ``/v1/openapi.json``: every operation, with a valid token of each role,
bounded and derandomised; no 5xx, and every response conforms to the document (status code,
content type, headers, body schema).

Some stored objects exist first (a case, a run, a sign-off, a batch) so that generated ids
are not all unknown; the generator also reaches them through the ids it is given as examples
in the document, when there are any. Checks used: not_a_server_error,
status_code_conformance, content_type_conformance, response_headers_conformance,
response_schema_conformance.
"""

from __future__ import annotations

import pytest
import schemathesis
from hypothesis import HealthCheck, Phase, given, settings
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from tests.api.support import BASE_CASE, SIGN

#: Examples per operation and role (14 operations x 4 roles x this, at most).
MAX_EXAMPLES = 20
CHECKS = [not_a_server_error, status_code_conformance, content_type_conformance,
          response_headers_conformance, response_schema_conformance]


def _seed(client, tokens) -> None:
    run = client.post("/v1/runs", json={"case": BASE_CASE},
                      headers={"Authorization": f"Bearer {tokens['engineer']}"})
    assert run.status_code == 202, run.get_json()
    signed = client.post(f"/v1/runs/{run.get_json()['run_id']}/signoffs",
                         json={"decision": "approved", **SIGN, "comment": "fuzz seed"},
                         headers={"Authorization": f"Bearer {tokens['reviewer']}"})
    assert signed.status_code == 201, signed.get_json()
    batch = client.post("/v1/batches", json={"all": True},
                        headers={"Authorization": f"Bearer {tokens['admin']}"})
    assert batch.status_code == 202, batch.get_json()


@pytest.mark.slow
@pytest.mark.parametrize("role", ["engineer", "reviewer", "auditor", "admin"])
def test_every_operation_conforms_to_the_document_for_each_role(fuzz_app, fuzz_tokens, role):
    _seed(fuzz_app.test_client(), fuzz_tokens)
    schema = schemathesis.openapi.from_wsgi("/v1/openapi.json", fuzz_app)
    headers = {"Authorization": f"Bearer {fuzz_tokens[role]}"}
    failures: list[str] = []
    labels: set[str] = set()
    calls = 0
    for result in schema.get_all_operations():
        operation = result.ok()
        labels.add(f"{operation.method.upper()} {operation.path}")

        @settings(max_examples=MAX_EXAMPLES, derandomize=True, deadline=None, database=None,
                  phases=[Phase.explicit, Phase.generate],
                  suppress_health_check=list(HealthCheck))
        @given(case=operation.as_strategy())
        def call(case) -> None:
            nonlocal calls
            calls += 1
            case.call_and_validate(headers=headers, checks=CHECKS)

        try:
            call()
        except Exception as exc:  # noqa: BLE001 - gather every operation's failure
            failures.append(f"{operation.method.upper()} {operation.path}: "
                            f"{type(exc).__name__}: {str(exc)[:1500]}")
    print(f"\nFUZZ schemathesis role={role}: {len(labels)} operations, {calls} calls, "
          f"{len(failures)} failing")
    document = fuzz_app.test_client().get("/v1/openapi.json").get_json()
    documented = {f"{method.upper()} {path}" for path, item in document["paths"].items()
                  for method in item if method in ("get", "post", "put", "patch", "delete")}
    # Schemathesis leaves out the operation that serves the document itself.
    assert labels == documented - {"GET /v1/openapi.json"}
    assert calls >= len(labels) * 5
    assert failures == [], "\n\n".join(failures)
