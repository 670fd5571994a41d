"""The one sign-off rule (service.signoffs): who may sign a run off, and why not.

Four-eyes (the submitter never signs off their own record) and a record sealed once signed are
common practice for review of engineering calculations. The API's ``sign_off`` raises the first
refusal; the run page lists them all, in the same words.
"""

from __future__ import annotations

import pytest

from service.errors import Conflict, Forbidden, FourEyesViolation
from service.signoffs import signoff_permission, signoff_refusals
from service.tokens import Identity

REVIEWER = Identity(name="rafael.reviewer", role="reviewer", token_id="t1")
SIGNED = {"decision": "approved", "reviewer": "rita.reviewer", "comment": "ok", "at": "t"}


def _errors(identity, submitted_by="erin.engineer", status="succeeded", existing=None):
    return [r.error for r in signoff_refusals(identity, submitted_by=submitted_by,
                                              status=status, existing=existing)]


def test_a_second_reviewer_may_sign_a_succeeded_unsigned_run():
    assert _errors(REVIEWER) == []
    allowed = signoff_permission({"submitted_by": "erin.engineer", "status": "succeeded",
                                  "signoffs": []}, REVIEWER)
    assert allowed.allowed and allowed.reasons == () and allowed.submitter == "erin.engineer"


@pytest.mark.parametrize("role", ["engineer", "auditor", "admin"])
def test_only_reviewers_may_sign(role):
    assert _errors(Identity(name="x", role=role, token_id="t")) == [Forbidden]


def test_the_submitter_may_not_sign_even_as_a_reviewer():
    assert _errors(REVIEWER, submitted_by="rafael.reviewer") == [FourEyesViolation]


@pytest.mark.parametrize("status", ["queued", "running", "failed"])
def test_only_a_succeeded_run_may_be_signed(status):
    assert _errors(REVIEWER, status=status) == [Conflict]


def test_a_signed_run_is_never_signed_again():
    assert _errors(REVIEWER, existing=SIGNED) == [Conflict]


def test_every_reason_is_given_and_the_page_shows_the_words_sign_off_raises():
    engineer = Identity(name="erin.engineer", role="engineer", token_id="t2")
    refusals = signoff_refusals(engineer, submitted_by="erin.engineer", status="failed",
                                existing=None)
    assert [r.error for r in refusals] == [Forbidden, FourEyesViolation, Conflict]
    page = signoff_permission({"submitted_by": "erin.engineer", "status": "failed",
                               "signoffs": []}, engineer)
    assert not page.allowed and page.reasons == tuple(r.reason for r in refusals)
    problem = refusals[1].problem()
    assert isinstance(problem, FourEyesViolation) and problem.detail == page.reasons[1]
    assert "four-eyes" in problem.detail
