"""The one rule for tests that need real services: fail under CI, skip (saying why) elsewhere.

Used by the fixtures of ``tests/integration`` and ``tests/faults``.
"""

from __future__ import annotations

import os

import pytest

from tests.integration.real_services import ServiceMissing, postgres_user, require_redis


def unavailable(reason: str, suite: str) -> None:
    """Fail the test when ``CI`` is set (the CI machine must have the service), else skip."""
    if os.environ.get("CI"):
        pytest.fail(f"CI is set and a required service is missing: {reason}", pytrace=False)
    pytest.skip(f"{suite} test needs real services: {reason} (set CI=1 to make this a failure)")


def require_real_services(suite: str) -> str:
    """Check Redis and PostgreSQL; return the PostgreSQL user that works."""
    try:
        require_redis()
        return postgres_user()
    except ServiceMissing as exc:
        unavailable(str(exc), suite)
    except ImportError as exc:
        unavailable(f"a client library is missing: {exc}", suite)
    raise AssertionError("unreachable: unavailable() always fails or skips")
