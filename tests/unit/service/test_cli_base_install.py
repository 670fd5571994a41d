"""``fluxproof check`` and ``fluxproof --help`` on the base install (no ``service`` extra).

A fresh interpreter runs the command line with an import hook (a ``sys.meta_path`` finder) that
refuses every module of the service extra, as a ``pip install fluxproof`` without extras would.
This stands in for building a venv with only the base dependencies, which costs about a minute
on the development machines; the hook is checked to refuse what it should.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from importlib import resources
from pathlib import Path

REPO_ROOT = Path(__file__).resolve().parents[3]
DEMO_CASE = resources.files("service") / "demo_cases" / "04-arterial-wall-uptake.json"

#: Top-level modules that only the ``service`` extra brings (and what they pull in).
SERVICE_EXTRAS = ("flask", "werkzeug", "sqlalchemy", "celery", "kombu", "alembic", "redis",
                  "psycopg", "apispec", "matplotlib", "requests", "gunicorn")

BASE_INSTALL = """
import sys
from importlib.abc import MetaPathFinder

BLOCKED = frozenset({blocked!r})


class RefuseServiceExtras(MetaPathFinder):
    def find_spec(self, fullname, path=None, target=None):
        if fullname.partition(".")[0] in BLOCKED:
            raise ModuleNotFoundError(f"No module named {{fullname!r}} (base install)",
                                      name=fullname)
        return None


sys.meta_path.insert(0, RefuseServiceExtras())
{body}
"""

RUN_CLI = """
from service.cli import main
main(sys.argv[1:], prog_name="fluxproof")
"""


def _base_install(body: str, *args: str) -> subprocess.CompletedProcess:
    code = BASE_INSTALL.format(blocked=sorted(SERVICE_EXTRAS), body=body)
    env = {**os.environ, "PYTHONPATH": str(REPO_ROOT)}
    return subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True,
                          env=env, cwd=REPO_ROOT, timeout=300)


def test_the_hook_refuses_the_service_extras():
    # Without this, a hook that refuses nothing would let every test below pass.
    probe = _base_install("import sqlalchemy")
    assert probe.returncode == 1
    assert "No module named 'sqlalchemy' (base install)" in probe.stderr
    # The store needs the extra: importing the admin commands under the hook must fail.
    admin = _base_install("import service.cli_admin")
    assert admin.returncode == 1 and "(base install)" in admin.stderr


def test_check_runs_on_the_base_install():
    with resources.as_file(DEMO_CASE) as case_path:
        title = json.loads(case_path.read_text(encoding="utf-8"))["title"]
        text = _base_install(RUN_CLI, "check", str(case_path))
        as_json = _base_install(RUN_CLI, "check", str(case_path), "--format", "json")
    assert "Traceback" not in text.stderr, text.stderr
    assert text.returncode in (0, 1), text.stderr
    assert title in text.stdout
    record = json.loads(as_json.stdout)
    assert record["status"] == "succeeded"
    assert as_json.returncode == (0 if record["verdict"] == "pass" else 1)


def test_check_reports_an_invalid_case_on_the_base_install(tmp_path):
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({"schema_version": 1, "geometry": "cube"}), encoding="utf-8")
    result = _base_install(RUN_CLI, "check", str(bad))
    assert result.returncode == 2, result.stderr
    assert "geometry" in result.stderr and "Traceback" not in result.stderr


def test_help_lists_every_command_and_imports_none_of_them():
    body = RUN_CLI.replace("main(", "try:\n    main(") + """
except SystemExit as end:
    loaded = sorted(m for m in sys.modules if m.startswith("service.") and m != "service.cli")
    print("LOADED", loaded)
    raise
"""
    result = _base_install(body, "--help")
    assert result.returncode == 0, result.stderr
    for name in ("audit", "check", "db", "demo", "reverify", "serve", "token", "worker"):
        assert f"\n  {name} " in result.stdout
    assert "LOADED []" in result.stdout


def test_a_service_command_names_the_missing_extra():
    result = _base_install(RUN_CLI, "serve")
    assert result.returncode == 1
    assert "`fluxproof serve` needs the service extra" in result.stderr
    assert "pip install 'fluxproof[service]'" in result.stderr
    assert "Traceback" not in result.stderr
