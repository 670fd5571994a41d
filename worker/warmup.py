"""Warming a worker up before it takes runs: the engine's modules and lazy state loaded once.

The first check in a fresh process costs about two seconds more than the next ones: scipy's
submodules, the unit registry and the schemas load on first use. A Celery worker calls
:func:`warm_up_engine` in its main process before it forks the pool, so every pool process
(including one started again after a hard time limit) begins warm, instead of the first runs of
each process paying that, in the middle of a batch.
"""

from __future__ import annotations

import importlib
import logging
import time

# The implementation's module, not the package-level entry point (which tests replace).
import schemas.checking as checking
from schemas.result import RunStatus

logger = logging.getLogger(__name__)

#: Engine modules a check may need (the transient and nonlinear paths included).
ENGINE_MODULES = (
    "schemas.checking",
    "worker.engine.steady_check",
    "worker.engine.transient",
    "worker.engine.bvp_steady",
    "worker.engine.depletion_exact",
    "worker.engine.mm_bracket",
)

#: A small invented case (not a check value: its record is thrown away) whose check touches the
#: unit parser, the schema, the closed forms with Bessel functions and the finite volumes.
WARM_UP_CASE = {
    "schema_version": 1,
    "title": "worker warm-up (invented; its record is discarded)",
    "geometry": "cylinder",
    "inner": "1 mm",
    "layers": [{"name": "wall", "thickness": "0.5 mm", "diffusivity": "1e-9 m^2/s",
                "reaction": {"kind": "first_order", "rate_constant": "1e-3 1/s"}}],
    "inner_boundary": {"kind": "concentration", "value": "1 mol/m^3"},
    "outer_boundary": {"kind": "mass_transfer", "coefficient": "1e-5 m/s",
                       "bulk": "0 mol/m^3"},
    "regime": {"kind": "steady"},
}


def warm_up_engine() -> float:
    """Import the engine's modules and check :data:`WARM_UP_CASE` once; return the seconds it
    took (:mod:`schemas.checking` itself is loaded with this module).

    A failure is logged, not raised: the runs themselves record any engine error.
    """
    started = time.perf_counter()
    try:
        for name in ENGINE_MODULES:
            importlib.import_module(name)
        record = checking.check_case(dict(WARM_UP_CASE))
        if record.get("status") != RunStatus.SUCCEEDED:
            logger.warning("engine warm-up: the warm-up case did not succeed: %s",
                           record.get("error"))
    except Exception:  # noqa: BLE001 - see the docstring
        logger.exception("engine warm-up failed; runs will load the engine themselves")
    return time.perf_counter() - started
