"""Helpers of the page tests: the CSRF field of a page, signing a client in, making runs."""

from __future__ import annotations

import re
from typing import Any

CSRF_FIELD = re.compile(r'name="csrf_token" value="([^"]+)"')


def csrf_of(html: str) -> str:
    match = CSRF_FIELD.search(html)
    assert match, "the page has no CSRF field"
    return match.group(1)


def sign_in(client: Any, token: str, next_path: str = "/ui/runs") -> Any:
    """Sign ``client`` in through the form; returns the POST's response."""
    form = client.get("/ui/login").get_data(as_text=True)
    return client.post("/ui/login", data={"token": token, "csrf_token": csrf_of(form),
                                          "next": next_path})


def page_csrf(client: Any, path: str) -> str:
    return csrf_of(client.get(path).get_data(as_text=True))


def queue_and_run(store: Any, document: dict[str, Any], actor: str = "erin.engineer") -> str:
    from service.runs import create_run, execute_run

    run_id = create_run(store, actor=actor, document=document)["run_id"]
    execute_run(run_id, store)
    return run_id
