"""``fluxproof token``, ``fluxproof audit verify`` and ``fluxproof reverify``.

Changes made here are audit events naming the acting person: the operating-system account
that ran the command (:func:`service.cli_people.cli_actor`)."""

from __future__ import annotations

import sys
import time

import click

from service.audit import verify_chain
from service.batches import WITHIN_TOLERANCE, batch_summary, get_batch, start_batch
from service.cli_people import cli_actor, problem_text
from service.dispatch import make_dispatcher
from service.errors import NotFound, ValidationFailed
from service.server_keys import SecretError
from service.settings import dispatch_mode, settings_from_env
from service.store import default_store
from service.store.audit_seal import AnchorError
from service.store.migrate import upgrade
from service.store.models import FINISHED_STATES
from service.tokens import create_token, revoke_token


def _store():
    store = default_store()
    upgrade(store)
    return store


@click.group("token")
def token() -> None:
    """Bearer tokens of people."""


@token.command("create")
@click.option("--login", required=True, help="The person the token belongs to (see "
              "`fluxproof user create`); it acts with their name and role.")
@click.option("--name", default=None, help="What the token is for (default: the login).")
@click.option("--days", type=float, default=None,
              help="Lifetime in days (default FLUXPROOF_TOKEN_LIFETIME_DAYS, 90).")
def token_create(login: str, name: str | None, days: float | None) -> None:
    """Create a token for a person and print it once; only its SHA-256 is stored."""
    lifetime = days if days is not None else settings_from_env().get("TOKEN_LIFETIME_DAYS")
    try:
        token_id, secret = create_token(_store(), login=login, name=name,
                                        lifetime_days=lifetime, actor=cli_actor())
    except (ValidationFailed, NotFound) as exc:
        raise click.ClickException(problem_text(exc)) from exc
    click.echo(f"token {token_id} for {login.strip()!r}; shown only now:", err=True)
    click.echo(secret)


@token.command("revoke")
@click.argument("token_id")
def token_revoke(token_id: str) -> None:
    """Revoke a token by its id."""
    if not revoke_token(_store(), token_id, actor=cli_actor()):
        raise click.ClickException(f"no token with id {token_id!r}")
    click.echo(f"token {token_id} revoked")


@click.group("audit")
def audit_group() -> None:
    """The audit trail."""


@audit_group.command("verify")
def audit_verify() -> None:
    """Recompute the keyed hash chain, check it against the anchor file and every stored
    case, record and sign-off against its event; exit 1 naming each difference."""
    try:
        report = verify_chain(_store())
    except (SecretError, AnchorError, OSError) as exc:
        raise click.ClickException(f"cannot verify: {exc}") from exc
    anchor = report.anchor or {}
    if anchor.get("seq") is None:
        click.echo(f"anchor: {anchor.get('file')}: no checkpoint of chain {anchor.get('chain')}")
    else:
        click.echo(f"anchor: {anchor['file']}: chain {anchor['chain']}, "
                   f"{anchor['checkpoints']} checkpoints, latest seq {anchor['seq']} hash "
                   f"{anchor['hash']} at {anchor['at']} (key {anchor['key_id']})")
    compared = report.compared
    click.echo(f"compared: {compared.get('cases', 0)} cases, {compared.get('runs', 0)} runs, "
               f"{compared.get('records', 0)} records, {compared.get('signoffs', 0)} sign-offs"
               + (f" ({compared['records_without_hash']} records from before revision 0007 "
                  "carry no hash in their event)" if compared.get("records_without_hash")
                  else ""))
    if report.ok:
        click.echo(f"audit chain intact: {report.events} events")
        return
    click.echo(f"audit chain BROKEN at event seq {report.first_broken_seq}: {report.reason}",
               err=True)
    for finding in report.findings:
        click.echo(f"  - {finding.message}", err=True)
    raise SystemExit(1)


@click.command("reverify")
@click.option("--all", "all_cases", is_flag=True, help="Re-verify every stored case.")
@click.option("--tag", default=None, help="Re-verify the stored cases carrying this tag.")
@click.option("--wait/--no-wait", default=False, show_default=True,
              help="With a broker: follow the batch with a progress bar until it finishes.")
def reverify(all_cases: bool, tag: str | None, wait: bool) -> None:
    """Re-verify stored cases as a batch; report drift.

    With FLUXPROOF_BROKER_URL set the runs are queued to workers and the batch id is printed
    (``--wait`` follows it). Without it they run here behind a progress bar. Either way a
    finished batch ends with a summary, and the exit status is 1 when a run failed or a figure
    drifted.
    """
    if all_cases == bool(tag):
        raise click.UsageError("give exactly one of --all and --tag T")
    settings = settings_from_env()
    store = _store()
    mode = "celery" if dispatch_mode(settings) == "celery" else "inline"
    dispatcher = make_dispatcher(mode, store, settings)
    started = time.monotonic()
    batch = start_batch(store, actor=cli_actor(), tag=tag, all_cases=all_cases)
    batch_id, run_ids = batch["batch_id"], batch["run_ids"]
    click.echo(f"batch {batch_id}: {len(run_ids)} runs ({mode})")
    if mode == "celery":
        dispatcher.send(run_ids)
        if not wait:
            click.echo(f"follow it at /ui/batches/{batch_id} or with --wait")
            return
        _follow_batch(store, batch_id, len(run_ids))
    else:
        with click.progressbar(run_ids, label="re-verifying", file=sys.stderr,
                               show_pos=True, show_eta=True) as bar:
            for run_id in bar:
                dispatcher.send([run_id])
    _print_batch_summary(get_batch(store, batch_id), time.monotonic() - started)


def _follow_batch(store, batch_id: str, total: int, poll_s: float = 1.0) -> None:
    """A progress bar of finished runs, redrawn until the batch finishes."""
    shown = 0
    with click.progressbar(length=total, label="re-verifying", show_pos=True,
                           file=sys.stderr) as bar:
        while True:
            state = get_batch(store, batch_id)
            done = sum(state["counts"][s] for s in FINISHED_STATES)
            bar.update(done - shown)
            shown = done
            if state["status"] == "finished":
                return
            time.sleep(poll_s)


def _print_batch_summary(result: dict, seconds: float) -> None:
    """The closing summary: counts by state, failed runs, runs that failed a check, drift of
    figures and of design requirement statuses, time taken; exit 1 on any of them."""
    counts = ", ".join(f"{k} {v}" for k, v in result["counts"].items())
    click.echo(f"status {result['status']}: {counts}")
    for drift in result["drifted"]:
        names = [f"{q['name']} {q['baseline']} -> {q['now']}" for q in drift["quantities"]]
        names += [f"requirement {r['id']} {r['baseline'] or 'not stated'} -> "
                  f"{r['now'] or 'not stated'}" for r in drift.get("requirements") or []]
        click.echo(f"DRIFT case {drift['case_id']} (run {drift['run_id']} vs "
                   f"{drift['baseline_run_id']}): {', '.join(names)}")
    total = sum(result["counts"].values())
    verdict = batch_summary(result)
    click.echo(f"summary: {total} run(s) in {seconds:.1f} s; {verdict}; "
               f"details at /ui/batches/{result['batch_id']}")
    if verdict != WITHIN_TOLERANCE:
        raise SystemExit(1)
