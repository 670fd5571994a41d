"""The engine imports nothing of the project above it; ``worker.engine.check_case`` is the one
plugin boundary, resolved only when used."""

from __future__ import annotations

import subprocess
import sys

#: Imports every module of the engine, then fails if anything above it was loaded.
ENGINE_ONLY = """
import importlib, pkgutil, sys
{before}
import worker.engine
for info in pkgutil.walk_packages(worker.engine.__path__, "worker.engine."):
    importlib.import_module(info.name)
above = sorted(m for m in sys.modules if m.split('.')[0] in ('schemas', 'service', 'flask',
                                                             'celery', 'sqlalchemy'))
assert not above, above
check_case = worker.engine.check_case
import schemas.checking
assert check_case is schemas.checking.check_case
"""


def _run(before: str = "") -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", ENGINE_ONLY.format(before=before)],
                          capture_output=True, text=True, check=False)


def test_the_engine_loads_without_schemas_and_check_case_is_the_facade():
    result = _run()
    assert result.returncode == 0, result.stderr


def test_the_probe_fails_when_something_above_the_engine_is_loaded():
    result = _run(before="import schemas.errors")
    assert result.returncode != 0
    assert "schemas.errors" in result.stderr


def test_an_unknown_name_of_the_engine_package_is_an_attribute_error():
    import worker.engine

    try:
        worker.engine.not_a_name  # noqa: B018
    except AttributeError as exc:
        assert "not_a_name" in str(exc)
    else:
        raise AssertionError("expected AttributeError")
