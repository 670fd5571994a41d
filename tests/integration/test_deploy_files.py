"""The deployment files agree with the code and with each other (no services needed)."""

from __future__ import annotations

import configparser
import runpy
import subprocess

import pytest
import yaml

from service.settings import DEFAULTS
from tests.integration.worker_processes import REPO_ROOT

DEPLOY = REPO_ROOT / "deploy"
SCRIPTS = ["local-stack.sh", "worker.sh", "beat.sh"]


def _gunicorn_settings(monkeypatch: pytest.MonkeyPatch, **env: str) -> dict:
    for name in ("FLUXPROOF_BIND", "WEB_CONCURRENCY", "FLUXPROOF_HTTP_THREADS"):
        monkeypatch.delenv(name, raising=False)
    for name, value in env.items():
        monkeypatch.setenv(name, value)
    return runpy.run_path(str(DEPLOY / "gunicorn.conf.py"))


def test_gunicorn_config_reads_bind_and_workers_from_the_environment(monkeypatch):
    import multiprocessing

    default = _gunicorn_settings(monkeypatch)
    assert default["bind"] == "127.0.0.1:8000"
    assert default["workers"] == 2 * multiprocessing.cpu_count() + 1
    assert default["worker_class"] == "sync" and default["preload_app"] is False
    assert default["timeout"] > 0 and default["graceful_timeout"] > 0

    custom = _gunicorn_settings(monkeypatch, FLUXPROOF_BIND="0.0.0.0:9000", WEB_CONCURRENCY="3",
                                FLUXPROOF_HTTP_THREADS="4")
    assert (custom["bind"], custom["workers"], custom["worker_class"]) == \
        ("0.0.0.0:9000", 3, "gthread")


def test_gunicorn_config_names_a_bad_setting(monkeypatch):
    with pytest.raises(SystemExit, match="WEB_CONCURRENCY: expected a whole number"):
        _gunicorn_settings(monkeypatch, WEB_CONCURRENCY="many")


@pytest.mark.parametrize("script", SCRIPTS)
def test_scripts_are_executable_bash_without_syntax_errors(script):
    path = DEPLOY / script
    assert path.stat().st_mode & 0o111, f"{script} is not executable"
    checked = subprocess.run(["bash", "-n", str(path)], capture_output=True, text=True)
    assert checked.returncode == 0, checked.stderr


def test_local_stack_refuses_an_unknown_command():
    result = subprocess.run(["bash", str(DEPLOY / "local-stack.sh"), "launch"],
                            capture_output=True, text=True)
    assert result.returncode == 2
    assert "usage:" in result.stderr and "start|stop|status" in result.stderr


def test_compose_file_defines_the_stack_and_refers_to_existing_scripts():
    compose = yaml.safe_load((DEPLOY / "compose.yaml").read_text())
    services = compose["services"]
    assert set(services) == {"api", "worker-1", "worker-2", "beat", "redis", "postgres",
                             "migrate"}
    for name in ("api", "worker-1", "worker-2", "beat", "migrate"):
        environment = services[name]["environment"]
        assert environment["FLUXPROOF_BROKER_URL"].startswith("redis://redis:6379/")
        assert environment["FLUXPROOF_DATABASE_URL"].startswith("postgresql+psycopg://")
        command = services[name]["command"]
        if command[0].startswith("deploy/"):
            assert (REPO_ROOT / command[0]).exists(), command
    assert services["api"]["command"][-1] == "service.wsgi:app"
    assert services["api"]["environment"]["FLUXPROOF_BIND"] == "0.0.0.0:8000"
    # A warm shutdown must be allowed to outlast the longest solve.
    for name in ("worker-1", "worker-2"):
        grace = int(services[name]["stop_grace_period"].rstrip("s"))
        assert grace > int(DEFAULTS["TASK_TIME_LIMIT"])
    assert services["beat"]["command"] == ["deploy/beat.sh"]


def _unit(name: str) -> configparser.ConfigParser:
    parser = configparser.ConfigParser(strict=False, interpolation=None)
    parser.optionxform = str  # keys are case-sensitive in systemd
    parser.read_string((DEPLOY / "systemd" / name).read_text())
    return parser


@pytest.mark.parametrize("name", ["fluxproof-api.service", "fluxproof-worker@.service",
                                  "fluxproof-beat.service"])
def test_systemd_units_start_files_that_exist_in_the_repository(name):
    unit = _unit(name)
    program = unit["Service"]["ExecStart"].split()[0]
    assert program.startswith("/opt/fluxproof/")
    relative = program.removeprefix("/opt/fluxproof/")
    if not relative.startswith(".venv/"):
        assert (REPO_ROOT / relative).exists(), program
    assert unit["Service"]["EnvironmentFile"] == "/etc/fluxproof/fluxproof.env"
    assert unit["Install"]["WantedBy"] == "multi-user.target"


def test_worker_unit_outlasts_the_task_time_limit_and_kills_leftovers():
    service = _unit("fluxproof-worker@.service")["Service"]
    assert int(service["TimeoutStopSec"]) > int(DEFAULTS["TASK_TIME_LIMIT"])
    assert service["KillMode"] == "mixed"
    assert "%i" in service["ExecStart"]


def test_env_example_sets_every_setting_the_units_need():
    lines = (DEPLOY / "systemd" / "fluxproof.env.example").read_text().splitlines()
    keys = {line.split("=", 1)[0] for line in lines if line and not line.startswith("#")}
    assert {"FLUXPROOF_DATABASE_URL", "FLUXPROOF_BROKER_URL", "FLUXPROOF_SECRET_KEY"} <= keys
    # Every other key is a documented setting (or the bind address of gunicorn.conf.py).
    unknown = [key for key in keys
               if key.removeprefix("FLUXPROOF_") not in DEFAULTS and key != "FLUXPROOF_BIND"]
    assert unknown == []


def test_readme_documents_every_deploy_file():
    readme = (DEPLOY / "README.md").read_text()
    files = [p.relative_to(DEPLOY).as_posix() for p in DEPLOY.rglob("*")
             if p.is_file() and "__pycache__" not in p.parts and p.name != "README.md"]
    missing = [f for f in files if f not in readme]
    assert missing == [], f"deploy/README.md does not mention {missing}"


def test_stack_helper_reads_the_schema_from_the_url():
    helper = runpy.run_path(str(DEPLOY / "stack_services.py"))
    url = "postgresql+psycopg://u@127.0.0.1:5432/test?options=-csearch_path%3Dmy_schema"
    assert helper["_schema_of"](url) == "my_schema"
    assert helper["_schema_of"]("postgresql+psycopg://u@127.0.0.1:5432/test") is None

