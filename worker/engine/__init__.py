"""The fluxproof engine: units-checked diffusion-reaction solvers and their cross-checks.

Pure Python, numpy, scipy and pint; it imports nothing from Flask, Celery, SQLAlchemy or
``service``. The public entry point is :func:`check_case`.
"""

from __future__ import annotations


def check_case(case: dict) -> dict:
    """Return the check record (result document) for one case document.

    Raises ``schemas.CaseError`` (with ``.errors``) when the case is invalid. Imported lazily so
    that ``schemas`` can import the engine's model without a cycle.
    """
    from worker.engine.check import check_case as _check_case

    return _check_case(case)


__all__ = ["check_case"]
