"""The engine imports nothing of the project above it; ``worker.engine.check_case`` is the one
plugin boundary, resolved only when used."""

from __future__ import annotations

import subprocess
import sys

ENGINE_ONLY = """
import sys
import worker.engine.run, worker.engine.transient, worker.engine.limits
above = sorted(m for m in sys.modules if m.split('.')[0] in ('schemas', 'service', 'flask',
                                                             'celery', 'sqlalchemy'))
assert not above, above
import worker.engine
check_case = worker.engine.check_case
import schemas.checking
assert check_case is schemas.checking.check_case
"""


def test_the_engine_loads_without_schemas_and_check_case_is_the_facade():
    result = subprocess.run([sys.executable, "-c", ENGINE_ONLY], capture_output=True, text=True,
                            check=False)
    assert result.returncode == 0, result.stderr


def test_an_unknown_name_of_the_engine_package_is_an_attribute_error():
    import worker.engine

    try:
        worker.engine.not_a_name  # noqa: B018
    except AttributeError as exc:
        assert "not_a_name" in str(exc)
    else:
        raise AssertionError("expected AttributeError")
