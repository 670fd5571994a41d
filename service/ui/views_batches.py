"""Re-verification batches: the list, and one batch's progress and drift."""

from __future__ import annotations

from flask import render_template

from service import listing
from service.api.context import services
from service.batches import get_batch
from service.report.numbers import number_markup
from service.store.models import FINISHED_STATES
from service.ui.blueprint import ui

#: Seconds between reloads of a batch page while the batch runs (a meta refresh: no script).
REFRESH_SECONDS = 3


@ui.get("/batches")
def batches():
    return render_template("ui_batches.html", batches=listing.list_batches(services().store))


@ui.get("/batches/<batch_id>")
def batch(batch_id: str):
    store = services().store
    found = get_batch(store, batch_id)
    total = sum(found["counts"].values())
    done = sum(found["counts"][s] for s in FINISHED_STATES)
    return render_template("ui_batch.html", batch=found, runs=listing.batch_runs(store, batch_id),
                           total=total, done=done, num=number_markup,
                           refresh=REFRESH_SECONDS if found["status"] != "finished" else None)
