"""Benchmark: the method of lines on kinked cases (zero-order depletion, drug dispersed above its
solubility) against FiPy at the same accuracy.

Cases (invented): (1) a 1 mm gel slab, D = 1e-10 m^2/s, zero-order uptake 2e-4 mol/m^3/s,
initial 1 mol/m^3, sealed base, perfect sink, 30 days, 20 output times; (2) a 1 mm matrix
loaded at 10 mol/m^3 above its solubility 1 mol/m^3, D = 1e-12 m^2/s, sealed base, sink, the
same times. Our side: the method of lines on three meshes sharing implicit steps
(``solve.fv_on_meshes``: what ``run_transient`` integrates for its primary route), and
``run_transient`` whole for reference (the best of ``WHOLE_RUNS``, printed with the load
average). FiPy's side, built as a user would: backward Euler on one mesh, the kink handled
by Picard sweeps (zero order: the source -Q [C > 0] from the last sweep; dispersed: the content
u with the diffusion of the undissolved excess max(u - Cs, 0) taken from the last sweep), its
early geometric steps and its uniform steps refined together until its
30-day released fraction is within the release-fraction check tolerance (1e-4) of ours, or
until one FiPy run takes ``STOP_RATIO`` times our whole check while still outside it (each
further run refines both cells and steps, so it would only take longer: the ratio at equal
accuracy is then above that figure). Figures and ratios printed side by side; nothing asserted
about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import math
import os
import time

import numpy as np

from worker.engine.limits import TRANSIENT_LIMITS
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient import run_transient
from worker.engine.transient.solve import extrapolated, fv_on_meshes, requested_times

DAY = 86400.0
DURATION = 30 * DAY
TIMES = tuple(DURATION * k / 20 for k in range(1, 21))
TOLERANCE = TRANSIENT_LIMITS["cross_check.release_fraction"]
CONFIGS = [(25, 4), (50, 8), (100, 16), (200, 32), (400, 64)]  # cells, steps per output
#: FiPy's refinement stops, short of the tolerance, once one run takes this many times our whole
#: check: the ratio at equal accuracy is then above it (the issue's target is 10)
STOP_RATIO = 10.0
SWEEPS = 3
#: Runs of the whole check (the best is reported: the machines are shared)
WHOLE_RUNS = 3
#: FiPy's early steps (geometric, from 1e-6 of the first interval up to it) per uniform step of
#: an output interval: refined together with the uniform steps, so that the early release is
#: not a fixed error floor of every configuration
EARLY_STEPS_PER_STEP = 25


def _zero_order() -> Problem:
    return Problem("slab", 0.0, (Layer("gel", 1e-3, 1e-10, reaction=Reaction(
        "zero_order", rate=2e-4), initial=1.0),), Boundary("symmetry"),
        Boundary("concentration", 0.0), Regime("transient", DURATION, TIMES))


def _dispersed() -> Problem:
    return Problem("slab", 0.0, (Layer("matrix", 1e-3, 1e-12, initial=10.0, solubility=1.0),),
                   Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", DURATION, TIMES))


def _fipy_released(problem: Problem, cells: int, steps_per_output: int) -> float:
    """FiPy's 30-day released fraction (backward Euler, Picard sweeps on the kink; the
    release summed from the sink face's flux at each step)."""
    from fipy import CellVariable, DiffusionTerm, Grid1D, TransientTerm

    layer = problem.layers[0]
    mesh = Grid1D(nx=cells, dx=layer.thickness / cells)
    u = CellVariable(mesh=mesh, value=layer.initial, hasOld=True)
    u.constrain(0.0, mesh.facesRight)
    d = layer.diffusivity
    if layer.solubility is not None:
        excess = CellVariable(mesh=mesh, value=max(layer.initial - layer.solubility, 0.0))
        # the boundary value of the excess is 0 (the face holds dissolved solute only)
        excess.constrain(0.0, mesh.facesRight)
        equation = TransientTerm(var=u) == DiffusionTerm(coeff=d, var=u) - \
            DiffusionTerm(coeff=d, var=excess)

        def update() -> None:
            excess.setValue(np.maximum(u.value - layer.solubility, 0.0))
    else:
        rate = layer.reaction.rate
        source = CellVariable(mesh=mesh, value=rate)
        equation = TransientTerm(var=u) == DiffusionTerm(coeff=d, var=u) - source

        def update() -> None:
            source.setValue(np.where(u.value > 0.0, rate, 0.0))
    load = layer.initial * layer.thickness
    interval = TIMES[0]
    early = np.geomspace(interval * 1e-6, interval, EARLY_STEPS_PER_STEP * steps_per_output + 1)
    steps = list(np.diff(np.concatenate(([0.0], early)))) + \
        [interval / steps_per_output] * ((len(TIMES) - 1) * steps_per_output)
    half_cell = 0.5 * layer.thickness / cells
    cap = layer.solubility if layer.solubility is not None else np.inf
    released = 0.0
    for dt in steps:
        u.updateOld()
        for _ in range(SWEEPS):
            update()
            equation.sweep(var=u, dt=dt)
        if layer.reaction.kind == "zero_order":
            u.setValue(np.maximum(u.value, 0.0))  # nothing consumed below zero
        # backward Euler: the sink face passes D c_last / (dx/2) over the step
        released += dt * d * min(float(u.value[-1]), cap) / half_cell
    return released / load


def _ours(problem: Problem) -> tuple[float, float]:
    requested, duration = requested_times(problem)
    internal = np.union1d(requested, [duration])
    start = time.perf_counter()
    fvs = fv_on_meshes(problem, internal, duration)
    seconds = time.perf_counter() - start
    amounts = extrapolated(fvs, internal)
    return float(amounts["released_outer"][-1] / fvs[-1].initial_load), seconds


def _compare(name: str, problem: Problem) -> None:
    value, seconds = _ours(problem)
    whole = math.inf
    for _ in range(WHOLE_RUNS):
        start = time.perf_counter()
        outcome = run_transient(problem)
        whole = min(whole, time.perf_counter() - start)
    load = os.getloadavg()[0]
    failed = [c.name for c in outcome.checks if not c.passed]
    quantity = "released fraction"
    print(f"\ncase: {name}; ours: method of lines, three meshes {seconds:.3f} s, 30-day "
          f"{quantity} {value:.8f}; run_transient whole {whole:.3f} s (best of {WHOLE_RUNS}, "
          f"load average {load:.2f} on {os.cpu_count()} cores; failed checks: "
          f"{failed or 'none'})")
    last_error = None
    for cells, steps in CONFIGS:
        start = time.perf_counter()
        fipy = _fipy_released(problem, cells, steps)
        fipy_seconds = time.perf_counter() - start
        error = abs(fipy - value)
        order = "" if last_error is None or error <= 0.0 else \
            f", observed order {math.log2(last_error / error):.2f} per refinement"
        last_error = error
        print(f"  FiPy {cells} cells, {steps} steps per output: {quantity} {fipy:.8f}, "
              f"difference {error:.2e}{order}, {fipy_seconds:.3f} s; ratio FiPy / ours "
              f"{fipy_seconds / seconds:.2f} (three meshes), {fipy_seconds / whole:.2f} "
              "(whole check)")
        if error <= TOLERANCE:
            print(f"  within {TOLERANCE:g}: ratio FiPy / ours {fipy_seconds / seconds:.2f} "
                  f"(three meshes), {fipy_seconds / whole:.2f} (whole check)")
            return
        if fipy_seconds >= STOP_RATIO * whole:
            # every further configuration refines both, so FiPy only takes longer to get there
            print(f"  FiPy still {error:.2e} off (tolerance {TOLERANCE:g}) after "
                  f"{fipy_seconds / whole:.1f} times the whole check's time: at equal accuracy "
                  f"the ratio FiPy / ours is above {fipy_seconds / whole:.1f} (whole check) and "
                  f"{fipy_seconds / seconds:.1f} (three meshes); finer FiPy runs not tried")
            return
    print(f"  no FiPy configuration tried came within {TOLERANCE:g}")


def test_bench_zero_order_depletion_against_fipy():
    _compare("zero-order depletion of a gel slab", _zero_order())


def test_bench_dispersed_slab_against_fipy():
    _compare("dispersed drug slab (loading 10 x solubility)", _dispersed())
