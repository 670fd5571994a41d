"""Helpers of ``deploy/local-stack.sh`` that need a Python client: PostgreSQL and Redis checks.

Usage (``python deploy/stack_services.py COMMAND ...``):

``pg-url SCHEMA``             print the URL of database ``test`` on 127.0.0.1:5432 for the first
                              user that connects (postgres, root, $USER), with ``search_path``
                              set to SCHEMA
``ensure-schema URL``         create the schema named in URL's ``search_path`` if it is missing
``lease-redis URL OWNER``     take the Redis database of URL for OWNER (``SET NX`` on the key
                              ``fluxproof:lease``); exit 1 naming the holder when another has it
``release-redis URL OWNER``   give the lease back (only if OWNER holds it)
``wait-http URL SECONDS``     wait until URL answers 200; exit 1 with the last answer otherwise

Only what the stack owns is touched: its own schema and its own Redis database.
"""

from __future__ import annotations

import getpass
import re
import sys
import time
import urllib.error
import urllib.request
from urllib.parse import parse_qs, quote, unquote, urlsplit

LEASE_KEY = "fluxproof:lease"
PG_HOST, PG_PORT, PG_DATABASE = "127.0.0.1", 5432, "test"
SCHEMA_NAME = re.compile(r"^[a-z_][a-z0-9_]{0,62}$")


def _fail(message: str) -> None:
    print(f"stack_services: {message}", file=sys.stderr)
    raise SystemExit(1)


def pg_url(schema: str) -> str:
    import psycopg

    if not SCHEMA_NAME.match(schema):
        _fail(f"schema: expected lower-case letters, digits and _, got {schema!r}")
    tried = []
    for user in dict.fromkeys(("postgres", "root", getpass.getuser())):
        try:
            with psycopg.connect(host=PG_HOST, port=PG_PORT, user=user, dbname=PG_DATABASE,
                                 connect_timeout=3) as connection:
                connection.execute("SELECT 1")
        except Exception as exc:  # noqa: BLE001 - try the next user
            tried.append(f"{user}: {str(exc).strip()}")
            continue
        options = quote(f"-csearch_path={schema}", safe="")
        return f"postgresql+psycopg://{user}@{PG_HOST}:{PG_PORT}/{PG_DATABASE}?options={options}"
    _fail(f"PostgreSQL {PG_HOST}:{PG_PORT}/{PG_DATABASE} accepts none of: {'; '.join(tried)}")
    raise AssertionError


def _schema_of(url: str) -> str | None:
    options = parse_qs(urlsplit(url).query).get("options", [])
    for option in options:
        match = re.search(r"-c\s*search_path=([^\s,]+)", unquote(option))
        if match:
            return match.group(1)
    return None


def ensure_schema(url: str) -> None:
    import psycopg

    schema = _schema_of(url)
    if schema is None:
        return  # no search_path: the user's default schema is used as it is
    if not SCHEMA_NAME.match(schema):
        _fail(f"search_path schema: expected lower-case letters, digits and _, got {schema!r}")
    parts = urlsplit(url.replace("postgresql+psycopg://", "postgresql://", 1))
    with psycopg.connect(host=parts.hostname, port=parts.port or 5432, user=parts.username,
                         password=parts.password, dbname=parts.path.lstrip("/"),
                         autocommit=True) as connection:
        connection.execute(f'CREATE SCHEMA IF NOT EXISTS "{schema}"')


def _redis(url: str):
    import redis

    return redis.Redis.from_url(url, socket_timeout=3, socket_connect_timeout=3)


def lease_redis(url: str, owner: str) -> None:
    client = _redis(url)
    if client.set(LEASE_KEY, owner, nx=True):
        return
    holder = (client.get(LEASE_KEY) or b"").decode()
    if holder != owner:
        _fail(f"the Redis database of {url} is leased by {holder!r}; give the stack another "
              "database (FLUXPROOF_BROKER_URL=redis://127.0.0.1:6379/<n>)")


def release_redis(url: str, owner: str) -> None:
    client = _redis(url)
    if (client.get(LEASE_KEY) or b"").decode() == owner:
        client.delete(LEASE_KEY)


def wait_http(url: str, seconds: float) -> None:
    deadline = time.monotonic() + seconds
    last = "no answer"
    while time.monotonic() < deadline:
        try:
            with urllib.request.urlopen(url, timeout=2) as response:
                if response.status == 200:
                    return
                last = f"HTTP {response.status}"
        except urllib.error.HTTPError as exc:
            last = f"HTTP {exc.code}: {exc.read()[:300]!r}"
        except OSError as exc:
            last = str(exc)
        time.sleep(0.25)
    _fail(f"{url} did not answer 200 within {seconds:g} s (last: {last})")


COMMANDS = {"pg-url": (pg_url, 1), "ensure-schema": (ensure_schema, 1),
            "lease-redis": (lease_redis, 2), "release-redis": (release_redis, 2),
            "wait-http": (lambda url, s: wait_http(url, float(s)), 2)}


def main(argv: list[str]) -> None:
    if not argv or argv[0] not in COMMANDS or len(argv) - 1 != COMMANDS[argv[0]][1]:
        _fail(f"usage: stack_services.py {{{'|'.join(COMMANDS)}}} ARGS (see the module notes)")
    function, _count = COMMANDS[argv[0]]
    result = function(*argv[1:])
    if result is not None:
        print(result)


if __name__ == "__main__":
    main(sys.argv[1:])
