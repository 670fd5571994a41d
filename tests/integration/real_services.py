"""Reaching the machine's real Redis and PostgreSQL, and taking a private corner of each.

The CI machine (and a developer's) runs Redis on 127.0.0.1:6379 and PostgreSQL on
127.0.0.1:5432 (trust auth, database ``test``). Other suites may use both at once, so the
integration tests only ever touch what they create:

* Redis: a *lease* on one numbered database (:class:`RedisLease`): a lock key taken with
  ``SET NX EX``; a database that holds keys other than a Celery queue's is never taken.
  On release only the lock and the Celery/kombu keys are deleted.
* PostgreSQL: a schema of its own (``fluxproof_it_<pid>_<n>``), reached through
  ``search_path`` in the connection URL, dropped (``CASCADE``) at the end.

Used by ``tests/integration`` and ``tests/benchmarks/test_bench_service.py``.
"""

from __future__ import annotations

import os
import socket
import uuid
from collections.abc import Iterable
from dataclasses import dataclass, field
from urllib.parse import quote

REDIS_HOST = "127.0.0.1"
REDIS_PORT = 6379
POSTGRES_HOST = "127.0.0.1"
POSTGRES_PORT = 5432
POSTGRES_DATABASE = "test"
#: Users tried in order for trust authentication.
POSTGRES_USERS = ("postgres", "root")
#: Redis database numbers the integration tests and benchmarks may lease (0 and 15 are left
#: to others).
REDIS_DATABASES = (11, 12, 13, 14, 10, 9, 8)
LEASE_KEY = "fluxproof:lease"  # the same key as deploy/stack_services.py
LEASE_SECONDS = 1800
#: Keys a Celery queue on the Redis transport creates; a database holding only these (and the
#: lease key) is one we may take and clean.
CELERY_KEY_PATTERNS = ("celery", "celery\x06*", "_kombu.*", "unacked", "unacked_index",
                       "unacked_mutex", "*.reply.celery.pidbox", "fluxproof.upkeep*",
                       "fluxproof:recovery-lock")


class ServiceMissing(RuntimeError):
    """A real service the integration tests need cannot be reached."""


def redis_client(db: int):
    import redis

    return redis.Redis(host=REDIS_HOST, port=REDIS_PORT, db=db, socket_timeout=3,
                       socket_connect_timeout=3)


def require_redis() -> None:
    """Raise :class:`ServiceMissing` unless Redis answers PING."""
    try:
        if not redis_client(0).ping():
            raise ServiceMissing(f"Redis at {REDIS_HOST}:{REDIS_PORT} did not answer PING")
    except ServiceMissing:
        raise
    except Exception as exc:
        raise ServiceMissing(f"Redis at {REDIS_HOST}:{REDIS_PORT} cannot be reached: "
                             f"{exc}") from exc


def postgres_user() -> str:
    """The first user of :data:`POSTGRES_USERS` that can connect to database ``test``."""
    import psycopg

    failures = []
    for user in POSTGRES_USERS:
        try:
            with psycopg.connect(host=POSTGRES_HOST, port=POSTGRES_PORT, user=user,
                                 dbname=POSTGRES_DATABASE, connect_timeout=3) as connection:
                connection.execute("SELECT 1")
            return user
        except Exception as exc:  # noqa: BLE001 - try the next user, report them all
            failures.append(f"{user}: {str(exc).strip()}")
    raise ServiceMissing(f"PostgreSQL at {POSTGRES_HOST}:{POSTGRES_PORT}/{POSTGRES_DATABASE} "
                         f"accepts none of the users tried ({'; '.join(failures)})")


def schema_url(user: str, schema: str) -> str:
    """A SQLAlchemy URL of database ``test`` whose connections use ``schema`` first."""
    options = quote(f"-csearch_path={schema}", safe="")
    return (f"postgresql+psycopg://{user}@{POSTGRES_HOST}:{POSTGRES_PORT}/"
            f"{POSTGRES_DATABASE}?options={options}")


_schema_counter = 0


@dataclass
class PostgresSchema:
    """A schema of our own in database ``test``; :meth:`drop` removes it and all it holds."""

    user: str
    name: str = ""
    url: str = ""

    @classmethod
    def create(cls, prefix: str = "fluxproof_it") -> PostgresSchema:
        import psycopg

        global _schema_counter
        _schema_counter += 1
        user = postgres_user()
        name = f"{prefix}_{os.getpid()}_{_schema_counter}"
        with psycopg.connect(host=POSTGRES_HOST, port=POSTGRES_PORT, user=user,
                             dbname=POSTGRES_DATABASE, autocommit=True) as connection:
            connection.execute(f'CREATE SCHEMA "{name}"')
        return cls(user=user, name=name, url=schema_url(user, name))

    def exists(self) -> bool:
        import psycopg

        with psycopg.connect(host=POSTGRES_HOST, port=POSTGRES_PORT, user=self.user,
                             dbname=POSTGRES_DATABASE) as connection:
            row = connection.execute("SELECT count(*) FROM information_schema.schemata "
                                     "WHERE schema_name = %s", (self.name,)).fetchone()
        return bool(row and row[0])

    def drop(self) -> None:
        import psycopg

        with psycopg.connect(host=POSTGRES_HOST, port=POSTGRES_PORT, user=self.user,
                             dbname=POSTGRES_DATABASE, autocommit=True) as connection:
            connection.execute(f'DROP SCHEMA IF EXISTS "{self.name}" CASCADE')


def _only_celery_keys(keys: Iterable[bytes]) -> bool:
    from fnmatch import fnmatchcase

    for raw in keys:
        key = raw.decode("utf-8", "replace")
        if key == LEASE_KEY:
            continue
        if not any(fnmatchcase(key, pattern) for pattern in CELERY_KEY_PATTERNS):
            return False
    return True


@dataclass
class RedisLease:
    """A Redis database held for one test session (see module notes)."""

    db: int
    owner: str
    _released: bool = field(default=False, repr=False)

    @property
    def url(self) -> str:
        return f"redis://{REDIS_HOST}:{REDIS_PORT}/{self.db}"

    @classmethod
    def take(cls, exclude: Iterable[int] = ()) -> RedisLease:
        excluded = set(exclude)
        owner = f"{socket.gethostname()}:{os.getpid()}:{uuid.uuid4().hex[:8]}"
        for db in REDIS_DATABASES:
            if db in excluded:
                continue
            client = redis_client(db)
            if not client.set(LEASE_KEY, owner, nx=True, ex=LEASE_SECONDS):
                continue
            if not _only_celery_keys(client.keys("*")):
                client.delete(LEASE_KEY)
                continue
            lease = cls(db=db, owner=owner)
            lease.clean()
            return lease
        raise ServiceMissing(f"no free Redis database among {REDIS_DATABASES}: each is leased "
                             "by another test session or holds keys that are not ours")

    def client(self):
        return redis_client(self.db)

    def clean(self) -> None:
        """Delete the Celery/kombu keys (queued messages included) of the leased database."""
        client = self.client()
        for pattern in CELERY_KEY_PATTERNS:
            for key in client.keys(pattern):
                client.delete(key)

    def queued_messages(self, queue: str = "celery") -> list[dict]:
        """The messages waiting in ``queue``, decoded (newest first, as Redis lists them)."""
        import base64
        import json

        messages = []
        for raw in self.client().lrange(queue, 0, -1):
            envelope = json.loads(raw)
            body = envelope.get("body")
            if envelope.get("properties", {}).get("body_encoding") == "base64":
                body = base64.b64decode(body).decode("utf-8")
            envelope["decoded_body"] = json.loads(body)
            messages.append(envelope)
        return messages

    def release(self) -> None:
        if self._released:
            return
        self._released = True
        self.clean()
        client = self.client()
        if client.get(LEASE_KEY) == self.owner.encode():
            client.delete(LEASE_KEY)
