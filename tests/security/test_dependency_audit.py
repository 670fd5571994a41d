"""``pip-audit`` of the installed (locked) environment against PyPI's vulnerability data.

pip-audit asks PyPI's JSON API, a package registry, for the advisories of every installed
distribution. When that service cannot be reached (no network), the test is SKIPPED and says
so: nothing was audited then, and a pass would be a lie. The same holds when the registry
answers but serves no vulnerability data (a mirror without PyPI's JSON API answers "not found"
for every distribution): pip-audit then skips each one, and so does this test. Known advisories
without a fixed version still fail the test: they need a decision, written down, not silence.
The local project itself (fluxproof, not on PyPI) is left out.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

NETWORK_SIGNS = ("ConnectionError", "Max retries exceeded", "NameResolutionError",
                 "Temporary failure in name resolution", "Network is unreachable",
                 "ConnectTimeout", "ReadTimeout", "Connection refused")


def _pip_audit() -> list[str]:
    executable = Path(sys.executable).with_name("pip-audit")
    if executable.exists():
        return [str(executable)]
    found = shutil.which("pip-audit")
    if found:
        return [found]
    pytest.fail("pip-audit is not installed (it is in the test extra: pip install -e '.[test]')")
    raise AssertionError


@pytest.mark.slow
def test_installed_dependencies_have_no_known_vulnerabilities(tmp_path):
    command = _pip_audit() + ["--local", "--format", "json", "--progress-spinner", "off",
                              "--skip-editable", "--timeout", "20",
                              "--cache-dir", str(tmp_path / "cache")]
    done = subprocess.run(command, capture_output=True, text=True, timeout=600)
    if done.returncode not in (0, 1) or not done.stdout.strip().startswith("{"):
        if any(sign in done.stderr for sign in NETWORK_SIGNS):
            pytest.skip("pip-audit could not reach PyPI's vulnerability service; the "
                        f"dependencies were NOT audited: {done.stderr.strip()[-400:]}")
        pytest.fail(f"pip-audit failed ({done.returncode}): {done.stderr[-2000:]}")
    report = json.loads(done.stdout)
    dependencies = report["dependencies"]
    audited = [d for d in dependencies if "skip_reason" not in d]
    vulnerable = [f"{d['name']} {d['version']}: " + ", ".join(
        f"{v['id']} (fixed in {', '.join(v.get('fix_versions') or ['no release'])})"
        for v in d["vulns"]) for d in audited if d.get("vulns")]
    if not audited:
        reasons = sorted({d["skip_reason"].split(":")[0] for d in dependencies})
        pytest.skip(f"pip-audit could audit none of the {len(dependencies)} installed "
                    f"distributions ({'; '.join(reasons)}): the registry reached from here "
                    "serves no vulnerability data, so the dependencies were NOT audited")
    print(f"\nSECURITY pip-audit: {len(audited)} distributions audited, "
          f"{len(dependencies) - len(audited)} skipped, {len(vulnerable)} with advisories")
    for line in vulnerable:
        print(f"  {line}")
    assert vulnerable == [], "known vulnerabilities:\n" + "\n".join(vulnerable)
