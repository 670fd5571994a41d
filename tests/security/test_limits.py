"""Request size and document limits: a clear 413 or 422 naming the field, before any work.

The limits are the constants of ``schemas/case.py`` and the service setting MAX_BODY_BYTES;
each is exceeded by one and the answer must name the path.
"""

from __future__ import annotations

import json

import pytest

from schemas import case as case_schema
from tests.api.support import bearer, make_case


def _layer(n: int) -> dict:
    return {"name": f"layer {n}", "thickness": "10 um", "diffusivity": "1e-10 m^2/s",
            "partition": 1.0}


def test_a_body_over_the_size_limit_is_413(sec_app, sec_tokens):
    limit = sec_app.config["MAX_BODY_BYTES"]
    body = json.dumps(make_case(title="x", reference="r" * (limit + 10)))
    response = sec_app.test_client().post("/v1/validate", data=body,
                                          content_type="application/json",
                                          headers=bearer(sec_tokens["engineer"]))
    assert response.status_code == 413
    assert response.mimetype == "application/problem+json"
    assert str(limit) in response.get_json()["detail"]


OVER_LIMIT = [
    ("layers", lambda: make_case(layers=[_layer(n) for n in range(case_schema.MAX_LAYERS + 1)])),
    ("probes", lambda: make_case(probes=["1 um"] * (case_schema.MAX_PROBES + 1))),
    ("regime.times", lambda: make_case(regime={
        "kind": "transient", "duration": "1000 s",
        "times": [f"{n + 1} s" for n in range(case_schema.MAX_TIMES + 1)]})),
    ("title", lambda: make_case(title="t" * (case_schema.MAX_TITLE_LENGTH + 1))),
    ("reference", lambda: make_case(reference="r" * (case_schema.MAX_REFERENCE_LENGTH + 1))),
    ("tags", lambda: make_case(tags=[f"t{n}" for n in range(case_schema.MAX_TAGS + 1)])),
    ("tags[0]", lambda: make_case(tags=["g" * (case_schema.MAX_TAG_LENGTH + 1)])),
    ("layers[0].name", lambda: make_case(layers=[{
        **_layer(0), "name": "n" * (case_schema.MAX_LAYER_NAME_LENGTH + 1)}])),
]


@pytest.mark.parametrize("path,build", OVER_LIMIT, ids=[p for p, _ in OVER_LIMIT])
def test_each_document_limit_is_a_422_naming_the_path(sec_app, sec_tokens, path, build):
    response = sec_app.test_client().post("/v1/validate", json=build(),
                                          headers=bearer(sec_tokens["engineer"]))
    assert response.status_code == 422, response.get_json()
    problem = response.get_json()
    assert response.mimetype == "application/problem+json"
    paths = [error["path"] for error in problem["errors"]]
    assert path in paths, problem["errors"]
    message = next(e["message"] for e in problem["errors"] if e["path"] == path)
    assert any(ch.isdigit() for ch in message), message  # says what the limit is


def test_at_the_limit_is_accepted(sec_app, sec_tokens):
    document = make_case(layers=[_layer(n) for n in range(case_schema.MAX_LAYERS)],
                         probes=["1 um"] * case_schema.MAX_PROBES,
                         title="t" * case_schema.MAX_TITLE_LENGTH)
    response = sec_app.test_client().post("/v1/validate", json=document,
                                          headers=bearer(sec_tokens["engineer"]))
    assert response.status_code == 200, response.get_json()
