"""Benchmark: the full transient check against FiPy's transient solve at the same accuracy.

Case (invented): a 30-day release from a two-layer drug-eluting coating (reservoir under a
rate-limiting topcoat with a partition jump), sealed substrate, perfect sink outside, 20 output
times. Our side: all of ``run_transient`` (three meshes, tightened-tolerance run, long-time
continuation, steady reference, every check). FiPy's side: one transient solve (backward Euler,
``TransientTerm(coeff=K) == DiffusionTerm(coeff=D K)`` in u = C/K) on the coarsest mesh and the
largest time step whose 30-day release fraction is within the check tolerance of the release
fraction (``cross_check.release_fraction``, 1e-4) of the converged value (the grid-extrapolated
release of ``run_transient``, confirmed by a Richardson-extrapolated FiPy pair); the cheapest
FiPy configuration within the looser pointwise tolerance (1e-3) is printed too. Measured side
by side in one run; figures printed, nothing asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import statistics
import time

import numpy as np

from worker.engine.limits import TRANSIENT_LIMITS as DEFAULT_LIMITS
from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.transient import run_transient

DAY = 86400.0
DURATION = 30 * DAY
TIMES = tuple(DURATION * k / 20 for k in range(1, 21))
RESERVOIR = {"thickness": 8e-6, "diffusivity": 1e-15, "partition": 1.0, "initial": 50.0}
TOPCOAT = {"thickness": 2e-6, "diffusivity": 5e-17, "partition": 0.5, "initial": 0.0}
#: the check tolerance of the release fraction (cross_check.release_fraction)
TOLERANCE = DEFAULT_LIMITS["cross_check.release_fraction"]
#: the looser pointwise tolerance (fluxes, probes), reported for comparison
LOOSE_TOLERANCE = DEFAULT_LIMITS["cross_check"]
REPEATS = 3
MESHES = [(4 * 2**k, 2 * 2**k) for k in range(3)]  # (reservoir, topcoat) cells
STEPS_PER_OUTPUT = [4, 8, 16, 32, 64, 128]
#: meshes and step counts of FiPy's own Richardson-extrapolated reference
REFERENCE_MESHES = ((32, 16), (64, 32))
REFERENCE_STEPS = (64, 128)


def _problem() -> Problem:
    layers = tuple(
        Layer(name, spec["thickness"], spec["diffusivity"], spec["partition"],
              initial=spec["initial"])
        for name, spec in (("reservoir", RESERVOIR), ("topcoat", TOPCOAT))
    )
    return Problem("slab", 0.0, layers, Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", DURATION, TIMES))


def _fipy_release(cells: tuple[int, int], steps_per_output: int) -> np.ndarray:
    """FiPy release fraction at TIMES, built from scratch as a user would."""
    from fipy import CellVariable, DiffusionTerm, FaceVariable, Grid1D, TransientTerm

    n1, n2 = cells
    l1, l2 = RESERVOIR["thickness"], TOPCOAT["thickness"]
    dx = np.concatenate((np.full(n1, l1 / n1), np.full(n2, l2 / n2)))
    mesh = Grid1D(dx=dx)
    x = mesh.cellCenters[0].value
    first = x < l1
    k1, k2 = RESERVOIR["partition"], TOPCOAT["partition"]
    dk1, dk2 = RESERVOIR["diffusivity"] * k1, TOPCOAT["diffusivity"] * k2
    capacity = CellVariable(mesh=mesh, value=np.where(first, k1, k2))
    u = CellVariable(mesh=mesh, value=np.where(first, RESERVOIR["initial"] / k1, 0.0))
    xf = mesh.faceCenters[0].value
    coefficient = np.where(xf < l1, dk1, dk2)
    interface = int(np.argmin(np.abs(xf - l1)))
    h1, h2 = 0.5 * l1 / n1, 0.5 * l2 / n2
    coefficient[interface] = (h1 + h2) / (h1 / dk1 + h2 / dk2)
    u.constrain(0.0, mesh.facesRight)
    equation = TransientTerm(coeff=capacity) == DiffusionTerm(
        coeff=FaceVariable(mesh=mesh, value=coefficient))
    volumes = np.asarray(mesh.cellVolumes)
    load = float(np.sum(capacity.value * u.value * volumes))
    dt = (TIMES[1] - TIMES[0]) / steps_per_output
    fractions = []
    for _ in TIMES:
        for _ in range(steps_per_output):
            equation.solve(var=u, dt=dt)
        fractions.append(1.0 - float(np.sum(capacity.value * u.value * volumes)) / load)
    return np.array(fractions)


def _timed(fn):
    start = time.perf_counter()
    value = fn()
    return value, time.perf_counter() - start


def test_bench_transient_release_against_fipy():
    problem = _problem()
    outcome, _ = _timed(lambda: run_transient(problem))
    ours = []
    for _ in range(REPEATS):
        _, seconds = _timed(lambda: run_transient(problem))
        ours.append(seconds)
    our_seconds = statistics.median(ours)
    converged = outcome.series["release_fraction"]["values"][-1]
    failed = [c.name for c in outcome.checks if not c.passed]

    # FiPy's own converged value: time (order 1) then space (order 2) Richardson extrapolation
    (m1, m2), (s1, s2) = REFERENCE_MESHES, REFERENCE_STEPS
    a, b = _fipy_release(m1, s1)[-1], _fipy_release(m1, s2)[-1]
    c, d = _fipy_release(m2, s1)[-1], _fipy_release(m2, s2)[-1]
    fipy_converged = (4 * (2 * d - c) - (2 * b - a)) / 3

    print()
    print(f"case: two-layer coating, 30 days, {len(TIMES)} output times")
    print(f"run_transient (all checks): {our_seconds:.3f} s median of {REPEATS}; "
          f"30-day release fraction {converged:.8f}; failed checks: {failed or 'none'}")
    print(f"FiPy Richardson-extrapolated 30-day release fraction {fipy_converged:.8f} "
          f"(difference {abs(fipy_converged - converged):.2e})")
    cheapest = {TOLERANCE: None, LOOSE_TOLERANCE: None}
    for cells in MESHES:
        for steps in STEPS_PER_OUTPUT:
            release, seconds = _timed(lambda c=cells, s=steps: _fipy_release(c, s))
            error = abs(release[-1] - converged)
            print(f"  FiPy mesh {cells}, {steps * len(TIMES)} steps: error {error:.2e}, "
                  f"{seconds:.3f} s")
            for tolerance, best in cheapest.items():
                if error <= tolerance and (best is None or seconds < best[2]):
                    cheapest[tolerance] = (cells, steps, seconds, error)
            if error <= TOLERANCE:
                break
    for tolerance, best in cheapest.items():
        if best is None:
            print(f"tolerance {tolerance:g}: no FiPy configuration tried reached it")
            continue
        cells, steps, _, error = best
        _, fipy_seconds = _timed(lambda c=cells, s=steps: _fipy_release(c, s))
        print(f"tolerance {tolerance:g}: FiPy cheapest within it: mesh {cells}, "
              f"{steps * len(TIMES)} steps, error {error:.2e}, {fipy_seconds:.3f} s; "
              f"ratio FiPy / run_transient {fipy_seconds / our_seconds:.2f}")
    print(f"target: ratio >= 10 at the release-fraction check tolerance {TOLERANCE:g}")
    assert cheapest[TOLERANCE] is not None, "no FiPy configuration reached the tolerance"
