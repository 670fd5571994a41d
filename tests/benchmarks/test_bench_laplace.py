"""Benchmark: the Laplace-domain transient against the method of lines on the same cases.

Cases (invented): the two-layer drug-eluting coating of ``test_bench_transient`` (reservoir
under a rate-limiting topcoat with a partition jump, sealed substrate, sink outside, 30 days,
20 output times), and a three-layer body with first-order uptake in the middle layer and a film
outside, 20 output times, in each geometry. Our figures: ``solve_transient_laplace`` (all six
quantities at 20 times); the method of lines on the fine mesh ``run_transient`` uses, and its
three meshes together as ``run_transient`` integrates them. Medians of a few repeats, printed
with the ratios and the release difference; nothing asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import statistics
import time

import numpy as np

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient.laplace import solve_transient_laplace
from worker.engine.transient.method_of_lines import solve_transient_fv
from worker.engine.transient.solve import fv_on_meshes, mesh_sequence

DAY = 86400.0
DURATION = 30 * DAY
TIMES = tuple(DURATION * k / 20 for k in range(1, 21))
REPEATS = 5


def _median_seconds(fn, repeats=REPEATS):
    fn()  # warm-up (imports, caches)
    seconds = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        seconds.append(time.perf_counter() - start)
    return statistics.median(seconds)


def _two_layer() -> Problem:
    layers = (Layer("reservoir", 8e-6, 1e-15, 1.0, initial=50.0),
              Layer("topcoat", 2e-6, 5e-17, 0.5, initial=0.0))
    return Problem("slab", 0.0, layers, Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", DURATION, TIMES))


def _three_layer(geometry: str) -> Problem:
    layers = (Layer("core", 8e-6, 1e-15, 1.0, initial=50.0),
              Layer("barrier", 2e-6, 5e-17, 0.5, Reaction("first_order", rate_constant=1e-7)),
              Layer("skin", 5e-6, 2e-16, 2.0, initial=3.0))
    inner = 1e-4 if geometry == "cylinder" else 0.0
    return Problem(geometry, inner, layers, Boundary("symmetry"),
                   Boundary("mass_transfer", coefficient=1e-7, bulk=0.0),
                   Regime("transient", DURATION, TIMES))


def test_bench_laplace_against_the_method_of_lines():
    problem = _two_layer()
    times = np.array(TIMES)
    fine_cells = mesh_sequence(problem, times[0])[-1]
    laplace = solve_transient_laplace(problem)
    fine = solve_transient_fv(problem, times, fine_cells)
    laplace_seconds = _median_seconds(lambda: solve_transient_laplace(problem))
    fine_seconds = _median_seconds(lambda: solve_transient_fv(problem, times, fine_cells))
    meshes_seconds = _median_seconds(lambda: fv_on_meshes(problem, times, DURATION), 3)
    difference = np.max(np.abs(laplace.released_outer - fine.released_outer)) / laplace.initial_load
    print()
    print(f"two-layer coating, {len(TIMES)} times: Laplace {laplace_seconds * 1e3:.2f} ms; "
          f"method of lines, fine mesh {fine_cells} cells: {fine_seconds * 1e3:.1f} ms "
          f"(ratio {fine_seconds / laplace_seconds:.1f}); three meshes together "
          f"{meshes_seconds * 1e3:.1f} ms (ratio {meshes_seconds / laplace_seconds:.1f})")
    print(f"  largest release difference, fine mesh vs Laplace: {difference:.2e} of the load")
    for geometry in ("slab", "cylinder", "sphere"):
        three = _three_layer(geometry)
        seconds = _median_seconds(lambda p=three: solve_transient_laplace(p))
        print(f"three layers, {geometry}, {len(TIMES)} times: Laplace {seconds * 1e3:.2f} ms "
              f"(target: well under 100 ms)")
    assert np.isfinite(difference)
