"""``fluxproof reverify``: a progress bar while the runs execute, then a closing summary."""

from __future__ import annotations

from click.testing import CliRunner

import service.cli_admin
from service.cli import main
from service.runs import create_run, execute_run
from service.store import default_store
from tests.api.support import make_case


def _stored_runs(count: int) -> None:
    store = default_store()
    for index in range(count):
        run = create_run(store, actor="eng", document=make_case(title=f"progress case {index}",
                                                                tags=["nightly"]))
        execute_run(run["run_id"], store)


def test_inline_reverify_shows_progress_and_a_summary(data_dir, controlled_engine):  # noqa: F811
    _stored_runs(3)
    result = CliRunner().invoke(main, ["reverify", "--tag", "nightly"])
    assert result.exit_code == 0, result.output
    assert "re-verifying" in result.stderr  # the bar goes to stderr, the summary to stdout
    assert "3 runs (inline)" in result.stdout
    assert "status finished: queued 0, running 0, succeeded 3, failed 0" in result.stdout
    assert "summary: 3 run(s) in" in result.stdout
    assert "all re-verified figures within tolerance" in result.stdout
    assert "/ui/batches/" in result.stdout


def test_summary_counts_drift_and_exits_1(data_dir, controlled_engine):  # noqa: F811
    _stored_runs(2)
    controlled_engine.quantities = {"flux_outer": 3.0e-6, "flux_inner": 2.0e-6}
    result = CliRunner().invoke(main, ["reverify", "--all"])
    assert result.exit_code == 1
    assert "0 run(s) failed, 2 case(s) drifted" in result.stdout
    assert result.stdout.count("DRIFT case") == 2


def test_queued_batches_are_followed_with_wait(data_dir, controlled_engine,  # noqa: F811
                                               monkeypatch):
    """With a broker the CLI only queues; ``--wait`` polls the batch until it finishes.

    The workers are stood in for by a dispatcher that executes each run as it is sent."""

    class WorkerStandIn:
        mode = "celery"

        def __init__(self, store):
            self.store = store

        def send(self, run_ids):
            for run_id in run_ids:
                execute_run(run_id, self.store)

    _stored_runs(2)
    # The command module binds these names when it is imported: patch them where it uses them.
    monkeypatch.setattr(service.cli_admin, "dispatch_mode", lambda settings: "celery")
    monkeypatch.setattr(service.cli_admin, "make_dispatcher",
                        lambda mode, store, settings: WorkerStandIn(store))
    queued = CliRunner().invoke(main, ["reverify", "--all"])
    assert queued.exit_code == 0 and "with --wait" in queued.stdout
    assert "summary:" not in queued.stdout
    followed = CliRunner().invoke(main, ["reverify", "--all", "--wait"])
    assert followed.exit_code == 0, followed.output
    assert "re-verifying" in followed.stderr
    assert "succeeded 2" in followed.stdout and "summary: 2 run(s)" in followed.stdout
