"""The ``fluxproof`` command line (click)."""

from __future__ import annotations

import click

from service.cli_admin import audit_group, reverify, token
from service.cli_check import check
from service.cli_service import db, serve, worker
from service.demo import demo


@click.group(help="fluxproof: independent, traceable checks of diffusion-reaction calculations.")
def main() -> None:
    """Entry point of the ``fluxproof`` console script."""


main.add_command(check)
main.add_command(serve)
main.add_command(worker)
main.add_command(reverify)
main.add_command(token)
main.add_command(audit_group)
main.add_command(db)
main.add_command(demo)


if __name__ == "__main__":
    main()
