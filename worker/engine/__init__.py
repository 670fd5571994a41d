"""The fluxproof engine: units-checked diffusion-reaction solvers and their cross-checks.

Pure Python, numpy, scipy and pint; it imports nothing of the project above it (neither
``schemas`` nor ``service``) and nothing of Flask, Celery or SQLAlchemy. Its own entry point is
:func:`worker.engine.run.run_problem` (a normalised :class:`~worker.engine.model.Problem` in,
an :class:`~worker.engine.outcome.Outcome` out).

``worker.engine.check_case(case: dict) -> dict`` is the documented plugin boundary: a façade,
resolved lazily by the module ``__getattr__``, onto :func:`schemas.checking.check_case`
(validate the case document, run the engine, assemble the record; raises
``schemas.CaseError``). It is imported only when first used, so the engine itself never loads
``schemas``; the service and the worker call it, and tests replace it here.
"""

from __future__ import annotations

from typing import Any

__all__ = ["check_case"]


def __getattr__(name: str) -> Any:
    if name == "check_case":
        from schemas.checking import check_case  # the plugin boundary (module docstring)

        return check_case
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
