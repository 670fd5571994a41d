"""ORM models of the store (SQLAlchemy 2 declarative, typed).

The schema itself is created and changed only by the Alembic migrations in ``migrations/``;
these classes must match them (``tests/unit/service/store/test_store.py`` compares the two).
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

from sqlalchemy import (
    JSON,
    BigInteger,
    Boolean,
    DateTime,
    ForeignKey,
    Index,
    Integer,
    String,
    Text,
    TypeDecorator,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship

from schemas.result import Decision, RunStatus

RUN_STATES = tuple(s.value for s in RunStatus)
UNFINISHED_STATES = (RunStatus.QUEUED.value, RunStatus.RUNNING.value)
FINISHED_STATES = (RunStatus.SUCCEEDED.value, RunStatus.FAILED.value)
ROLES = ("engineer", "reviewer", "auditor", "admin")
DECISIONS = tuple(d.value for d in Decision)
#: What a signature means (21 CFR Part 11 §11.50(a)(3)).
MEANINGS = ("review", "approval", "responsibility")


def utc_now() -> datetime:
    """The current time, timezone-aware UTC."""
    return datetime.now(UTC)


class UtcDateTime(TypeDecorator):
    """A timestamp stored as naive UTC and read back timezone-aware (SQLite keeps no zone)."""

    impl = DateTime
    cache_ok = True

    def process_bind_param(self, value: datetime | None, dialect: Any) -> datetime | None:
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError("naive datetime given to the store; use timezone-aware UTC")
        return value.astimezone(UTC).replace(tzinfo=None)

    def process_result_value(self, value: datetime | None, dialect: Any) -> datetime | None:
        return None if value is None else value.replace(tzinfo=UTC)


class Base(DeclarativeBase):
    type_annotation_map = {dict[str, Any]: JSON, list[Any]: JSON}


class Case(Base):
    __tablename__ = "cases"

    id: Mapped[str] = mapped_column(String(36), primary_key=True)
    sha256: Mapped[str] = mapped_column(String(64), unique=True)
    document: Mapped[dict[str, Any]] = mapped_column(JSON)
    title: Mapped[str] = mapped_column(String(500))
    tags: Mapped[list[Any]] = mapped_column(JSON)
    created_at: Mapped[datetime] = mapped_column(UtcDateTime())
    created_by: Mapped[str] = mapped_column(String(200))

    tag_rows: Mapped[list[CaseTag]] = relationship(cascade="all, delete-orphan")


class CaseTag(Base):
    """One (case, tag) pair, so that listing and batches can filter by tag in SQL."""

    __tablename__ = "case_tags"

    case_id: Mapped[str] = mapped_column(ForeignKey("cases.id"), primary_key=True)
    tag: Mapped[str] = mapped_column(String(200), primary_key=True, index=True)


class Batch(Base):
    __tablename__ = "batches"

    id: Mapped[str] = mapped_column(String(36), primary_key=True)
    selector: Mapped[dict[str, Any]] = mapped_column(JSON)
    status: Mapped[str] = mapped_column(String(16))
    created_by: Mapped[str] = mapped_column(String(200))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime())
    finished_at: Mapped[datetime | None] = mapped_column(UtcDateTime(), nullable=True)
    drift: Mapped[list[Any] | None] = mapped_column(JSON, nullable=True)


class Run(Base):
    __tablename__ = "runs"
    # Serves lookups by batch and the "any run of this batch unfinished?" question.
    __table_args__ = (Index("ix_runs_batch_id_status", "batch_id", "status"),)

    id: Mapped[str] = mapped_column(String(36), primary_key=True)
    case_id: Mapped[str] = mapped_column(ForeignKey("cases.id"), index=True)
    status: Mapped[str] = mapped_column(String(16))
    record: Mapped[dict[str, Any] | None] = mapped_column(JSON, nullable=True)
    error: Mapped[str | None] = mapped_column(Text, nullable=True)
    submitted_by: Mapped[str] = mapped_column(String(200))
    batch_id: Mapped[str | None] = mapped_column(ForeignKey("batches.id"), nullable=True)
    created_at: Mapped[datetime] = mapped_column(UtcDateTime())
    started_at: Mapped[datetime | None] = mapped_column(UtcDateTime(), nullable=True)
    finished_at: Mapped[datetime | None] = mapped_column(UtcDateTime(), nullable=True)
    attempts: Mapped[int] = mapped_column(Integer, default=0)
    #: The Monte Carlo seed drawn for the run when its case states none (migration 0005).
    monte_carlo_seed: Mapped[int | None] = mapped_column(BigInteger, nullable=True)
    #: How far a running Monte Carlo run has got (:mod:`service.runs.waves`).
    progress: Mapped[dict[str, Any] | None] = mapped_column(JSON, nullable=True)

    signoffs: Mapped[list[Signoff]] = relationship(order_by="Signoff.id")


class RunBlock(Base):
    """One Monte Carlo block of a run, written once by whichever process computed it
    (:mod:`service.store.blocks`)."""

    __tablename__ = "run_blocks"

    run_id: Mapped[str] = mapped_column(ForeignKey("runs.id"), primary_key=True)
    block_index: Mapped[int] = mapped_column(Integer, primary_key=True, autoincrement=False)
    seed: Mapped[int] = mapped_column(BigInteger)
    result: Mapped[dict[str, Any]] = mapped_column(JSON)
    computed_by: Mapped[str] = mapped_column(String(200))
    computed_at: Mapped[datetime] = mapped_column(UtcDateTime())


class ServiceLease(Base):
    """A named lease that one process at a time holds until ``expires_at``
    (:mod:`service.store.leases`): the recovery sweep's turn among API and worker processes."""

    __tablename__ = "service_leases"

    name: Mapped[str] = mapped_column(String(64), primary_key=True)
    holder: Mapped[str] = mapped_column(String(200))
    expires_at: Mapped[datetime] = mapped_column(UtcDateTime())


class Signoff(Base):
    """A sign-off: ``reviewer`` is the signer's login. The electronic signature (migration
    0006) is the signer's printed name, the meaning, the UTC time ``at``, bound to the SHA-256
    of the signed record and signed with the server's Ed25519 key (:mod:`service.signoffs`);
    sign-offs written before 0006 have none of it."""

    __tablename__ = "signoffs"

    id: Mapped[int] = mapped_column(Integer, primary_key=True, autoincrement=True)
    run_id: Mapped[str] = mapped_column(ForeignKey("runs.id"), unique=True)
    reviewer: Mapped[str] = mapped_column(String(200))
    decision: Mapped[str] = mapped_column(String(16))
    comment: Mapped[str] = mapped_column(Text)
    at: Mapped[datetime] = mapped_column(UtcDateTime())
    meaning: Mapped[str | None] = mapped_column(String(16), nullable=True)
    signer_name: Mapped[str | None] = mapped_column(String(200), nullable=True)
    justification: Mapped[str | None] = mapped_column(Text, nullable=True)
    record_sha256: Mapped[str | None] = mapped_column(String(64), nullable=True)
    payload_sha256: Mapped[str | None] = mapped_column(String(64), nullable=True)
    signature: Mapped[str | None] = mapped_column(String(200), nullable=True)
    key_id: Mapped[str | None] = mapped_column(String(32), nullable=True)


class User(Base):
    """A person: login (unique by ``login_key``, its NFKC case-folded form), printed name,
    role and an argon2id password hash (:mod:`service.people`)."""

    __tablename__ = "users"

    id: Mapped[str] = mapped_column(String(32), primary_key=True)
    login: Mapped[str] = mapped_column(String(200))
    login_key: Mapped[str] = mapped_column(String(200), unique=True)
    name: Mapped[str] = mapped_column(String(200))
    role: Mapped[str] = mapped_column(String(16))
    password_hash: Mapped[str | None] = mapped_column(String(200), nullable=True)
    disabled: Mapped[bool] = mapped_column(Boolean, default=False)
    created_at: Mapped[datetime] = mapped_column(UtcDateTime())
    created_by: Mapped[str] = mapped_column(String(200))
    changed_at: Mapped[datetime | None] = mapped_column(UtcDateTime(), nullable=True)


class Token(Base):
    """A bearer token of a person (``user_id``); ``name`` says what it is for. Tokens made
    before migration 0006 belong to nobody and are refused."""

    __tablename__ = "tokens"

    id: Mapped[str] = mapped_column(String(32), primary_key=True)
    name: Mapped[str] = mapped_column(String(200))
    role: Mapped[str] = mapped_column(String(16))
    sha256: Mapped[str] = mapped_column(String(64))
    created_at: Mapped[datetime] = mapped_column(UtcDateTime())
    revoked: Mapped[bool] = mapped_column(Boolean, default=False)
    user_id: Mapped[str | None] = mapped_column(ForeignKey("users.id"), nullable=True)
    expires_at: Mapped[datetime | None] = mapped_column(UtcDateTime(), nullable=True)


class BrowserSession(Base):
    """A browser session kept on the server; the cookie carries only its random id, and the
    store only the SHA-256 of that id (:mod:`service.ui.sessions`)."""

    __tablename__ = "browser_sessions"

    id_sha256: Mapped[str] = mapped_column(String(64), primary_key=True)
    user_id: Mapped[str | None] = mapped_column(ForeignKey("users.id"), nullable=True,
                                                index=True)
    data: Mapped[dict[str, Any]] = mapped_column(JSON)
    created_at: Mapped[datetime] = mapped_column(UtcDateTime())
    signed_in_at: Mapped[datetime | None] = mapped_column(UtcDateTime(), nullable=True)
    last_seen_at: Mapped[datetime] = mapped_column(UtcDateTime(), index=True)
    ended_at: Mapped[datetime | None] = mapped_column(UtcDateTime(), nullable=True)
    end_reason: Mapped[str | None] = mapped_column(String(40), nullable=True)


class AuditEvent(Base):
    __tablename__ = "audit_events"

    seq: Mapped[int] = mapped_column(Integer, primary_key=True, autoincrement=False)
    # Kept as the exact ISO-8601 text that was hashed, so verification needs no round trip.
    at: Mapped[str] = mapped_column(String(40))
    actor: Mapped[str] = mapped_column(String(200))
    kind: Mapped[str] = mapped_column(String(40), index=True)
    subject: Mapped[str] = mapped_column(String(200), index=True)
    payload: Mapped[dict[str, Any]] = mapped_column(JSON)
    prev_hash: Mapped[str] = mapped_column(String(64))
    hash: Mapped[str] = mapped_column(String(64))


class AuditHead(Base):
    """The single chain-head row; appends lock it, which keeps the chain linear."""

    __tablename__ = "audit_head"

    id: Mapped[int] = mapped_column(Integer, primary_key=True, autoincrement=False)
    seq: Mapped[int] = mapped_column(Integer)
    hash: Mapped[str] = mapped_column(String(64))
    #: The chain's identity in the anchor file (migration 0007; a new one for a new chain).
    chain_id: Mapped[str] = mapped_column(String(36))
    #: The first sequence number hashed with the chain key; earlier events keep plain SHA-256
    #: (:mod:`service.store.audit_seal`).
    keyed_from: Mapped[int] = mapped_column(Integer)


class AuditPending(Base):
    """The audit outbox: events written with their change, not yet chained.

    A writer adds its events here in the transaction of the change (no lock taken); the chainer
    (:func:`service.store.audit_chain.chain_pending`) moves them onto the chain in ``id`` order
    under the chain-head lock.
    """

    __tablename__ = "audit_pending"

    id: Mapped[int] = mapped_column(BigInteger().with_variant(Integer, "sqlite"),
                                    primary_key=True, autoincrement=True)
    actor: Mapped[str] = mapped_column(String(200))
    kind: Mapped[str] = mapped_column(String(40))
    subject: Mapped[str] = mapped_column(String(200))
    payload: Mapped[dict[str, Any]] = mapped_column(JSON)
