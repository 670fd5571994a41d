"""``fluxproof check CASE.json``: the engine alone, no service, no store."""

from __future__ import annotations

import json
import sys

import click

from schemas import CaseError
from service.report.text import render_text
from worker.engine import check_case

EXIT_PASS, EXIT_FAIL, EXIT_INVALID = 0, 1, 2


def _strict_json_load(text: str):
    def reject_constant(name: str):
        raise ValueError(f"{name} is not a number JSON allows")

    return json.loads(text, parse_constant=reject_constant)


@click.command("check")
@click.argument("case_file", type=click.Path(dir_okay=False, allow_dash=True))
@click.option("--format", "output_format", type=click.Choice(["text", "json"]), default="text",
              show_default=True, help="text: a readable report; json: the result document.")
def check(case_file: str, output_format: str) -> None:
    """Check one case file with the engine: exit 0 pass, 1 fail, 2 invalid input.

    Results support, but do not replace, design verification testing and qualified,
    independent review; local regulations and licensed practice govern.
    """
    try:
        with click.open_file(case_file, encoding="utf-8") as handle:
            text = handle.read()
    except OSError as exc:
        click.echo(f"error: cannot read {case_file}: {exc.strerror}", err=True)
        sys.exit(EXIT_INVALID)
    try:
        case = _strict_json_load(text)
    except ValueError as exc:
        click.echo(f"error: {case_file} is not valid JSON: {exc}", err=True)
        sys.exit(EXIT_INVALID)
    if not isinstance(case, dict):
        click.echo("error: (document): expected a JSON object (the case document)", err=True)
        sys.exit(EXIT_INVALID)
    try:
        record = check_case(case)
    except CaseError as exc:
        click.echo(f"invalid case {case_file}: {exc.total} error(s)", err=True)
        for error in exc.errors:
            click.echo(f"  {error['path'] or '(document)'}: {error['message']}", err=True)
        sys.exit(EXIT_INVALID)
    if output_format == "json":
        click.echo(json.dumps(record, indent=2, allow_nan=False))
    else:
        click.echo(render_text(record, case))
    sys.exit(EXIT_PASS if record["verdict"] == "pass" else EXIT_FAIL)
