"""Hostile requests get a small 4xx before any work (issue 13, bounded requests): the costly
cases are refused by their cost estimate naming the field to change, deep nesting and lone
surrogates are refused before the document is used, offsets beyond any store are refused, and
a body with 100,000 bad layers gets a short error list. Each failed on main before (a 500, a
17 MB error list, or a solve that exhausted memory or ran for minutes)."""

from __future__ import annotations

import json
import tracemalloc

import pytest
from click.testing import CliRunner

from service.cli import main
from tests.api.support import bearer, make_case
from tests.security.hostile_cases import long_transient, steep_many_layer_steady
from tests.ui.support import sign_in

GIB = 2**30


def _post(app, tokens, path: str, body: bytes | str):
    return app.test_client().post(path, data=body, content_type="application/json",
                                  headers=bearer(tokens["engineer"]))


@pytest.mark.parametrize(("case", "path"), [(steep_many_layer_steady, "layers"),
                                            (long_transient, "regime.times")])
@pytest.mark.parametrize("endpoint", ["/v1/validate", "/v1/cases"])
def test_a_case_over_the_cost_budget_is_refused_naming_the_field(sec_app, sec_tokens, case,
                                                                 path, endpoint):
    tracemalloc.start()
    try:
        response = _post(sec_app, sec_tokens, endpoint, json.dumps(case()))
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert response.status_code == 422
    errors = response.get_json()["errors"]
    assert path in [e["path"] for e in errors]
    assert all("cost budget" in e["message"] for e in errors)
    assert peak < GIB / 16  # refused on the estimate: nothing was solved


def test_the_command_line_check_refuses_a_case_over_budget(tmp_path):
    case_file = tmp_path / "steep.json"
    case_file.write_text(json.dumps(steep_many_layer_steady()))
    result = CliRunner().invoke(main, ["check", str(case_file)])
    assert result.exit_code != 0
    assert "cost budget" in result.output


def test_a_scaled_budget_admits_what_the_default_refuses(sec_app, sec_tokens):
    sec_app.config["COST_BUDGET_SCALE"] = 10.0
    try:
        response = _post(sec_app, sec_tokens, "/v1/validate", json.dumps(long_transient()))
    finally:
        sec_app.config["COST_BUDGET_SCALE"] = 1.0
    assert response.status_code == 200


def test_deep_nesting_is_400_without_parsing(sec_app, sec_tokens):
    body = '{"title": ' + "[" * 100_000 + "]" * 100_000 + "}"
    response = _post(sec_app, sec_tokens, "/v1/validate", body)
    assert response.status_code == 400
    assert "deeper than" in response.get_json()["detail"]


def test_nesting_inside_strings_does_not_count(sec_app, sec_tokens):
    response = _post(sec_app, sec_tokens, "/v1/validate",
                     json.dumps(make_case(reference="[" * 200)))
    assert response.status_code == 200


@pytest.mark.parametrize(("body", "path"), [
    ('{"title": "\\ud800"}', "title"),
    ('{"layers": [{"name": "a\\udfffb"}]}', "layers[0].name"),
])
def test_a_lone_surrogate_is_422_naming_the_field(sec_app, sec_tokens, body, path):
    document = make_case()
    document.update(json.loads(body))
    response = _post(sec_app, sec_tokens, "/v1/cases",
                     json.dumps(document, ensure_ascii=True))
    assert response.status_code == 422
    assert path in [e["path"] for e in response.get_json()["errors"]]


def test_a_surrogate_pair_is_text(sec_app, sec_tokens):
    response = _post(sec_app, sec_tokens, "/v1/validate",
                     json.dumps(make_case(title="pair \U0001F600"), ensure_ascii=True))
    assert response.status_code == 200


@pytest.mark.parametrize("listing", ["/v1/cases", "/v1/audit"])
def test_an_offset_beyond_any_store_is_refused_naming_it(sec_app, sec_tokens, listing):
    response = sec_app.test_client().get(f"{listing}?offset={2**64}",
                                         headers=bearer(sec_tokens["admin"]))
    assert response.status_code == 422
    assert [e["path"] for e in response.get_json()["errors"]] == ["offset"]


def test_a_body_of_100000_bad_layers_gets_a_small_answer(sec_app, sec_tokens):
    body = json.dumps(make_case(layers=[{}] * 100_000))
    response = _post(sec_app, sec_tokens, "/v1/validate", body)
    assert response.status_code == 422
    assert len(response.data) < 10_000
    assert [e["path"] for e in response.get_json()["errors"]] == ["layers"]


def test_error_lists_are_capped_with_a_count(sec_app, sec_tokens):
    layers = [{"name": f"n{i}", "thickness": "bad", "diffusivity": "bad"} for i in range(20)]
    document = make_case(layers=layers, probes=["bad"] * 150)
    response = _post(sec_app, sec_tokens, "/v1/validate", json.dumps(document))
    problem = response.get_json()
    assert response.status_code == 422
    assert len(problem["errors"]) == 100
    assert problem["errors_total"] > 100


@pytest.mark.parametrize("page", ["/ui/runs", "/ui/audit"])
def test_an_offset_beyond_any_store_is_400_on_the_pages(sec_app, sec_tokens, page):
    client = sec_app.test_client()
    sign_in(client, sec_tokens["admin"])
    assert client.get(f"{page}?offset=2").status_code == 200
    response = client.get(f"{page}?offset={2**64}")
    assert response.status_code == 400
    assert "offset" in response.get_data(as_text=True)


def test_the_command_line_check_names_a_lone_surrogate(tmp_path):
    case_file = tmp_path / "surrogate.json"
    case_file.write_text('{"schema_version": 1, "title": "a\\ud800b"}')
    result = CliRunner().invoke(main, ["check", str(case_file)])
    assert result.exit_code != 0
    assert "title: holds a lone UTF-16 surrogate" in result.output
