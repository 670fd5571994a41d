"""``fluxproof demo``: the embedded service end to end, over HTTP, on the demo cases.

Starts the service in-process (SQLite in a fresh data directory, runs in the embedded thread
pool, a Werkzeug server on a free port), creates two people, an engineer and a reviewer, with
passwords generated at run time and a token each, submits every demo case with
:class:`service.client.Client`, waits for the records, has the reviewer sign off the runs that
passed with an electronic signature (four-eyes: a different person from the submitter and the
case's author; the reviewer's password again at each signing), verifies the audit
chain, prints a verdict table and writes each HTML report to ``var/demo-reports/`` under the
working directory. Exit 1 only if a run ends ``failed`` or the HTTP path breaks.

The demo cases are package data (``service/demo_cases/*.json``, read with
:mod:`importlib.resources`), so an installed package has its demo. They are invented
demonstrations, never test check values.
"""

from __future__ import annotations

import json
import logging
import re
import secrets
import tempfile
from importlib import resources
from importlib.resources.abc import Traversable
from pathlib import Path
from typing import Any

import click

from schemas.result import Decision, RunStatus
from service.app import create_app, shutdown_app
from service.audit import verify_chain
from service.cli_people import cli_actor
from service.client import ApiError, Client
from service.people import create_user
from service.report.design_view import STATUS_WORDS, design_status, headline_requirements
from service.server import BackgroundServer
from service.settings import database_url
from service.store import Store
from service.tokens import create_token

CAUTION_LINE = ("Caution: these results support, but do not replace, design verification "
                "testing and qualified independent review; local regulations and licensed "
                "practice govern.")
ENGINEER, REVIEWER = "demo.engineer", "demo.reviewer"
PRINTED_NAMES = {ENGINEER: "Demo Engineer", REVIEWER: "Demo Reviewer"}
DEFAULT_REPORTS_DIR = Path("var") / "demo-reports"


def packaged_cases() -> Traversable:
    """The demo cases shipped in the package (``service/demo_cases/``)."""
    return resources.files("service") / "demo_cases"


def case_files(cases_dir: Traversable) -> list[Traversable]:
    """The ``*.json`` files of a case directory, by name; none when it is not a directory."""
    if not cases_dir.is_dir():
        return []
    return sorted((entry for entry in cases_dir.iterdir() if entry.name.endswith(".json")),
                  key=lambda entry: entry.name)


def _slug(path: Traversable) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "-", path.name.removesuffix(".json"))


def _figure(record: dict[str, Any], case: dict[str, Any]) -> str:
    headline = headline_requirements(record, case)
    if headline:  # the first required quantity (a missed one first)
        row = headline[0]
        return f"{row.what} = {row.readable_value or row.value}"
    quantities = record.get("quantities") or {}
    # The outer-face flux, unless that face is sealed (then the inner one), else the release.
    for name in ("flux_outer", "flux_inner", "t50", "t90", "time_lag"):
        quantity = quantities.get(name)
        if isinstance(quantity, dict) and isinstance(quantity.get("value"), (int, float)) \
                and quantity["value"] != 0:
            return f"{name} = {quantity['value']:.4g} {quantity.get('unit', '')}".strip()
    return "-"


def _table(rows: list[list[str]], headers: list[str]) -> str:
    widths = [max(len(str(r[i])) for r in [headers, *rows]) for i in range(len(headers))]
    line = "  ".join("{:<" + str(w) + "}" for w in widths)
    out = [line.format(*headers), line.format(*("-" * w for w in widths))]
    out.extend(line.format(*row) for row in rows)
    return "\n".join(out)


def _justification(record: dict[str, Any]) -> str | None:
    """A demonstration's justification of loosened limits (None when there are none)."""
    if not record.get("deviations"):
        return None
    return "demo: the loosened limits are part of the demonstration case"


def run_demo(cases_dir: Traversable, reports_dir: Path, data_dir: Path,
             echo=click.echo) -> int:
    """Run the demonstration; return the exit status (0, or 1 when a run failed)."""
    paths = case_files(cases_dir)
    if not paths:
        echo(f"no demo cases found in {cases_dir}", err=True)
        return 1
    # An embedded installation of its own: its store, key and anchor file in data_dir.
    app = create_app({"DATA_DIR": str(data_dir), "DATABASE_URL": None, "BROKER_URL": None,
                      "DISPATCH": "embedded", "SIGNING_KEY_FILE": None,
                      "AUDIT_ANCHOR_FILE": None})
    store = app.extensions["fluxproof"].store
    passwords = {login: secrets.token_urlsafe(18) for login in (ENGINEER, REVIEWER)}
    for login, role in ((ENGINEER, "engineer"), (REVIEWER, "reviewer")):
        create_user(store, login=login, name=PRINTED_NAMES[login], role=role,
                    password=passwords[login], actor=cli_actor())
    _, engineer_token = create_token(store, login=ENGINEER, actor=cli_actor(), lifetime_days=1)
    _, reviewer_token = create_token(store, login=REVIEWER, actor=cli_actor(), lifetime_days=1)
    reports_dir.mkdir(parents=True, exist_ok=True)
    rows: list[list[str]] = []
    failures: list[str] = []
    failed = 0
    logging.getLogger("werkzeug").setLevel(logging.WARNING)  # no per-request lines
    try:
        with BackgroundServer(app) as server:
            echo(f"fluxproof demo: embedded service at {server.url} (data in {data_dir})")
            engineer = Client(server.url, engineer_token)
            reviewer = Client(server.url, reviewer_token)
            submitted = []
            for path in paths:
                case = json.loads(path.read_text(encoding="utf-8"))
                submitted.append((path, case, engineer.submit(case)))
            for path, case, run_id in submitted:
                record = engineer.wait(run_id, timeout=300)
                checks = record.get("checks") or []
                passed = sum(1 for c in checks if c.get("passed"))
                if record["status"] != RunStatus.SUCCEEDED:
                    failed += 1
                    failures.append(f"{path.name}: {record.get('error')}")
                elif record.get("verdict") == "pass" and design_status(record) in (
                        "met", "none_stated"):
                    reviewer.signoff(run_id, Decision.APPROVED.value,
                                     "demo: every check passed and every stated requirement is "
                                     "met; approved for the demonstration",
                                     password=passwords[REVIEWER], meaning="approval",
                                     justification=_justification(record))
                elif record.get("verdict") == "pass":
                    missed = [r["id"] for r in (record.get("design") or {}).get(
                        "requirements", []) if r.get("status") != "met"]
                    reviewer.signoff(run_id, Decision.REJECTED.value,
                                     "demo: the calculation is verified but the design does not "
                                     f"meet {', '.join(missed)}; rejected for redesign",
                                     password=passwords[REVIEWER], meaning="review")
                report_path = reports_dir / f"{_slug(path)}.html"
                report_path.write_text(engineer.report(run_id), encoding="utf-8")
                rows.append([str(case.get("title", _slug(path)))[:60], case.get("geometry", "?"),
                             record.get("verdict") if record["status"] == RunStatus.SUCCEEDED
                             else "RUN FAILED",
                             STATUS_WORDS[design_status(record)], _figure(record, case),
                             f"{passed}/{len(checks)}", str(len(record.get("warnings") or []))])
            engineer.close()
            reviewer.close()
    except (ApiError, TimeoutError, OSError) as exc:
        echo(f"demo: the HTTP path broke: {exc}", err=True)
        return 1
    finally:
        shutdown_app(app)
    echo("")
    echo(_table(rows, ["case", "geometry", "verdict", "design requirements", "key figure",
                       "checks passed", "warnings"]))
    echo("")
    for line in failures:
        echo(f"failed run: {line}", err=True)
    demo_settings = {"DATA_DIR": str(data_dir)}
    audit_store = Store(database_url(demo_settings), demo_settings)
    try:
        report = verify_chain(audit_store)
    finally:
        audit_store.dispose()
    echo(f"audit chain: {'intact' if report.ok else 'BROKEN'} ({report.events} events); "
         f"runs that passed were signed by {PRINTED_NAMES[REVIEWER]} ({REVIEWER}), a different "
         f"person from the submitter {ENGINEER}, password given again at each signature: "
         "approved where every stated requirement is met, rejected where the design misses "
         "one")
    echo(f"sign in at the pages with {ENGINEER} / {passwords[ENGINEER]} or {REVIEWER} / "
         f"{passwords[REVIEWER]} (this run only; --data-dir keeps the store)")
    echo(f"HTML reports written to {reports_dir}/")
    echo(CAUTION_LINE)
    if failed:
        echo(f"{failed} run(s) ended failed", err=True)
        return 1
    return 0 if report.ok else 1


@click.command("demo")
@click.option("--cases", "cases_dir", type=click.Path(file_okay=False, path_type=Path),
              default=None, help="Directory of case files (default: the packaged demo cases).")
@click.option("--reports", "reports_dir", type=click.Path(file_okay=False, path_type=Path),
              default=None, help="Where to write the HTML reports (default: var/demo-reports).")
@click.option("--data-dir", type=click.Path(file_okay=False, path_type=Path), default=None,
              help="Keep the demo's store here (default: a temporary directory).")
def demo(cases_dir: Path | None, reports_dir: Path | None, data_dir: Path | None) -> None:
    """Start the embedded service, submit the demo cases over HTTP, print the verdicts."""
    cases: Traversable = cases_dir if cases_dir is not None else packaged_cases()
    reports_dir = reports_dir or DEFAULT_REPORTS_DIR
    if data_dir is not None:
        status = run_demo(cases, reports_dir, data_dir)
    else:
        with tempfile.TemporaryDirectory(prefix="fluxproof-demo-") as temporary:
            status = run_demo(cases, reports_dir, Path(temporary))
    raise SystemExit(status)
