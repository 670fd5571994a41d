"""``fluxproof qualify`` on this installation passes and writes its three reports; a tampered
installed file and a wrong published value each make it fail, naming what differs."""

from __future__ import annotations

import io
import json
import shutil
import subprocess
import sys
from pathlib import Path

import pypdf
import pytest
from click.testing import CliRunner

from service.cli import main
from service.qualification import manifest, operational

FLUXPROOF = Path(sys.executable).parent / "fluxproof"


def _copy_installation(target: Path) -> Path:
    root = manifest.install_root()
    for package in manifest.PACKAGES:
        shutil.copytree(root / package, target / package,
                        ignore=shutil.ignore_patterns("__pycache__"))
    return target


def test_fluxproof_qualify_passes_here_and_writes_json_html_pdf(tmp_path):
    out = tmp_path / "qualification"
    finished = subprocess.run([str(FLUXPROOF), "qualify", "--out", str(out)],
                              capture_output=True, text=True, timeout=600, check=False)
    assert finished.returncode == 0, finished.stdout + finished.stderr
    assert "QUALIFICATION: PASS" in finished.stdout
    document = json.loads((out / "qualification.json").read_text(encoding="utf-8"))
    assert document["passed"] is True
    assert document["summary"]["failures"] == []
    assert document["installation"]["files_checked"] == len(manifest.read_manifest()["files"])
    assert document["installation"]["manifest_sha256"] == manifest.sha256_of(
        manifest.MANIFEST_PATH)
    cases = {case.id for case in operational.reference_cases()}
    assert {r["id"] for r in document["operation"]} == cases and len(cases) >= 10
    for result in document["operation"]:
        assert result["passed"] and result["source"] and result["tolerance"] > 0
        assert abs(result["result"] - result["expected"]) <= (
            result["tolerance"] * abs(result["expected"]))
    html = (out / "qualification.html").read_text(encoding="utf-8")
    assert "✓ Overall result: PASS" in html and "printed name" in html
    reader = pypdf.PdfReader(io.BytesIO((out / "qualification.pdf").read_bytes()))
    pages = [" ".join(page.extract_text().split()) for page in reader.pages]
    assert "Overall result: PASS" in pages[0] and "Printed name" in pages[0]
    for number, text in enumerate(pages, start=1):
        assert f"page {number} of {len(pages)}" in text
    assert "OQ-15" in " ".join(pages)


def test_a_tampered_installed_file_fails_naming_it(tmp_path, monkeypatch):
    root = _copy_installation(tmp_path / "site")
    monkeypatch.setattr(manifest, "install_root", lambda: root)
    untouched = CliRunner().invoke(main, ["qualify", "--out", str(tmp_path / "a")])
    assert untouched.exit_code == 0, untouched.output

    target = root / "worker" / "engine" / "limits.py"
    target.write_text(target.read_text(encoding="utf-8") + "\n# changed\n", encoding="utf-8")
    tampered = CliRunner().invoke(main, ["qualify", "--out", str(tmp_path / "b")])
    assert tampered.exit_code == 1
    assert "worker/engine/limits.py: SHA-256" in tampered.output
    assert "QUALIFICATION: FAIL" in tampered.output
    document = json.loads((tmp_path / "b" / "qualification.json").read_text(encoding="utf-8"))
    assert document["passed"] is False and document["summary"]["installation"] == "FAIL"
    assert document["summary"]["operation"] == "pass"
    assert [d["path"] for d in document["installation"]["file_differences"]] == [
        "worker/engine/limits.py"]


def test_a_wrong_published_value_fails_naming_the_case(tmp_path, monkeypatch):
    cases = tmp_path / "cases"
    shutil.copytree(operational.CASE_DIRECTORY, cases)
    path = cases / "oq-05.json"
    data = json.loads(path.read_text(encoding="utf-8"))
    data["expected"]["value"] *= 1 + 1e-6  # beyond its tolerance of 1e-9
    path.write_text(json.dumps(data), encoding="utf-8")
    monkeypatch.setattr(operational, "CASE_DIRECTORY", cases)
    result = CliRunner().invoke(main, ["qualify", "--out", str(tmp_path / "out")])
    assert result.exit_code == 1
    assert "OQ-05: concentration_min = 0.15 mol/m^3 differs from the published" in result.output
    document = json.loads((tmp_path / "out" / "qualification.json").read_text(encoding="utf-8"))
    failed = [r["id"] for r in document["operation"] if not r["passed"]]
    assert failed == ["OQ-05"] and document["summary"]["installation"] == "pass"


@pytest.mark.parametrize("factor", [1 + 1e-11, 1 - 1e-11])
def test_a_published_value_moved_within_tolerance_still_passes(tmp_path, monkeypatch, factor):
    cases = tmp_path / "cases"
    cases.mkdir()
    data = json.loads((operational.CASE_DIRECTORY / "oq-01.json").read_text(encoding="utf-8"))
    data["expected"]["value"] *= factor
    (cases / "oq-01.json").write_text(json.dumps(data), encoding="utf-8")
    monkeypatch.setattr(operational, "CASE_DIRECTORY", cases)
    (result,) = operational.qualify_operation()
    assert result.passed, result.reason
