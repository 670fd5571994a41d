"""Validation and content-addressed cases."""

from __future__ import annotations

import schemas
from tests.api.support import bearer, count_rows, make_case


def test_validate_returns_the_normalised_case_in_si(client, store, tokens):
    before = count_rows(store)
    response = client.post("/v1/validate", json=make_case(), headers=bearer(tokens["engineer"]))
    assert response.status_code == 200
    body = response.get_json()
    assert body == schemas.validate_case(make_case()).normalised
    assert body["layers"][0]["thickness"] == {"value": 5e-05, "unit": "m"}
    assert count_rows(store) == before  # validation stores nothing


def test_validate_names_the_bad_field(client, tokens):
    bad = make_case(geometry="torus")
    response = client.post("/v1/validate", json=bad, headers=bearer(tokens["engineer"]))
    assert response.status_code == 422
    assert any(e["path"] == "geometry" for e in response.get_json()["errors"])


def test_same_content_twice_gets_the_same_id(client, store, tokens):
    headers = bearer(tokens["engineer"])
    first = client.post("/v1/cases", json=make_case(), headers=headers)
    assert first.status_code == 201
    rows = count_rows(store)
    reordered = dict(reversed(list(make_case().items())))
    second = client.post("/v1/cases", json=reordered, headers=headers)
    assert second.status_code == 200
    assert second.get_json() == first.get_json()
    assert first.get_json()["sha256"] == schemas.case_sha256(make_case())
    assert count_rows(store) == rows
    other = client.post("/v1/cases", json=make_case(title="another"), headers=headers)
    assert other.status_code == 201
    assert other.get_json()["case_id"] != first.get_json()["case_id"]


def test_list_paginates_and_filters_by_tag(client, tokens):
    headers = bearer(tokens["engineer"])
    ids = []
    for i in range(5):
        tags = ["even"] if i % 2 == 0 else ["odd"]
        ids.append(client.post("/v1/cases", json=make_case(title=f"case {i}", tags=tags),
                               headers=headers).get_json()["case_id"])
    reader = bearer(tokens["auditor"])
    page = client.get("/v1/cases?limit=2&offset=0", headers=reader).get_json()
    assert page["total"] == 5 and page["limit"] == 2 and len(page["items"]) == 2
    rest = client.get("/v1/cases?limit=10&offset=2", headers=reader).get_json()
    listed = [c["case_id"] for c in page["items"] + rest["items"]]
    assert sorted(listed) == sorted(ids) and len(set(listed)) == 5
    even = client.get("/v1/cases?tag=even", headers=reader).get_json()
    assert even["total"] == 3
    assert {c["title"] for c in even["items"]} == {"case 0", "case 2", "case 4"}
    assert client.get("/v1/cases?tag=none", headers=reader).get_json()["total"] == 0


def test_read_one_case(client, tokens):
    case = make_case()
    created = client.post("/v1/cases", json=case, headers=bearer(tokens["engineer"])).get_json()
    response = client.get(f"/v1/cases/{created['case_id']}", headers=bearer(tokens["reviewer"]))
    body = response.get_json()
    assert body["document"] == case
    assert body["created_by"] == "erin.engineer"
    assert body["tags"] == sorted(case["tags"])
    history = client.get(f"/v1/cases/{created['case_id']}/runs",
                         headers=bearer(tokens["reviewer"])).get_json()
    assert history == {"case_id": created["case_id"], "items": []}
