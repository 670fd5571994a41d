"""Benchmark: the Galerkin three-mesh study against the method of lines' three meshes.

Target (issue "checks that catch bugs"): the second discretisation (``transient.galerkin``:
P1 elements, Radau IIA) must not be much slower than the method of lines
(``method_of_lines.solve_transient_fv_meshes`` on ``solve.mesh_sequence``) on the same case.
Cases (invented): a zero-order slab that runs out of solute while it releases into a sink (the
slowest transient kind today), a Michaelis-Menten sphere taking up solute, a two-layer
Michaelis-Menten cylinder with a film; 20 requested times each. Printed per case: the median
time of each side, the ratio Galerkin / method of lines, the integrator steps and the largest
difference of the released amount between the two extrapolated answers relative to the two
GCI bands (and to the bands plus the integrators' time floor, rtol times the load). Figures
printed, nothing asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import statistics
import time

import numpy as np

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient import solve
from worker.engine.transient.galerkin import RTOL, galerkin_study
from worker.engine.transient.refinement import amount_study

REPEATS = 3
COUNT = 20


def _times(end: float) -> tuple[float, ...]:
    return tuple(end * k / COUNT for k in range(1, COUNT + 1))


CASES = {
    "zero-order slab running out": Problem(
        "slab", 0.0,
        (Layer("matrix", 1e-3, 1e-10, 1.0, Reaction("zero_order", rate=1e-3), initial=1.0),),
        Boundary("symmetry"), Boundary("concentration", 0.0),
        Regime("transient", 2000.0, _times(2000.0))),
    "Michaelis-Menten sphere": Problem(
        "sphere", 0.0,
        (Layer("tissue", 1e-3, 1e-9, 1.0, Reaction("michaelis_menten", vmax=5e-3, km=0.05)),),
        Boundary("symmetry"), Boundary("concentration", 0.2),
        Regime("transient", 2000.0, _times(2000.0))),
    "two-layer Michaelis-Menten cylinder": Problem(
        "cylinder", 1e-3,
        (Layer("core", 1e-3, 1e-9, 1.0, Reaction("michaelis_menten", vmax=2e-3, km=0.05),
               initial=0.5),
         Layer("sleeve", 0.5e-3, 2e-10, 0.4)),
        Boundary("flux", 0.0), Boundary("mass_transfer", coefficient=1e-6, bulk=0.1),
        Regime("transient", 5000.0, _times(5000.0))),
}


def _median_time(fn):
    seconds = []
    value = None
    for _ in range(REPEATS):
        start = time.perf_counter()
        value = fn()
        seconds.append(time.perf_counter() - start)
    return value, statistics.median(seconds)


def test_bench_galerkin_against_method_of_lines():
    print()
    for name, problem in CASES.items():
        times, duration = solve.requested_times(problem)
        study, ours = _median_time(lambda p=problem, t=times: galerkin_study(p, t))
        fvs, theirs = _median_time(
            lambda p=problem, t=times, d=duration: solve.fv_on_meshes(p, t, d))
        fv_study = amount_study(fvs, [sum(f.diagnostics["cells_per_layer"]) for f in fvs])
        gap = np.abs(study.amounts.extrapolated["released_outer"]
                     - fv_study.extrapolated["released_outer"])
        bands = study.amounts.band["released_outer"] + fv_study.band["released_outer"]
        # what no space study sees: the integrators' time error, rtol (1e-6) times the load or
        # throughput
        floor = RTOL * max(study.fine.initial_load,
                           float(np.max(np.abs(study.fine.released_outer))))
        print(f"{name}: Galerkin three meshes {ours:.3f} s "
              f"({study.fine.diagnostics['elements_per_layer']} elements fine, "
              f"{study.fine.diagnostics['steps']} Radau steps); method of lines {theirs:.3f} s "
              f"({fvs[2].diagnostics['cells_per_layer']} cells fine, "
              f"{fvs[2].diagnostics['steps']} BDF steps); ratio {ours / theirs:.2f}; "
              f"released: largest gap / (sum of bands) "
              f"{float(np.max(gap / np.maximum(bands, 1e-300))):.2f}, "
              f"/ (sum of bands + time floor) {float(np.max(gap / (bands + floor))):.2f}")
        assert study.success and all(f.success for f in fvs)
