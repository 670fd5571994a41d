"""``fluxproof check CASE.json``: the engine alone, no service."""

from __future__ import annotations

import click


@click.command("check")
@click.argument("case_file", type=click.Path(dir_okay=False))
@click.option("--format", "output_format", type=click.Choice(["text", "json"]), default="text")
def check(case_file: str, output_format: str) -> None:
    """Check one case file; exit 0 pass, 1 fail, 2 invalid input."""
    raise click.ClickException("not built yet")
