"""The one sign-off rule (service.signoffs): who may sign a run off, and why not.

Four-eyes (neither the submitter nor the case's author signs off the record; persons compared
by login, normalised) and a record sealed once signed are common practice for review of
engineering calculations; no approval of a failed verification, and a justification for
loosened limits (deviations), are the issue's rules for signed records. The API's
``sign_off`` raises the first refusal; the run page lists them all, in the same words.
"""

from __future__ import annotations

import pytest

from service.errors import Conflict, Forbidden, FourEyesViolation, ValidationFailed
from service.signoffs import signoff_permission, signoff_refusals
from service.tokens import Identity

REVIEWER = Identity(login="rafael.reviewer", name="Rafael Reviewer", role="reviewer",
                    user_id="u1", token_id="t1")
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
    assert _errors(Identity(login="x", name="X", role=role, user_id="u", token_id="t")) == [
        Forbidden]


def test_the_submitter_may_not_sign_even_as_a_reviewer():
    assert _errors(REVIEWER, submitted_by="rafael.reviewer") == [FourEyesViolation]


@pytest.mark.parametrize("status", ["queued", "running", "failed"])
def test_only_a_succeeded_run_may_be_signed(status):
    assert _errors(REVIEWER, status=status) == [Conflict]


def test_a_signed_run_is_never_signed_again():
    assert _errors(REVIEWER, existing=SIGNED) == [Conflict]


def test_every_reason_is_given_and_the_page_shows_the_words_sign_off_raises():
    engineer = Identity(login="erin.engineer", name="Erin Engineer", role="engineer",
                        user_id="u2", token_id="t2")
    refusals = signoff_refusals(engineer, submitted_by="erin.engineer", status="failed",
                                existing=None)
    assert [r.error for r in refusals] == [Forbidden, FourEyesViolation, Conflict]
    page = signoff_permission({"submitted_by": "erin.engineer", "status": "failed",
                               "signoffs": []}, engineer)
    assert not page.allowed and page.reasons == tuple(r.reason for r in refusals)
    problem = refusals[1].problem()
    assert isinstance(problem, FourEyesViolation) and problem.detail == page.reasons[1]
    assert "four-eyes" in problem.detail


@pytest.mark.parametrize("login", ["Rafael.Reviewer", "RAFAEL.REVIEWER",
                                   "\uff52afael.reviewer"])  # fullwidth r: NFKC folds it
def test_the_submitter_is_found_whatever_the_case_or_unicode_form(login):
    assert _errors(REVIEWER, submitted_by=login) == [FourEyesViolation]


def test_the_cases_author_may_not_sign_a_check_of_it():
    refusals = signoff_refusals(REVIEWER, submitted_by="erin.engineer", status="succeeded",
                                existing=None, case_author="rafael.reviewer")
    assert [r.error for r in refusals] == [FourEyesViolation]
    assert "wrote this case" in refusals[0].reason
    page = signoff_permission({"submitted_by": "erin.engineer", "status": "succeeded",
                               "signoffs": [], "case_author": "rafael.reviewer"}, REVIEWER)
    assert not page.allowed and page.reasons == (refusals[0].reason,)


def _approval(verdict="pass", deviations=(), justification=None, decision="approved"):
    return [r.error for r in signoff_refusals(
        REVIEWER, submitted_by="erin.engineer", status="succeeded", existing=None,
        verdict=verdict, decision=decision, deviations=deviations,
        justification=justification)]


def test_a_failed_verification_cannot_be_approved_but_can_be_rejected():
    assert _approval(verdict="fail") == [Conflict]
    assert _approval(verdict="fail", decision="rejected") == []
    assert _approval(verdict="pass") == []


DEVIATION = {"check": "mass_balance", "default": 1e-6, "value": 1e6}


def test_approving_deviations_needs_a_justification():
    assert _approval(deviations=[DEVIATION]) == [ValidationFailed]
    assert _approval(deviations=[DEVIATION], justification="   ") == [ValidationFailed]
    assert _approval(deviations=[DEVIATION], justification="bench data cover it") == []
    assert _approval(deviations=[DEVIATION], decision="rejected") == []
    problem = signoff_refusals(REVIEWER, submitted_by="e", status="succeeded", existing=None,
                               verdict="pass", decision="approved",
                               deviations=[DEVIATION])[0].problem()
    assert problem.errors == [{"path": "justification",
                               "message": "required to approve a record with deviations"}]
