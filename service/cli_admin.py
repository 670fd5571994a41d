"""``fluxproof token``, ``fluxproof audit verify`` and ``fluxproof reverify``."""

from __future__ import annotations

import click

from service.store.models import ROLES


def _store():
    from service.store import default_store
    from service.store.migrate import upgrade

    store = default_store()
    upgrade(store)
    return store


@click.group("token")
def token() -> None:
    """Bearer tokens."""


@token.command("create")
@click.option("--role", required=True, type=click.Choice(ROLES), help="The token's role.")
@click.option("--name", required=True, help="The person's identity (used for four-eyes).")
def token_create(role: str, name: str) -> None:
    """Create a token and print it once; only its SHA-256 is stored."""
    from service.errors import ValidationFailed
    from service.tokens import create_token

    try:
        token_id, secret = create_token(_store(), role=role, name=name)
    except ValidationFailed as exc:
        raise click.BadParameter("; ".join(e["message"] for e in exc.errors)) from exc
    click.echo(f"token {token_id} for {name.strip()!r} ({role}); shown only now:", err=True)
    click.echo(secret)


@token.command("revoke")
@click.argument("token_id")
def token_revoke(token_id: str) -> None:
    """Revoke a token by its id."""
    from service.tokens import revoke_token

    if not revoke_token(_store(), token_id):
        raise click.ClickException(f"no token with id {token_id!r}")
    click.echo(f"token {token_id} revoked")


@click.group("audit")
def audit_group() -> None:
    """The audit trail."""


@audit_group.command("verify")
def audit_verify() -> None:
    """Recompute the hash chain; exit 1 naming the first broken event."""
    from service.audit import verify_chain

    report = verify_chain(_store())
    if report.ok:
        click.echo(f"audit chain intact: {report.events} events")
        return
    click.echo(f"audit chain BROKEN at event seq {report.first_broken_seq}: {report.reason}",
               err=True)
    raise SystemExit(1)


@click.command("reverify")
@click.option("--all", "all_cases", is_flag=True, help="Re-verify every stored case.")
@click.option("--tag", default=None, help="Re-verify the stored cases carrying this tag.")
def reverify(all_cases: bool, tag: str | None) -> None:
    """Re-verify stored cases as a batch; report drift.

    With FLUXPROOF_BROKER_URL set the runs are queued to workers and the batch id is printed.
    Without it they run here, and the exit status is 1 when a run failed or a figure drifted.
    """
    from service.batches import get_batch, start_batch
    from service.dispatch import make_dispatcher
    from service.settings import dispatch_mode, settings_from_env

    if all_cases == bool(tag):
        raise click.UsageError("give exactly one of --all and --tag T")
    settings = settings_from_env()
    store = _store()
    mode = "celery" if dispatch_mode(settings) == "celery" else "inline"
    dispatcher = make_dispatcher(mode, store, settings)
    batch = start_batch(store, actor="cli", tag=tag, all_cases=all_cases)
    dispatcher.send(batch["run_ids"])
    click.echo(f"batch {batch['batch_id']}: {len(batch['run_ids'])} runs ({mode})")
    if mode == "celery":
        return
    result = get_batch(store, batch["batch_id"])
    counts = ", ".join(f"{k} {v}" for k, v in result["counts"].items())
    click.echo(f"status {result['status']}: {counts}")
    for drift in result["drifted"]:
        names = ", ".join(
            f"{q['name']} {q['baseline']} -> {q['now']}" for q in drift["quantities"])
        click.echo(f"DRIFT case {drift['case_id']} (run {drift['run_id']} vs "
                   f"{drift['baseline_run_id']}): {names}")
    if result["counts"]["failed"] or result["drifted"]:
        raise SystemExit(1)
