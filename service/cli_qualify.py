"""``fluxproof qualify``: installation and operational qualification of this installation."""

from __future__ import annotations

from pathlib import Path

import click

from service.qualification.installation import qualify_installation
from service.qualification.operational import CaseResult, qualify_operation
from service.qualification.report import build_document, write_reports


def _print_case(result: CaseResult) -> None:
    mark = "pass" if result.passed else "FAIL"
    click.echo(f"  {result.id:<6} {mark:<4}  {result.quantity:<18} "
               f"{'—' if result.result is None else f'{result.result:.10g}':>18} "
               f"(published {result.expected:.10g} {result.unit}, tolerance "
               f"{result.tolerance:g})")


@click.command("qualify")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              default=Path("qualification"), show_default=True,
              help="Directory for qualification.json, .html and .pdf.")
def qualify(out_dir: Path) -> None:
    """Qualify this installation: versions and file hashes against the release manifest, and
    published-reference cases run here; exit 1 naming whatever differs.

    Writes the report (JSON, HTML, PDF) with a summary to sign into --out.
    """
    click.echo("Installation qualification")
    installation = qualify_installation()
    for item in installation.items:
        click.echo(f"  {'pass' if item.passed else 'FAIL':<4}  {item.name}: "
                   f"{item.found} (expected {item.expected})")
    click.echo(f"  {installation.files_checked} installed files hashed; "
               f"{len(installation.file_differences)} differ from the manifest")
    for difference in installation.file_differences:
        click.echo(f"  FAIL  {difference.words()}")
    click.echo("Operational qualification")
    operation = qualify_operation(on_case=_print_case)
    document = build_document(installation, operation)
    paths = write_reports(document, out_dir)
    click.echo("Report: " + ", ".join(str(p) for p in paths.values()))
    if document["passed"]:
        click.echo(f"QUALIFICATION: PASS ({len(operation)} cases, "
                   f"{installation.files_checked} files)")
        return
    click.echo("QUALIFICATION: FAIL", err=True)
    for line in document["summary"]["failures"]:
        click.echo(f"  {line}", err=True)
    raise SystemExit(1)
