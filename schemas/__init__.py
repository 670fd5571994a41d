"""Schemas of the case and result documents, their validation and their JSON Schema export.

Public API: :class:`CaseError`, :func:`validate_case` (→ :class:`ValidatedCase`),
:func:`canonical_json`, :func:`case_sha256`; the JSON Schema documents come from
:func:`schemas.export.case_json_schema` and :func:`schemas.export.result_json_schema`.
Checking a case document end to end (validate, run the engine, assemble the record) is
:func:`schemas.checking.check_case`, with the record assembled by :mod:`schemas.record`; they are
not imported here, so that validating a case does not load the solvers.
"""

from schemas.build import ValidatedCase, validate_case
from schemas.canonical import canonical_json, case_sha256
from schemas.errors import CaseError

__all__ = ["CaseError", "ValidatedCase", "canonical_json", "case_sha256", "validate_case"]
