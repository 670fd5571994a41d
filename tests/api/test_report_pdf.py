"""The archival PDF of a run: it parses, every page carries the run id, the case's SHA-256 and
``page x of y``, the sign-off's fields are printed, and the endpoint answers 404 and roles as
the HTML report does (the role matrix is in test_roles.py)."""

from __future__ import annotations

import io
import re

import pypdf
import pytest

from service.report import pdf_record
from tests.api.support import SIGN, bearer, make_case


def _pages(response) -> list[str]:
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.mimetype == "application/pdf"
    content = response.get_data()
    assert content.startswith(b"%PDF-")
    reader = pypdf.PdfReader(io.BytesIO(content))
    return [" ".join(page.extract_text().split()) for page in reader.pages]


def _long_case() -> dict:
    # Many probes make the inputs table long enough to run over several pages.
    case = make_case(title="Archival PDF: µ, ≤ and ✓ set in DejaVu")
    case["layers"][0]["thickness"] = "50 um"
    case["probes"] = [f"{5 * i} um" for i in range(1, 11)]
    return case


@pytest.fixture
def signed_run(client, tokens):
    response = client.post("/v1/runs", json={"case": _long_case()},
                           headers=bearer(tokens["engineer"]))
    assert response.status_code == 202, response.get_json()
    run_id = response.get_json()["run_id"]
    record = client.get(f"/v1/runs/{run_id}", headers=bearer(tokens["auditor"])).get_json()
    assert record["status"] == "succeeded", record
    signed = client.post(f"/v1/runs/{run_id}/signoffs",
                         json={"decision": "approved", **SIGN,
                               "comment": "checked at 5 µm ≤ limit"},
                         headers=bearer(tokens["reviewer"]))
    assert signed.status_code == 201, signed.get_json()
    return run_id, record["case_sha256"]


def test_every_page_is_headed_with_run_case_hash_and_page_x_of_y(client, tokens, signed_run):
    run_id, case_hash = signed_run
    pages = _pages(client.get(f"/v1/runs/{run_id}/report.pdf",
                              headers=bearer(tokens["auditor"])))
    assert len(pages) >= 2
    for number, text in enumerate(pages, start=1):
        assert f"run {run_id}" in text
        assert f"case sha256 {case_hash}" in text
        assert f"page {number} of {len(pages)}" in text
    whole = " ".join(pages)
    for section in ("Verdicts", "Calculation verified", "Design requirements met",
                    "Requirements", "Inputs", "Quantities", "Checks", "Methods", "Sign-offs",
                    "Caution"):
        assert section in whole, section
    assert "Archival PDF: µ, ≤ and ✓ set in DejaVu" in whole


def test_the_sign_off_is_printed_with_its_fields(client, tokens, signed_run):
    run_id, _ = signed_run
    whole = " ".join(_pages(client.get(f"/v1/runs/{run_id}/report.pdf",
                                       headers=bearer(tokens["engineer"]))))
    signoffs = whole[whole.index("Sign-offs"):]
    assert "reviewer rafael.reviewer" in signoffs
    assert "decision approved" in signoffs
    assert "comment checked at 5 µm ≤ limit" in signoffs
    assert "meaning approval" in signoffs and "printed name rafael.reviewer" in signoffs
    assert re.search(r"at \d{4}-\d\d-\d\dT", signoffs)


def test_an_unsigned_run_says_so(client, tokens, controlled_engine):
    run_id = client.post("/v1/runs", json={"case": make_case()},
                         headers=bearer(tokens["engineer"])).get_json()["run_id"]
    whole = " ".join(_pages(client.get(f"/v1/runs/{run_id}/report.pdf",
                                       headers=bearer(tokens["reviewer"]))))
    assert "Not signed off." in whole and "reviewer rafael" not in whole


def test_a_missing_run_is_404_problem(client, tokens):
    response = client.get("/v1/runs/none/report.pdf", headers=bearer(tokens["auditor"]))
    assert response.status_code == 404
    assert response.mimetype == "application/problem+json"


def test_without_a_token_it_is_401(client, signed_run):
    run_id, _ = signed_run
    assert client.get(f"/v1/runs/{run_id}/report.pdf").status_code == 401


def test_sign_off_fields_are_printed_generically_whatever_they_are():
    """Fields a later sign-off carries (printed name, meaning, signature) are printed under
    their own names, the usual ones first; a field left out is not invented."""
    rows = pdf_record.signoff_rows({"comment": "c", "signature": "abc", "reviewer": "r",
                                    "name": "Rafael Reviewer", "meaning": "approval",
                                    "new_field": {"key_id": "k1"}})
    assert rows == [("printed name", "Rafael Reviewer"), ("reviewer", "r"),
                    ("meaning", "approval"), ("comment", "c"), ("signature", "abc"),
                    ("new field", "key id: k1")]
    assert pdf_record.signoff_rows({"reviewer": "r"}) == [("reviewer", "r")]


def test_deviations_head_every_page_when_the_record_lists_them():
    record = {"run_id": "r1", "case_sha256": "ab" * 32, "deviations": [{"path": "x"}]}
    assert pdf_record.header_lines(record)[1].startswith("DEVIATIONS: 1")
    assert not any("DEVIATIONS" in line for line in pdf_record.header_lines(
        {"run_id": "r1", "case_sha256": "ab" * 32}))


def test_a_failed_run_prints_its_error_and_no_quantities():
    content = pdf_record.render_record_pdf(
        {"run_id": "r-1", "case_sha256": "cd" * 32, "status": "failed", "verdict": None,
         "error": "the solver did not converge", "signoffs": []},
        {"title": "failed run"})
    pages = [" ".join(p.extract_text().split())
             for p in pypdf.PdfReader(io.BytesIO(content)).pages]
    whole = " ".join(pages)
    assert "Engine failure the solver did not converge" in whole
    assert "NO — no result" in whole and "No quantities" in whole
    assert all("page" in p and "run r-1" in p for p in pages)
