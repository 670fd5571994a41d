"""Installation qualification: what is installed here, against what the release requires.

- Python: its version against the project's ``Requires-Python``;
- distributions: every installed distribution and its version (``importlib.metadata``), and each
  requirement of the project (the base and the ``service`` extra) satisfied by what is
  installed (``packaging`` evaluates the specifiers and markers);
- files: the SHA-256 of each installed project file against the release manifest
  (:mod:`service.qualification.manifest`); a missing, changed or unlisted file is named. The
  manifest does not vouch for itself: its own SHA-256 is reported, to be compared with the one
  published with the release.
"""

from __future__ import annotations

import importlib.metadata
import platform
import sys
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from packaging.requirements import Requirement
from packaging.specifiers import SpecifierSet

from service.qualification import manifest as release_manifest

EXTRAS = ("service",)


@dataclass(frozen=True)
class Item:
    """One installation check: what was checked, what was expected and found, and whether
    they agree."""

    name: str
    expected: str
    found: str
    passed: bool


@dataclass
class InstallationResult:
    python: str
    platform: str
    project_version: str | None
    items: list[Item] = field(default_factory=list)
    distributions: dict[str, str] = field(default_factory=dict)
    files_checked: int = 0
    manifest_sha256: str | None = None
    file_differences: list[release_manifest.FileDifference] = field(default_factory=list)

    @property
    def passed(self) -> bool:
        return all(item.passed for item in self.items) and not self.file_differences

    def failures(self) -> list[str]:
        lines = [f"{i.name}: expected {i.expected}, found {i.found}"
                 for i in self.items if not i.passed]
        return lines + [d.words() for d in self.file_differences]

    def as_dict(self) -> dict[str, Any]:
        return {"passed": self.passed, "python": self.python, "platform": self.platform,
                "project_version": self.project_version,
                "items": [asdict(i) for i in self.items], "distributions": self.distributions,
                "files_checked": self.files_checked, "manifest_sha256": self.manifest_sha256,
                "file_differences": [asdict(d) for d in self.file_differences]}


def installed_distributions() -> dict[str, str]:
    """Name -> version of every distribution importable here, sorted by name."""
    found: dict[str, str] = {}
    for dist in importlib.metadata.distributions():
        name = dist.metadata["Name"]
        if name:
            found.setdefault(name, dist.version)
    return dict(sorted(found.items(), key=lambda kv: kv[0].lower()))


def _version_of(name: str) -> str | None:
    try:
        return importlib.metadata.version(name)
    except importlib.metadata.PackageNotFoundError:
        return None


def requirement_items(requirements: list[str], extras: tuple[str, ...] = EXTRAS) -> list[Item]:
    """One item per requirement that applies here (base, or one of ``extras``)."""
    items = []
    for text in requirements:
        requirement = Requirement(text)
        marker = requirement.marker
        applies = marker is None or any(marker.evaluate({"extra": e}) for e in ("", *extras))
        if not applies:
            continue
        version = _version_of(requirement.name)
        spec = str(requirement.specifier) or "any version"
        passed = version is not None and requirement.specifier.contains(version,
                                                                         prereleases=True)
        items.append(Item(f"requirement {requirement.name}", spec, version or "not installed",
                          passed))
    return items


def qualify_installation(root: Path | None = None,
                         manifest: Mapping[str, Any] | None = None) -> InstallationResult:
    """Check this installation (or the files under ``root`` against ``manifest``)."""
    root = root or release_manifest.install_root()
    manifest_sha256 = None
    if manifest is None:
        manifest = release_manifest.read_manifest()
        manifest_sha256 = release_manifest.sha256_of(release_manifest.MANIFEST_PATH)
    python = platform.python_version()
    result = InstallationResult(python=python, platform=platform.platform(),
                                project_version=release_manifest.project_version(),
                                manifest_sha256=manifest_sha256)
    try:
        metadata = importlib.metadata.metadata(release_manifest.PROJECT)
    except importlib.metadata.PackageNotFoundError:
        result.items.append(Item("project distribution", release_manifest.PROJECT,
                                 "not installed", False))
    else:
        requires_python = metadata.get("Requires-Python") or ""
        result.items.append(Item("Python version", requires_python or "any", python,
                                 SpecifierSet(requires_python).contains(python)))
        result.items.append(Item("project version", str(manifest.get("version")),
                                 str(result.project_version),
                                 manifest.get("version") == result.project_version))
        result.items.extend(requirement_items(metadata.get_all("Requires-Dist") or []))
    result.items.append(Item("implementation", "CPython (as built and tested)",
                             sys.implementation.name, sys.implementation.name == "cpython"))
    result.distributions = installed_distributions()
    found = release_manifest.file_hashes(root)
    result.files_checked = len(found)
    result.file_differences = release_manifest.compare(manifest.get("files") or {}, found)
    return result
