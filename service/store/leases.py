"""Named leases: one process at a time holds each, until it releases it or it expires.

A lease is a row of ``service_leases`` (migration 0008). :func:`take_lease` inserts it, or
updates it when it has expired or the caller already holds it; exactly one of two processes
racing for it gets a row count of one (the insert's primary key, or the update's condition, is
decided by the database, SQLite or PostgreSQL alike). A holder that dies leaves the lease to
expire by itself. The recovery sweep takes turns by it (:mod:`service.recovery`) wherever it
runs: in the API process, in every worker, or in beat.
"""

from __future__ import annotations

import os
import socket
import threading
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import timedelta

from sqlalchemy import and_, delete, insert, or_, update
from sqlalchemy.exc import IntegrityError

from service.store.models import ServiceLease, utc_now
from service.store.session import Store


def new_holder() -> str:
    """A holder name of its own for one taking of a lease: host, process id, thread and a
    random part (two takings in one thread are two holders)."""
    return (f"{socket.gethostname()}:{os.getpid()}:{threading.get_ident()}:"
            f"{uuid.uuid4().hex[:12]}")


def take_lease(store: Store, name: str, holder: str, seconds: float) -> bool:
    """Take lease ``name`` for ``holder`` for ``seconds``; True when taken (or renewed)."""
    now = utc_now()
    expires = now + timedelta(seconds=seconds)
    with store.transaction() as session:
        taken = session.execute(
            update(ServiceLease)
            .where(ServiceLease.name == name,
                   or_(ServiceLease.expires_at < now, ServiceLease.holder == holder))
            .values(holder=holder, expires_at=expires)
            .execution_options(synchronize_session=False)).rowcount
    if taken:
        return True
    try:
        with store.transaction() as session:
            session.execute(insert(ServiceLease).values(name=name, holder=holder,
                                                        expires_at=expires))
    except IntegrityError:
        return False  # another process holds it
    return True


def release_lease(store: Store, name: str, holder: str) -> None:
    """Give lease ``name`` up when ``holder`` still holds it."""
    with store.transaction() as session:
        session.execute(delete(ServiceLease).where(
            and_(ServiceLease.name == name, ServiceLease.holder == holder)))


@contextmanager
def held_lease(store: Store, name: str, seconds: float) -> Iterator[bool]:
    """Hold lease ``name`` while the block runs; yields False (and runs the block all the same)
    when another process holds it."""
    holder = new_holder()
    taken = take_lease(store, name, holder, seconds)
    try:
        yield taken
    finally:
        if taken:
            release_lease(store, name, holder)
