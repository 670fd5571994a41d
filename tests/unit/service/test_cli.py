"""The command line: token, audit verify, db upgrade, reverify, worker's broker check, demo."""

from __future__ import annotations

import json

import click
from click.testing import CliRunner
from sqlalchemy import select, text

from service.cli import SUBCOMMANDS, main
from service.demo import case_files, packaged_cases
from service.store import default_store
from service.store.models import Token
from service.tokens import identify, token_digest
from tests.api.support import make_case
from tests.tampering import owner_edit

PASSWORD = {"FLUXPROOF_NEW_PASSWORD": "a long enough password"}


def _user(runner, login="rosa", role="reviewer", name="Rosa Reviewer"):
    return runner.invoke(main, ["user", "create", "--login", login, "--name", name, "--role",
                                role], env=PASSWORD)


def test_token_create_prints_the_token_once_and_stores_its_digest(data_dir):  # noqa: F811
    runner = CliRunner()
    assert _user(runner).exit_code == 0
    result = runner.invoke(main, ["token", "create", "--login", "ROSA", "--days", "7"])
    assert result.exit_code == 0, result.output
    token = result.stdout.strip().splitlines()[-1]
    identity = identify(default_store(), token)
    assert identity is not None
    assert (identity.login, identity.name, identity.role) == ("rosa", "Rosa Reviewer",
                                                              "reviewer")
    with default_store().transaction() as session:
        row = session.execute(select(Token)).scalar_one()
        assert row.sha256 == token_digest(token) and token not in (row.sha256, row.id)
        assert 6.9 < (row.expires_at - row.created_at).total_seconds() / 86400 < 7.1


def test_user_create_refuses_a_bad_role_a_blank_name_a_taken_login(data_dir):  # noqa: F811
    runner = CliRunner()
    bad_role = _user(runner, role="boss")
    assert bad_role.exit_code == 2 and "boss" in bad_role.output
    blank = _user(runner, name="  ")
    assert blank.exit_code == 1 and "name: expected 1 to 200 characters" in blank.output
    assert _user(runner, login="engineer-1", role="engineer").exit_code == 0
    taken = _user(runner, login="Engineer-1")
    assert taken.exit_code == 1 and "'Engineer-1' is taken" in taken.output
    hidden = _user(runner, login="eve", name="Eve \u202eTSIL")
    assert hidden.exit_code == 1 and "U+202E" in hidden.output
    nobody = runner.invoke(main, ["token", "create", "--login", "nobody"])
    assert nobody.exit_code == 1 and "no user with login 'nobody'" in nobody.output


def test_user_change_and_disable_are_audited_with_the_acting_account(data_dir):  # noqa: F811
    runner = CliRunner()
    _user(runner)
    token = runner.invoke(main, ["token", "create", "--login", "rosa"]).stdout.split()[-1]
    assert runner.invoke(main, ["user", "change", "--login", "rosa", "--role",
                                "auditor"]).exit_code == 0
    assert identify(default_store(), token).role == "auditor"
    assert runner.invoke(main, ["user", "disable", "--login", "rosa"]).exit_code == 0
    assert identify(default_store(), token) is None
    with default_store().engine.begin() as connection:
        events = connection.execute(text("SELECT kind, actor FROM audit_events ORDER BY seq")
                                    ).all()
    assert [kind for kind, _ in events] == ["user.created", "token.created", "user.changed",
                                            "token.revoked", "user.disabled"]
    assert all(actor.startswith("os:") and actor != "os:" for _, actor in events)


def test_token_revoke(data_dir):  # noqa: F811
    from service.tokens import create_token

    runner = CliRunner()
    _user(runner, role="auditor")
    token_id, token = create_token(default_store(), login="rosa", actor="os:test")
    assert runner.invoke(main, ["token", "revoke", token_id]).exit_code == 0
    assert identify(default_store(), token) is None
    assert runner.invoke(main, ["token", "revoke", "nope"]).exit_code == 1


def test_audit_verify_exits_1_naming_the_broken_event(data_dir):  # noqa: F811
    runner = CliRunner()
    _user(runner, role="admin")
    for name in ("a", "b"):
        runner.invoke(main, ["token", "create", "--login", "rosa", "--name", name])
    intact = runner.invoke(main, ["audit", "verify"])
    assert intact.exit_code == 0 and "intact: 3 events" in intact.output
    with owner_edit(default_store(), "audit_events") as connection:
        connection.execute(text("UPDATE audit_events SET actor = 'mallory' WHERE seq = 2"))
    broken = runner.invoke(main, ["audit", "verify"])
    assert broken.exit_code == 1 and "seq 2" in broken.output


def test_db_upgrade_on_a_fresh_sqlite_dir(tmp_path, monkeypatch):
    from tests.api.support import clear_fluxproof_env

    clear_fluxproof_env(monkeypatch)
    monkeypatch.setenv("FLUXPROOF_DATA_DIR", str(tmp_path / "new"))
    from service.store.migrate import head_revision

    result = CliRunner().invoke(main, ["db", "upgrade"])
    assert result.exit_code == 0 and f"revision {head_revision()}" in result.output
    assert (tmp_path / "new" / "fluxproof.sqlite3").is_file()


def test_reverify_runs_here_without_a_broker(data_dir, controlled_engine):  # noqa: F811
    from service.runs import create_run, execute_run

    store = default_store()
    first = create_run(store, actor="eng", document=make_case(tags=["nightly"]))
    execute_run(first["run_id"], store)
    create_run(store, actor="eng", document=make_case(title="untagged", tags=[]))
    result = CliRunner().invoke(main, ["reverify", "--tag", "nightly"])
    assert result.exit_code == 0, result.output
    assert "1 runs (inline)" in result.output and "succeeded 1" in result.output
    controlled_engine.quantities = {"flux_outer": 9e-6, "flux_inner": 2e-6}
    drifted = CliRunner().invoke(main, ["reverify", "--all"])
    assert drifted.exit_code == 1 and "DRIFT" in drifted.output and "flux_outer" in drifted.output


def test_reverify_needs_exactly_one_selector(data_dir):  # noqa: F811
    assert CliRunner().invoke(main, ["reverify"]).exit_code == 2
    assert CliRunner().invoke(main, ["reverify", "--all", "--tag", "x"]).exit_code == 2


def test_worker_needs_a_broker(data_dir):  # noqa: F811
    result = CliRunner().invoke(main, ["worker"])
    assert result.exit_code == 2 and "FLUXPROOF_BROKER_URL" in result.output


def test_every_command_is_listed_and_loads_with_the_help_declared_for_it():
    context = click.Context(main)
    assert main.list_commands(context) == sorted(SUBCOMMANDS)
    assert "check" in SUBCOMMANDS
    for name, declared in SUBCOMMANDS.items():
        command = main.get_command(context, name)
        assert command.name == name
        # `fluxproof --help` prints the declared line without importing the command.
        assert command.get_short_help_str(limit=500) == declared.short_help, name


def test_demo_defaults_to_the_packaged_cases_and_var_demo_reports(tmp_path, monkeypatch,
                                                                   data_dir,  # noqa: F811
                                                                   controlled_engine):  # noqa: F811
    packaged = [entry.name for entry in case_files(packaged_cases())]
    assert len(packaged) >= 7 and all(name.endswith(".json") for name in packaged)
    monkeypatch.chdir(tmp_path)  # no source tree here: the cases come from the package
    result = CliRunner().invoke(main, ["demo"])
    assert result.exit_code == 0, result.output
    written = sorted(p.name for p in (tmp_path / "var" / "demo-reports").iterdir())
    assert written == [name.removesuffix(".json") + ".html" for name in packaged]


def test_demo_without_cases_says_so(tmp_path, data_dir):  # noqa: F811
    result = CliRunner().invoke(main, ["demo", "--cases", str(tmp_path / "none"),
                                       "--reports", str(tmp_path / "r")])
    assert result.exit_code == 1 and "no demo cases found" in result.output


def _demo_cases(tmp_path):
    cases = tmp_path / "cases"
    cases.mkdir()
    for i, geometry in enumerate(["slab", "slab"]):
        case = make_case(title=f"demo test case {i}", geometry=geometry)
        (cases / f"{i:02d}-case.json").write_text(json.dumps(case), encoding="utf-8")
    return cases


def test_demo_prints_verdicts_writes_reports_and_the_caution(tmp_path, data_dir,  # noqa: F811
                                                             controlled_engine):  # noqa: F811
    cases = _demo_cases(tmp_path)
    reports = tmp_path / "reports"
    result = CliRunner().invoke(main, ["demo", "--cases", str(cases), "--reports", str(reports)])
    assert result.exit_code == 0, result.output
    assert "demo test case 0" in result.output and "demo test case 1" in result.output
    assert "flux_outer = 2e-06" in result.output and "1/1" in result.output
    assert "design requirements" in result.output and "none stated" in result.output
    assert f"HTML reports written to {reports}" in result.output
    assert ("support, but do not replace, design verification testing and qualified "
            "independent review; local regulations and licensed practice govern") in result.output
    assert "audit chain: intact" in result.output
    written = sorted(p.name for p in reports.iterdir())
    assert written == ["00-case.html", "01-case.html"]
    html = (reports / "00-case.html").read_text(encoding="utf-8")
    assert "demo.reviewer" in html and "approved" in html


def test_demo_exits_1_when_a_run_fails(tmp_path, data_dir, controlled_engine):  # noqa: F811
    controlled_engine.status = "failed"
    result = CliRunner().invoke(main, ["demo", "--cases", str(_demo_cases(tmp_path)),
                                       "--reports", str(tmp_path / "r")])
    assert result.exit_code == 1
    assert "RUN FAILED" in result.output and "controlled failure" in result.output


def test_serve_answers_http_until_stopped(tmp_path):
    """`fluxproof serve --port 0` in a real process: it prints its URL, answers /v1/health and
    stops cleanly on SIGTERM."""
    import os
    import signal
    import subprocess
    import sys

    import requests

    env = {k: v for k, v in os.environ.items() if not k.startswith("FLUXPROOF_")}
    env["FLUXPROOF_DATA_DIR"] = str(tmp_path / "served")
    process = subprocess.Popen([sys.executable, "-m", "service.cli", "serve", "--port", "0"],
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                               env=env, cwd=os.getcwd())
    try:
        line = process.stdout.readline()
        assert line.startswith("fluxproof serving on http://127.0.0.1:"), (
            line, process.stderr.read() if process.poll() is not None else "")
        url = line.split()[3]
        body = requests.get(f"{url}/v1/health", timeout=10).json()
        assert body["service"] == "ok" and body["broker"]["mode"] == "embedded"
        assert requests.get(f"{url}/v1/cases", timeout=10).status_code == 401
    finally:
        # SIGTERM, as a service manager stops it (SIGINT may be ignored in a background job).
        process.send_signal(signal.SIGTERM)
        out, _ = process.communicate(timeout=20)
    assert "stopping" in out, "SIGTERM should end serve through its clean shutdown"
    assert process.returncode == 0
    assert (tmp_path / "served" / "fluxproof.sqlite3").is_file()
