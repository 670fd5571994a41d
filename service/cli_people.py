"""``fluxproof user``: create, change and disable people, set a password.

The password is asked at a prompt (twice, not echoed) or, for scripts, read from the
environment variable named by ``--password-env`` (default ``FLUXPROOF_NEW_PASSWORD``); it is
never an option on the command line, where other users of the machine could read it.
``--no-password`` makes a person who can hold tokens but neither sign in nor sign (a machine).
Each change is an audit event naming the acting person, the operating-system account that ran
the command.
"""

from __future__ import annotations

import getpass
import os

import click

from service.errors import ProblemError
from service.people import change_user, create_user, disable_user, set_password
from service.store import default_store
from service.store.migrate import upgrade
from service.store.models import ROLES

PASSWORD_ENV = "FLUXPROOF_NEW_PASSWORD"


def cli_actor() -> str:
    """The acting person of a command: the operating-system account that ran it."""
    try:
        account = getpass.getuser()
    except (KeyError, OSError):
        account = f"uid {os.getuid()}"
    return f"os:{account}"


def problem_text(exc: ProblemError) -> str:
    fields = "; ".join(f"{e['path']}: {e['message']}" for e in exc.errors)
    return f"{exc.detail}{' ' + fields if fields else ''}"


def _store():
    store = default_store()
    upgrade(store)
    return store


def _password(env_name: str) -> str:
    value = os.environ.get(env_name)
    if value:
        return value
    return click.prompt("Password", hide_input=True, confirmation_prompt=True, err=True)


@click.group("user")
def user() -> None:
    """People: create, change, disable, set a password."""


@user.command("create")
@click.option("--login", required=True, help="Sign-in name; unique ignoring case and "
              "Unicode forms.")
@click.option("--name", required=True, help="Printed name, as signatures show it.")
@click.option("--role", required=True, type=click.Choice(ROLES), help="The person's role.")
@click.option("--password-env", default=PASSWORD_ENV, show_default=True,
              help="Environment variable holding the password (else a prompt).")
@click.option("--no-password", is_flag=True, help="No password: tokens only (a machine).")
def user_create(login: str, name: str, role: str, password_env: str, no_password: bool) -> None:
    """Create a person."""
    password = None if no_password else _password(password_env)
    try:
        person = create_user(_store(), login=login, name=name, role=role, password=password,
                             actor=cli_actor())
    except ProblemError as exc:
        raise click.ClickException(problem_text(exc)) from exc
    click.echo(f"user {person.login} ({person.name}, {person.role}) created")


@user.command("change")
@click.option("--login", required=True)
@click.option("--name", default=None, help="New printed name.")
@click.option("--role", default=None, type=click.Choice(ROLES), help="New role.")
def user_change(login: str, name: str | None, role: str | None) -> None:
    """Change a person's printed name or role."""
    try:
        person = change_user(_store(), login, name=name, role=role, actor=cli_actor())
    except ProblemError as exc:
        raise click.ClickException(problem_text(exc)) from exc
    click.echo(f"user {person.login}: {person.name}, {person.role}")


@user.command("password")
@click.option("--login", required=True)
@click.option("--password-env", default=PASSWORD_ENV, show_default=True)
def user_password(login: str, password_env: str) -> None:
    """Set a person's password."""
    try:
        person = set_password(_store(), login, _password(password_env), actor=cli_actor())
    except ProblemError as exc:
        raise click.ClickException(problem_text(exc)) from exc
    click.echo(f"password of {person.login} set")


@user.command("disable")
@click.option("--login", required=True)
def user_disable(login: str) -> None:
    """Disable a person: their tokens are revoked and their sessions end."""
    try:
        person = disable_user(_store(), login, actor=cli_actor())
    except ProblemError as exc:
        raise click.ClickException(problem_text(exc)) from exc
    click.echo(f"user {person.login} disabled")
