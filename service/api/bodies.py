"""Marshmallow schemas of the API's own request and response bodies.

The case and the result document are the project's schemas (``schemas/``); these describe what
the service wraps around them. Request schemas load incoming bodies (unknown fields are
refused); response schemas dump what the views return (``service.api.declare``), and both
feed the OpenAPI document.
"""

from __future__ import annotations

from typing import Any

from marshmallow import INCLUDE, RAISE, Schema, ValidationError, fields, validate, validates_schema

from schemas.case import CaseSchema, WholeMatch
from schemas.errors import flatten_messages
from schemas.result import SHA256_PATTERN, ResultSchema
from schemas.text import hidden_character_problem
from service.errors import ValidationFailed
from service.listing import MAX_OFFSET
from service.store.models import DECISIONS, MEANINGS, RUN_STATES

COMMENT_MAX = 4000
TAG_MAX = 200


class StrictSchema(Schema):
    class Meta:
        unknown = RAISE


class RunRequestSchema(StrictSchema):
    """Queue a run: exactly one of ``case_id`` (a stored case) or ``case`` (a new case)."""

    case_id = fields.String(validate=validate.Length(min=1, max=36),
                            metadata={"description": "id of a stored case"})
    # Loaded as a plain object here; runs.create_run validates it as a case (422 naming paths).
    case = fields.Dict(metadata={"description": "a case document (schema_version 1)",
                                 "documented_as": CaseSchema})

    @validates_schema
    def _exactly_one(self, data: dict[str, Any], **_kwargs: Any) -> None:
        if ("case_id" in data) == ("case" in data):
            raise ValidationError("expected exactly one of 'case_id' or 'case'", "_schema")


def _visible(multiline: bool = False) -> Any:
    """A validator refusing invisible and bidirectional-control characters."""

    def check(value: str) -> None:
        problem = hidden_character_problem(value, multiline=multiline)
        if problem is not None:
            raise ValidationError(problem)

    return check


class SignoffRequestSchema(StrictSchema):
    """An electronic signature: the decision, what it means, the reasons, and the signer's
    password again (21 CFR Part 11 §11.200(a)(1))."""

    decision = fields.String(required=True, validate=validate.OneOf(DECISIONS))
    meaning = fields.String(required=True, validate=validate.OneOf(MEANINGS), metadata={
        "description": "what the signature means: review, approval or responsibility"})
    comment = fields.String(required=True,
                            validate=[validate.Length(min=1, max=COMMENT_MAX),
                                      _visible(multiline=True)],
                            metadata={"description": "the reviewer's reasons"})
    password = fields.String(required=True, load_only=True,
                             validate=validate.Length(min=1, max=1024),
                             metadata={"description": "the signer's password, again at each "
                                                      "signing", "format": "password"})
    justification = fields.String(
        validate=[validate.Length(min=1, max=COMMENT_MAX), _visible(multiline=True)],
        metadata={"description": "why loosened limits (the record's deviations) are "
                                 "acceptable; required to approve such a record"})


class BatchRequestSchema(StrictSchema):
    """Re-verify stored cases: ``{"tag": ...}`` or ``{"all": true}``."""

    tag = fields.String(validate=validate.Length(min=1, max=TAG_MAX))
    all = fields.Boolean()

    @validates_schema
    def _exactly_one(self, data: dict[str, Any], **_kwargs: Any) -> None:
        has_tag = "tag" in data
        has_all = data.get("all") is True
        if "all" in data and data["all"] is not True:
            raise ValidationError("only true is meaningful; omit it or send a tag", "all")
        if has_tag == has_all:
            raise ValidationError("expected {\"tag\": <tag>} or {\"all\": true}", "_schema")


class PageQuerySchema(StrictSchema):
    limit = fields.Integer(load_default=50, validate=validate.Range(min=1, max=500))
    offset = fields.Integer(load_default=0, validate=validate.Range(min=0, max=MAX_OFFSET))


class CaseListQuerySchema(PageQuerySchema):
    tag = fields.String(validate=validate.Length(min=1, max=TAG_MAX))


class AuditQuerySchema(PageQuerySchema):
    kind = fields.String(validate=validate.Length(min=1, max=40))
    subject = fields.String(validate=validate.Length(min=1, max=200))


# --- responses -------------------------------------------------------------

class ErrorItemSchema(Schema):
    path = fields.String(required=True, metadata={"description": "dotted path of the field"})
    message = fields.String(required=True)


class ProblemSchema(Schema):
    """RFC 9457 problem details with an ``errors`` list."""

    class Meta:
        # RFC 9457 extension members (e.g. role and allowed_roles on a 403) are allowed.
        unknown = INCLUDE

    type = fields.String(required=True)
    title = fields.String(required=True)
    status = fields.Integer(required=True)
    detail = fields.String(required=True)
    instance = fields.String(required=True)
    errors = fields.List(fields.Nested(ErrorItemSchema), required=True)


class ComponentStateSchema(Schema):
    state = fields.String(required=True)
    mode = fields.String()
    detail = fields.String()
    pending = fields.Integer()


class HealthSchema(Schema):
    service = fields.String(required=True)
    version = fields.String(required=True)
    store = fields.Nested(ComponentStateSchema, required=True)
    broker = fields.Nested(ComponentStateSchema, required=True)


class CaseCreatedSchema(Schema):
    case_id = fields.String(required=True)
    sha256 = fields.String(required=True)


class CaseSummarySchema(Schema):
    case_id = fields.String(required=True)
    sha256 = fields.String(required=True)
    title = fields.String(required=True)
    tags = fields.List(fields.String(), required=True)
    created_at = fields.String(required=True)
    created_by = fields.String(required=True)


class StoredCaseSchema(CaseSummarySchema):
    document = fields.Dict(required=True, metadata={"description": "the case as sent"})


class CasePageSchema(Schema):
    items = fields.List(fields.Nested(CaseSummarySchema), required=True)
    total = fields.Integer(required=True)
    limit = fields.Integer(required=True)
    offset = fields.Integer(required=True)


class SignoffSchema(Schema):
    """A sign-off and its electronic signature (the signature fields are null on sign-offs
    made before signatures existed)."""

    reviewer = fields.String(required=True, metadata={"description": "the signer's login"})
    name = fields.String(allow_none=True, metadata={"description": "the signer's printed name"})
    decision = fields.String(required=True, validate=validate.OneOf(DECISIONS))
    meaning = fields.String(allow_none=True, metadata={"description": "review, approval or "
                                                                      "responsibility"})
    comment = fields.String(required=True)
    justification = fields.String(allow_none=True)
    at = fields.String(required=True, metadata={"description": "UTC time of signing"})
    record_sha256 = fields.String(allow_none=True, metadata={
        "description": "SHA-256 of the signed result document (canonical JSON)"})
    payload_sha256 = fields.String(allow_none=True, metadata={
        "description": "SHA-256 of the signed payload (canonical JSON)"})
    signature = fields.String(allow_none=True, metadata={
        "description": "Ed25519 signature of the payload, base64; verify with "
                       "GET /v1/meta/signing-key"})
    key_id = fields.String(allow_none=True, metadata={"description": "the signing key's id"})


class SigningKeySchema(Schema):
    """The server's public signing key."""

    algorithm = fields.String(required=True)
    key_id = fields.String(required=True)
    public_key_pem = fields.String(required=True)
    payload_fields = fields.List(fields.String(), required=True, metadata={
        "description": "the fields of a signed payload (canonical JSON: keys sorted, no "
                       "whitespace, UTF-8)"})


class ProgressSchema(Schema):
    """How far a running Monte Carlo run has got (trials in whole blocks, merged in order)."""

    trials = fields.Integer(required=True, metadata={"description": "trials merged so far"})
    blocks = fields.Integer(required=True, metadata={"description": "blocks merged so far"})
    max_trials = fields.Integer(required=True, metadata={
        "description": "trials at most (the adaptive stopping usually ends sooner)"})
    max_blocks = fields.Integer(required=True, metadata={"description": "blocks at most"})
    updated_at = fields.String(required=True, metadata={"description": "when it was written"})


class RunSummarySchema(Schema):
    run_id = fields.String(required=True)
    case_id = fields.String(required=True)
    status = fields.String(required=True, validate=validate.OneOf(RUN_STATES))
    verdict = fields.String(allow_none=True)
    error = fields.String(allow_none=True)
    submitted_by = fields.String(required=True)
    batch_id = fields.String(allow_none=True)
    attempts = fields.Integer(required=True)
    created_at = fields.String(required=True)
    started_at = fields.String(allow_none=True)
    finished_at = fields.String(allow_none=True)
    signoffs = fields.List(fields.Nested(SignoffSchema), required=True)
    progress = fields.Nested(ProgressSchema, metadata={
        "description": "while a Monte Carlo run (the case's uncertainty) is running: how far "
                       "it has got"})


class RecordSchema(ResultSchema, RunSummarySchema):
    """The check record: the result document with the run's own fields; while the run is
    queued or running only the run fields are present."""

    class Meta:
        unknown = RAISE

    run_id = fields.String(required=True)
    case_id = fields.String(required=True)
    case_sha256 = fields.String(validate=WholeMatch(SHA256_PATTERN))
    case_author = fields.String(metadata={"description": "who first stored the case"})


class CaseRunsSchema(Schema):
    case_id = fields.String(required=True)
    items = fields.List(fields.Nested(RunSummarySchema), required=True)


class RunAcceptedSchema(Schema):
    run_id = fields.String(required=True)
    status = fields.String(required=True)
    case_id = fields.String(required=True)


class SignoffCreatedSchema(SignoffSchema):
    run_id = fields.String(required=True)
    record = fields.Dict(required=True)


class BatchAcceptedSchema(Schema):
    batch_id = fields.String(required=True)
    status = fields.String(required=True)
    runs = fields.Integer(required=True)


class DriftQuantitySchema(Schema):
    name = fields.String(required=True)
    baseline = fields.Float(allow_none=True)
    now = fields.Float(allow_none=True)
    relative_change = fields.Float(allow_none=True)


class DriftRequirementSchema(Schema):
    """A design requirement whose status changed (null: not stated on that side)."""

    id = fields.String(required=True)
    baseline = fields.String(allow_none=True)
    now = fields.String(allow_none=True)


class DriftSchema(Schema):
    case_id = fields.String(required=True)
    run_id = fields.String(required=True)
    baseline_run_id = fields.String(required=True)
    quantities = fields.List(fields.Nested(DriftQuantitySchema), required=True)
    requirements = fields.List(fields.Nested(DriftRequirementSchema))
    baseline_versions = fields.Dict()
    now_versions = fields.Dict()


class BatchSchema(Schema):
    batch_id = fields.String(required=True)
    status = fields.String(required=True, validate=validate.OneOf(("queued", "running",
                                                                   "finished")))
    selector = fields.Dict(required=True)
    created_by = fields.String(required=True)
    created_at = fields.String(required=True)
    finished_at = fields.String(allow_none=True)
    counts = fields.Dict(keys=fields.String(), values=fields.Integer(), required=True)
    verdicts = fields.Dict(keys=fields.String(), values=fields.Integer(),
                           metadata={"description": "succeeded runs that passed every check "
                                                    "(pass) and that failed one (fail)"})
    run_ids = fields.List(fields.String(), required=True)
    drifted = fields.List(fields.Nested(DriftSchema), required=True)


class AuditEventSchema(Schema):
    seq = fields.Integer(required=True)
    at = fields.String(required=True)
    actor = fields.String(required=True)
    kind = fields.String(required=True)
    subject = fields.String(required=True)
    payload = fields.Dict(required=True)
    prev_hash = fields.String(required=True)
    hash = fields.String(required=True)


class AuditPageSchema(Schema):
    items = fields.List(fields.Nested(AuditEventSchema), required=True)
    total = fields.Integer(required=True)
    limit = fields.Integer(required=True)
    offset = fields.Integer(required=True)


class BrokenEventSchema(Schema):
    seq = fields.Integer(required=True, allow_none=True, metadata={
        "description": "The event at fault or compared with; null when the difference has no "
                       "event (an object without its event, an anchor without checkpoints)"})
    reason = fields.String(required=True)


class VerifyFindingSchema(Schema):
    kind = fields.String(required=True, metadata={
        "description": "What differs: event (the chain), anchor (the anchor file), case, run, "
                       "sign-off of run, sealed record of run, token, batch"})
    subject = fields.String(required=True, allow_none=True)
    seq = fields.Integer(required=True, allow_none=True,
                         metadata={"description": "The audit event compared with, if any"})
    message = fields.String(required=True)


class VerifyAnchorSchema(Schema):
    file = fields.String(required=True, metadata={"description": "The anchor file read"})
    chain = fields.String(required=True)
    checkpoints = fields.Integer(required=True)
    seq = fields.Integer(required=True, allow_none=True,
                         metadata={"description": "The latest checkpoint's head"})
    hash = fields.String(required=True, allow_none=True)
    at = fields.String(required=True, allow_none=True)
    key_id = fields.String(required=True, allow_none=True)


class AuditVerifySchema(Schema):
    ok = fields.Boolean(required=True)
    events = fields.Integer(required=True)
    head_seq = fields.Integer(required=True)
    first_broken = fields.Nested(BrokenEventSchema, allow_none=True, required=True)
    findings = fields.List(fields.Nested(VerifyFindingSchema), required=True)
    anchor = fields.Nested(VerifyAnchorSchema, required=True, metadata={
        "description": "The anchor checkpoint verified against (kept outside the database)"})
    compared = fields.Dict(keys=fields.String(), values=fields.Integer(), required=True,
                           metadata={"description": "Stored objects compared with their "
                                                    "events: cases, runs, records, "
                                                    "records_without_hash, signoffs"})


def flatten_errors(messages: Any) -> list[dict[str, str]]:
    """Turn marshmallow's nested messages into ``[{path, message}]`` (the case schema's paths)."""
    found = []
    for path, message in flatten_messages(messages):
        if message == "Unknown field.":
            message = "unknown field: not part of this request body"
        found.append({"path": path, "message": message})
    return found


def load_or_422(schema: Schema, data: Any, what: str) -> dict[str, Any]:
    """Validate ``data`` with ``schema``; 422 naming every field at fault."""
    try:
        return schema.load(data)
    except ValidationError as exc:
        raise ValidationFailed(f"The {what} is not valid.",
                               errors=flatten_errors(exc.messages)) from exc
