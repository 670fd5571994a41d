"""The release manifest: the SHA-256 of every file the project installs.

The files are those setuptools installs (``pyproject.toml``: the packages' Python modules and
their package data, :data:`PACKAGE_DATA`), found under the directory the installed packages are
imported from. ``make manifest`` (``python -m service.qualification.manifest``) writes
``manifest.json`` beside this module; ``--check`` exits 1 naming the files that differ from it.
The manifest does not list itself.
"""

from __future__ import annotations

import argparse
import hashlib
import importlib.metadata
import json
import sys
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path

import service

PROJECT = "fluxproof"
PACKAGES = ("service", "worker", "schemas")
#: Package data installed beside the modules: the same globs as ``[tool.setuptools.package-data]``
#: (a unit test keeps the two equal).
PACKAGE_DATA = {
    "schemas": ("json/*.json",),
    "service": ("templates/*.html", "static/*.css", "store/migrations/*.mako",
                "demo_cases/*.json", "qualification/*.json", "qualification/cases/*.json"),
}
MANIFEST_PATH = Path(__file__).resolve().parent / "manifest.json"
MANIFEST_NAME = "service/qualification/manifest.json"
FORMAT = 1


def install_root() -> Path:
    """The directory the project's packages are imported from (site-packages, or the source
    tree of an editable install)."""
    return Path(service.__file__).resolve().parent.parent


def sha256_of(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as stream:
        for block in iter(lambda: stream.read(1 << 16), b""):
            digest.update(block)
    return digest.hexdigest()


def installed_files(root: Path) -> list[str]:
    """Paths (relative to ``root``, ``/``-separated, sorted) of the files the project installs."""
    found: set[Path] = set()
    for package in PACKAGES:
        base = root / package
        found.update(p for p in base.rglob("*.py") if "__pycache__" not in p.parts)
        for pattern in PACKAGE_DATA.get(package, ()):
            found.update(base.glob(pattern))
    names = {p.relative_to(root).as_posix() for p in found if p.is_file()}
    names.discard(MANIFEST_NAME)
    return sorted(names)


def file_hashes(root: Path) -> dict[str, str]:
    return {name: sha256_of(root / name) for name in installed_files(root)}


def project_version() -> str | None:
    try:
        return importlib.metadata.version(PROJECT)
    except importlib.metadata.PackageNotFoundError:
        return None


def build_manifest(root: Path) -> dict:
    return {"format": FORMAT, "project": PROJECT, "version": project_version(),
            "algorithm": "sha256", "files": file_hashes(root)}


def read_manifest(path: Path = MANIFEST_PATH) -> dict:
    return json.loads(path.read_text(encoding="utf-8"))


@dataclass(frozen=True)
class FileDifference:
    """One file that is not as the manifest says: ``missing``, ``changed`` or ``unlisted``."""

    path: str
    kind: str
    expected: str | None
    found: str | None

    def words(self) -> str:
        return {"missing": f"{self.path}: listed in the manifest, not installed",
                "changed": f"{self.path}: SHA-256 {self.found} differs from the manifest's "
                           f"{self.expected}",
                "unlisted": f"{self.path}: installed, not in the manifest"}[self.kind]


def compare(expected: Mapping[str, str], found: Mapping[str, str]) -> list[FileDifference]:
    """Every difference between the manifest's hashes and the installed files', by path."""
    differences = []
    for path in sorted(set(expected) | set(found)):
        want, have = expected.get(path), found.get(path)
        if want == have:
            continue
        kind = "missing" if have is None else "unlisted" if want is None else "changed"
        differences.append(FileDifference(path, kind, want, have))
    return differences


def main(argv: Iterable[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m service.qualification.manifest",
                                     description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true",
                        help="compare the installed files with manifest.json; write nothing")
    args = parser.parse_args(list(argv) if argv is not None else None)
    root = install_root()
    if args.check:
        differences = compare(read_manifest()["files"], file_hashes(root))
        for difference in differences:
            print(difference.words())
        if differences:
            print("the manifest is out of date: run `make manifest` and commit it")
        return 1 if differences else 0
    manifest = build_manifest(root)
    MANIFEST_PATH.write_text(json.dumps(manifest, indent=1, sort_keys=True) + "\n",
                             encoding="utf-8")
    print(f"{MANIFEST_PATH}: {len(manifest['files'])} files")
    return 0


if __name__ == "__main__":
    sys.exit(main())
