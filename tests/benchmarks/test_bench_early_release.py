"""Benchmark: a very early first requested time on the graded meshes against the capped uniform
ones they replace (issue 14).

Cases (invented): a 0.1 mm sphere, cylinder and sealed slab (D = 1e-10 m^2/s) releasing into a
sink, first time at D t1 / a^2 = 1e-6; and a zero-order slab (its second route the Galerkin
elements, graded by their own rule). Printed per case: the check values that failed on the
uniform meshes (``convergence.space``, ``cross_check.release_fraction``,
``cross_check.flux_outer``), the failing checks, and the median wall time of ``run_transient``
with the grading and with it switched off (``GRADING_TRIGGER`` infinite). Asserted: every check
of the graded run passes (the engine's own checks; on 2026-12-05 the uniform meshes failed the
release and face-flux cross-checks of all four cases). Nothing asserted about time (shared,
noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import math

import pytest

from tests.benchmarks.timing import median_seconds
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient import early_mesh, galerkin_grading, run_transient

D = 1.0e-10
A = 1.0e-4
SCALE = A * A / D
TIMES = (0.0, 1e-6 * SCALE, 1e-4 * SCALE, 1e-2 * SCALE, 0.3 * SCALE)
NAMES = ("convergence.space", "cross_check.release_fraction", "cross_check.flux_outer")


def _case(geometry: str, reaction: Reaction | None = None) -> Problem:
    layer = Layer("matrix", A, D, 1.0, initial=1.0, reaction=reaction or Reaction())
    return Problem(geometry, 0.0, (layer,), Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", TIMES[-1], TIMES),
                   area=1e-4 if geometry == "slab" else None)


CASES = {
    "sphere": _case("sphere"),
    "cylinder": _case("cylinder"),
    "slab": _case("slab"),
    "zero-order slab": _case("slab", Reaction("zero_order", rate=1e-3)),
}


def _figures(problem: Problem) -> tuple[dict, list[str]]:
    outcome = run_transient(problem)
    values = {c.name: c.value for c in outcome.checks if c.name in NAMES}
    return values, [c.name for c in outcome.checks if not c.passed]


@pytest.mark.parametrize("name", list(CASES))
def test_bench_early_first_time_graded_against_uniform(name, monkeypatch):
    problem = CASES[name]
    graded, graded_failed = _figures(problem)
    graded_seconds = median_seconds(lambda: run_transient(problem), repeats=3)
    monkeypatch.setattr(early_mesh, "GRADING_TRIGGER", math.inf)
    monkeypatch.setattr(galerkin_grading, "GRADING_TRIGGER", math.inf)
    uniform, uniform_failed = _figures(problem)
    uniform_seconds = median_seconds(lambda: run_transient(problem), repeats=3)
    print(f"\n{name}, D t1 / a^2 = 1e-6")
    for check in NAMES:
        print(f"  {check:32s} uniform {uniform.get(check)!s:24} graded {graded.get(check)!s}")
    print(f"  failed: uniform {uniform_failed}, graded {graded_failed}")
    print(f"  run_transient: uniform {uniform_seconds:.2f} s, graded {graded_seconds:.2f} s "
          f"(ratio {graded_seconds / uniform_seconds:.2f})")
    assert not graded_failed, graded_failed
