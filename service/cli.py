"""The ``fluxproof`` command line (click), loading each subcommand's module on first use.

``fluxproof check`` needs only the base install (numpy, scipy, pint, marshmallow, click); the
other subcommands need the ``service`` extra (Flask, SQLAlchemy, Celery, ...). The group below
follows the lazy-loading pattern click documents ("Lazily Loading Subcommands"): it maps each
command name to ``"module:attribute"`` and imports that module only when the command is run.
This is the command line's plugin boundary: no command module is imported by this one.
``fluxproof --help`` lists the commands from the short help declared here, so it imports none
of them; a unit test keeps each declared line equal to the command's own.
"""

from __future__ import annotations

import importlib
from typing import NamedTuple

import click

#: Top-level modules of the ``service`` extra; a command that needs one on the base install
#: gets an error naming the extra instead of a traceback.
SERVICE_EXTRA_MODULES = frozenset({
    "alembic", "apispec", "celery", "flask", "gunicorn", "kombu", "matplotlib", "psycopg",
    "redis", "requests", "sqlalchemy", "werkzeug",
})


class LazyCommand(NamedTuple):
    """Where a subcommand lives (``"module:attribute"``) and the first sentence of its help."""

    target: str
    short_help: str


SUBCOMMANDS: dict[str, LazyCommand] = {
    "audit": LazyCommand("service.cli_admin:audit_group", "The audit trail."),
    "check": LazyCommand("service.cli_check:check", "Check one case file with the engine: exit 0 "
                         "pass, 1 fail, 2 invalid input."),
    "db": LazyCommand("service.cli_service:db", "The store's schema."),
    "demo": LazyCommand("service.demo:demo", "Start the embedded service, submit the demo cases "
                        "over HTTP, print the verdicts."),
    "qualify": LazyCommand("service.cli_qualify:qualify",
                           "Qualify this installation: versions and file hashes against the "
                           "release manifest, and published-reference cases run here; exit 1 "
                           "naming whatever differs."),
    "reverify": LazyCommand("service.cli_admin:reverify",
                            "Re-verify stored cases as a batch; report drift."),
    "serve": LazyCommand("service.cli_service:serve", "Run the HTTP service (embedded: SQLite, "
                         "in-process runs; with a broker: queue to workers)."),
    "token": LazyCommand("service.cli_admin:token", "Bearer tokens of people."),
    "user": LazyCommand("service.cli_people:user", "People: create, change, disable, set "
                        "a password."),
    "worker": LazyCommand("service.cli_worker:worker",
                          "Run a Celery worker for queued runs (needs FLUXPROOF_BROKER_URL)."),
}


class LazyGroup(click.Group):
    """A click group whose subcommands are imported from ``"module:attribute"`` when used."""

    def __init__(self, *args, lazy_subcommands: dict[str, LazyCommand], **kwargs) -> None:
        super().__init__(*args, **kwargs)
        self.lazy_subcommands = lazy_subcommands

    def list_commands(self, ctx: click.Context) -> list[str]:
        return sorted({*super().list_commands(ctx), *self.lazy_subcommands})

    def get_command(self, ctx: click.Context, cmd_name: str) -> click.Command | None:
        if cmd_name in self.lazy_subcommands:
            return self._load(cmd_name)
        return super().get_command(ctx, cmd_name)

    def _load(self, cmd_name: str) -> click.Command:
        module_name, attribute = self.lazy_subcommands[cmd_name].target.split(":")
        try:
            module = importlib.import_module(module_name)
        except ModuleNotFoundError as exc:
            missing = (exc.name or "").partition(".")[0]
            if missing not in SERVICE_EXTRA_MODULES:
                raise
            raise click.ClickException(
                f"`fluxproof {cmd_name}` needs the service extra (module {missing!r} is not "
                f"installed): pip install 'fluxproof[service]'") from exc
        command = getattr(module, attribute)
        if not isinstance(command, click.Command):
            raise TypeError(f"{module_name}:{attribute} is not a click command")
        return command

    def format_commands(self, ctx: click.Context, formatter: click.HelpFormatter) -> None:
        """The command list from the declared help, shortened as click shortens a command's own
        (``click.Group.format_commands``): ``--help`` imports no command module."""
        names = self.list_commands(ctx)
        limit = formatter.width - 6 - max((len(name) for name in names), default=0)
        rows = []
        for name in names:
            if name in self.lazy_subcommands:
                declared = self.lazy_subcommands[name].short_help
                text = click.Command(name, help=declared).get_short_help_str(limit)
            else:
                text = super().get_command(ctx, name).get_short_help_str(limit)
            rows.append((name, text))
        if rows:
            with formatter.section("Commands"):
                formatter.write_dl(rows)


@click.group(cls=LazyGroup, lazy_subcommands=SUBCOMMANDS,
             help="fluxproof: independent, traceable checks of diffusion-reaction calculations.")
def main() -> None:
    """Entry point of the ``fluxproof`` console script."""


if __name__ == "__main__":
    main()
