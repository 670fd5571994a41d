"""Fixtures of the page tests: the API tests' app, store, client and tokens (one per role),
plus helpers to sign a test client in through the login form."""

from __future__ import annotations

from tests.api.conftest import (  # noqa: F401  (fixtures, re-used as they are)
    app,
    client,
    controlled_engine,
    data_dir,
    dispatch_mode,
    migrated_template,
    store,
    tokens,
)
