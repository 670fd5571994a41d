"""Installation qualification: the file manifest (changed, missing and unlisted files named,
both directions), the package data it covers, and the requirements check."""

from __future__ import annotations

import shutil
import tomllib
from pathlib import Path

from service.qualification import installation, manifest

PYPROJECT = Path(__file__).resolve().parents[4] / "pyproject.toml"


def _copy(target: Path) -> Path:
    root = manifest.install_root()
    for package in manifest.PACKAGES:
        shutil.copytree(root / package, target / package,
                        ignore=shutil.ignore_patterns("__pycache__"))
    return target


def test_the_committed_manifest_matches_the_installed_files():
    differences = manifest.compare(manifest.read_manifest()["files"],
                                   manifest.file_hashes(manifest.install_root()))
    assert [d.words() for d in differences] == [], "run `make manifest` and commit it"


def test_package_data_globs_are_those_setuptools_installs():
    declared = tomllib.loads(PYPROJECT.read_text(encoding="utf-8"))["tool"]["setuptools"]
    assert {k: tuple(v) for k, v in declared["package-data"].items()} == manifest.PACKAGE_DATA
    assert set(declared["packages"]["find"]["include"]) == {f"{p}*" for p in manifest.PACKAGES}


def test_a_copy_passes_and_each_kind_of_difference_is_named(tmp_path):
    root = _copy(tmp_path / "site")
    recorded = manifest.read_manifest()
    assert installation.qualify_installation(root, recorded).passed

    (root / "schemas" / "canonical.py").write_bytes(b"# replaced\n")
    (root / "service" / "report" / "text.py").unlink()
    (root / "worker" / "engine" / "extra_module.py").write_text("x = 1\n", encoding="utf-8")
    result = installation.qualify_installation(root, recorded)
    assert not result.passed
    assert {(d.path, d.kind) for d in result.file_differences} == {
        ("schemas/canonical.py", "changed"), ("service/report/text.py", "missing"),
        ("worker/engine/extra_module.py", "unlisted")}
    failures = "\n".join(result.failures())
    assert "schemas/canonical.py: SHA-256" in failures
    assert "service/report/text.py: listed in the manifest, not installed" in failures
    assert "worker/engine/extra_module.py: installed, not in the manifest" in failures


def test_a_manifest_of_another_version_fails_the_version_item(tmp_path):
    root = _copy(tmp_path / "site")
    recorded = dict(manifest.read_manifest(), version="0.0.0-other")
    result = installation.qualify_installation(root, recorded)
    assert not result.passed and result.file_differences == []
    assert "project version: expected 0.0.0-other" in "\n".join(result.failures())


def test_requirements_are_checked_against_the_installed_versions():
    items = installation.requirement_items(["numpy>=1.0", "numpy>=999", "no-such-dist-xyz>=1",
                                            'pytest>=1; extra == "test"'])
    assert [(i.name, i.passed) for i in items] == [
        ("requirement numpy", True), ("requirement numpy", False),
        ("requirement no-such-dist-xyz", False)]
    assert items[2].found == "not installed"


def test_manifest_check_command_names_a_difference(tmp_path, monkeypatch, capsys):
    root = _copy(tmp_path / "site")
    monkeypatch.setattr(manifest, "install_root", lambda: root)
    assert manifest.main(["--check"]) == 0
    (root / "service" / "cli.py").write_bytes(b"# replaced\n")
    assert manifest.main(["--check"]) == 1
    assert "service/cli.py: SHA-256" in capsys.readouterr().out
