"""Benchmark: the Galerkin three-mesh study against the method of lines' three meshes.

Target (issue "checks that catch bugs"): the second discretisation (``transient.galerkin``:
P1 elements, extrapolated implicit Euler) must not be much slower than the method of lines
(``method_of_lines.solve_transient_fv_meshes`` on ``solve.mesh_sequence``) on the same case.
Cases (invented): a zero-order slab that runs out of solute while it releases into a sink (the
slowest transient kind today), a Michaelis-Menten sphere taking up solute, a two-layer
Michaelis-Menten cylinder with a film; 20 requested times each. Printed per case: the median
time of each side, the ratio Galerkin / method of lines, the integrator steps and the largest
difference of the released amount between the two extrapolated answers relative to the two
GCI bands (and to the bands plus the integrators' time floor, rtol times the load). Figures
printed, nothing asserted about time (shared, noisy machines).

A second figure (issue 14, speed): the Galerkin three-mesh study of an invented zero-order gel
that runs out of solute (1 mm slab, 30 days, 20 times) before and after the Galerkin solver
took its own time stepping: "before" is the Radau IIA version of ``transient/galerkin.py`` read
from git history (``BEFORE_COMMIT``) into a scratch module, run in the same process on the same
case; skipped with a note where git or that commit is not available.

Run with ``make bench``.
"""

from __future__ import annotations

import importlib.util
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient import solve
from worker.engine.transient.galerkin import RTOL, galerkin_study
from worker.engine.transient.refinement import amount_study

REPEATS = 3
COUNT = 20
#: The last commit whose Galerkin solver stepped with scipy's Radau IIA.
BEFORE_COMMIT = "76d8158"


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
              f"{study.fine.diagnostics['steps']} steps); method of lines {theirs:.3f} s "
              f"({fvs[2].diagnostics['cells_per_layer']} cells fine, "
              f"{fvs[2].diagnostics['steps']} BDF steps); ratio {ours / theirs:.2f}; "
              f"released: largest gap / (sum of bands) "
              f"{float(np.max(gap / np.maximum(bands, 1e-300))):.2f}, "
              f"/ (sum of bands + time floor) {float(np.max(gap / (bands + floor))):.2f}")
        assert study.success and all(f.success for f in fvs)


DAY = 86400.0
GEL = Problem(
    "slab", 0.0,
    (Layer("gel", 1e-3, 1e-10, 1.0, Reaction("zero_order", rate=2e-4), initial=1.0),),
    Boundary("symmetry"), Boundary("concentration", 0.0),
    Regime("transient", 30 * DAY, _times(30 * DAY)))


def _before_module():
    """The Radau version of the Galerkin solver, from git history, as a scratch module."""
    root = Path(__file__).resolve().parents[2]
    try:
        text = subprocess.run(
            ["git", "show", f"{BEFORE_COMMIT}:worker/engine/transient/galerkin.py"], cwd=root,
            capture_output=True, text=True, check=True, timeout=30).stdout
    except (OSError, subprocess.SubprocessError):
        return None
    folder = Path(tempfile.mkdtemp())
    path = folder / "galerkin_before.py"
    path.write_text(text)
    spec = importlib.util.spec_from_file_location("galerkin_before", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules["galerkin_before"] = module
    spec.loader.exec_module(module)
    return module


def test_bench_galerkin_before_and_after_on_the_running_out_gel():
    print()
    times, _ = solve.requested_times(GEL)
    after, t_after = _median_time(lambda: galerkin_study(GEL, times))
    assert after.success
    released = after.amounts.extrapolated["released_outer"][-1]
    before_module = _before_module()
    if before_module is None:
        print(f"zero-order gel, 30 days, 20 times: Galerkin study {t_after:.3f} s "
              f"({after.fine.diagnostics['steps']} steps); before: not available (no git "
              f"history at {BEFORE_COMMIT})")
        return
    start = time.perf_counter()
    before = before_module.galerkin_study(GEL, times)
    t_before = time.perf_counter() - start  # once: it takes tens of seconds
    assert before.success
    old = before.amounts.extrapolated["released_outer"][-1]
    print(f"zero-order gel, 30 days, 20 times: Galerkin study before (Radau IIA, "
          f"{before.fine.diagnostics['steps']} steps) {t_before:.3f} s, after (extrapolated "
          f"implicit Euler, {after.fine.diagnostics['steps']} steps) {t_after:.3f} s; "
          f"ratio before / after {t_before / t_after:.1f}; released at 30 days "
          f"{old:.9g} vs {released:.9g} mol/m^2 (relative difference "
          f"{abs(old - released) / abs(old):.1e})")
