"""Helpers of the fault tests (their fixtures live in ``tests/conftest.py``)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from tests.faults.processes import LocalStack
from tests.integration.real_services import PostgresSchema

ROLE_NAMES = {"engineer": "fenna.fault-engineer", "reviewer": "rune.fault-reviewer",
              "auditor": "alma.fault-auditor", "admin": "aksel.fault-admin"}


def clean_upkeep_keys(client: Any) -> None:
    """Delete the recovery sweep's queue, which the lease's clean-up does not know (the sweep
    takes turns by a database lease, not a broker key)."""
    for key in client.keys("fluxproof.upkeep*"):
        client.delete(key)


def make_stack(tmp_path: Path, schema: PostgresSchema, broker_url: str, owner: str,
               **extra: str) -> LocalStack:
    return LocalStack(stack_dir=tmp_path / "stack", database_url=schema.url,
                      broker_url=broker_url, lease_owner=owner, extra_env=dict(extra))


def create_tokens(store: Any) -> dict[str, str]:
    from tests.api.support import person_token

    return {role: person_token(store, role, name)
            for role, name in ROLE_NAMES.items()}
