"""Helpers of the page tests: the CSRF field of a page, signing a client in, making runs."""

from __future__ import annotations

import re
from typing import Any

CSRF_FIELD = re.compile(r'name="csrf_token" value="([^"]+)"')


def csrf_of(html: str) -> str:
    match = CSRF_FIELD.search(html)
    assert match, "the page has no CSRF field"
    return match.group(1)


def login_of(client: Any, who: str) -> str:
    """The login of ``who``: a login, or a bearer token of the test helpers' persons."""
    from service.tokens import identify

    if not who.startswith("fpt_"):
        return who
    identity = identify(client.application.extensions["fluxproof"].store, who)
    assert identity is not None, "not a valid token"
    return identity.login


def sign_in(client: Any, who: str, next_path: str = "/ui/runs", *,
            password: str | None = None) -> Any:
    """Sign ``client`` in through the form with the login and password of ``who`` (a login, or
    the token of a helpers' person, whose password is TEST_PASSWORD); returns the response."""
    from tests.api.support import TEST_PASSWORD

    form = client.get("/ui/login").get_data(as_text=True)
    return client.post("/ui/login", data={"login": login_of(client, who),
                                          "password": password or TEST_PASSWORD,
                                          "csrf_token": csrf_of(form), "next": next_path})


def page_csrf(client: Any, path: str) -> str:
    return csrf_of(client.get(path).get_data(as_text=True))


def queue_and_run(store: Any, document: dict[str, Any], actor: str = "erin.engineer") -> str:
    from service.runs import create_run, execute_run

    run_id = create_run(store, actor=actor, document=document)["run_id"]
    execute_run(run_id, store)
    return run_id
