"""Fixtures of the fault tests: real PostgreSQL and Redis, the local stack, an own redis-server.

Every test here is marked ``integration`` and ``slow``. A missing Redis, PostgreSQL or
``redis-server`` binary FAILS the test when ``CI`` is set and skips it (with the reason)
otherwise. Each test gets a PostgreSQL schema of its own, dropped afterwards.
"""

from __future__ import annotations

import shutil
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from tests.faults.processes import LocalStack, OwnRedis
from tests.integration.real_services import (
    PostgresSchema,
    RedisLease,
)
from tests.integration.service_gate import require_real_services, unavailable

ROLE_NAMES = {"engineer": "fenna.fault-engineer", "reviewer": "rune.fault-reviewer",
              "auditor": "alma.fault-auditor", "admin": "aksel.fault-admin"}


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    here = Path(__file__).parent
    for item in items:
        if here in Path(str(item.fspath)).parents:
            item.add_marker(pytest.mark.integration)
            item.add_marker(pytest.mark.slow)


@pytest.fixture(scope="session")
def real_services() -> str:
    """Check Redis and PostgreSQL once; return the PostgreSQL user that works."""
    return require_real_services("fault")


@pytest.fixture
def pg_schema(real_services: str) -> Iterator[PostgresSchema]:
    schema = PostgresSchema.create(prefix="fluxproof_fault")
    yield schema
    schema.drop()


@pytest.fixture
def migrated_store(pg_schema: PostgresSchema):
    from service.store import Store
    from service.store.migrate import upgrade

    store = Store(pg_schema.url)
    upgrade(store)
    yield store
    store.dispose()


def clean_upkeep_keys(client: Any) -> None:
    """Delete the recovery sweep's queue and lock, which the lease's clean-up does not know."""
    from service.recovery import LOCK_KEY

    for key in client.keys("fluxproof.upkeep*"):
        client.delete(key)
    client.delete(LOCK_KEY)


@pytest.fixture
def redis_lease(real_services: str) -> Iterator[RedisLease]:
    lease = RedisLease.take()
    yield lease
    clean_upkeep_keys(lease.client())
    lease.release()


@pytest.fixture
def own_redis(tmp_path: Path) -> Iterator[OwnRedis]:
    if shutil.which("redis-server") is None:
        unavailable("the redis-server program is not on PATH", "fault")
    server = OwnRedis(tmp_path / "own-redis").start()
    yield server
    server.stop()


def make_stack(tmp_path: Path, schema: PostgresSchema, broker_url: str, owner: str,
               **extra: str) -> LocalStack:
    return LocalStack(stack_dir=tmp_path / "stack", database_url=schema.url,
                      broker_url=broker_url, lease_owner=owner, extra_env=dict(extra))


def create_tokens(store: Any) -> dict[str, str]:
    from service.tokens import create_token

    return {role: create_token(store, role=role, name=name)[1]
            for role, name in ROLE_NAMES.items()}


def bearer(token: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {token}"}
