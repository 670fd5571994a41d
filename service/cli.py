"""The ``fluxproof`` command line (click)."""

from __future__ import annotations

import click

from service.cli_check import check


@click.group(help="fluxproof: independent, traceable checks of diffusion-reaction calculations.")
def main() -> None:
    """Entry point of the ``fluxproof`` console script."""


main.add_command(check)
