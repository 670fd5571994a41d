"""Benchmark: the finite-volume steady solver against a bare banded solve of the same size.

Target (numerical steady solvers issue): ``solve_fv`` on a linear case (mesh, assembly, solve,
flux and surface reconstruction, profile callables) costs at most 3x a bare
``scipy.linalg.solve_banded`` of the same N on a prebuilt matrix. Also printed: the nonlinear
path (Michaelis-Menten Newton, zero-order active set), the three-grid study, the collocation
reference, and FiPy (Picard sweeps) on the same Michaelis-Menten case at the fine-mesh size.
Medians of repeated ``time.perf_counter`` timings, measured side by side in one run; figures
printed, nothing asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import statistics
import time

import fipy
import numpy as np
from scipy.linalg import solve_banded

from worker.engine.bvp_steady import solve_bvp_reference
from worker.engine.convergence import run_grid_study
from worker.engine.fv_mesh import assemble_diffusion, build_mesh
from worker.engine.fv_steady import solve_fv
from worker.engine.model import Boundary, Layer, Problem, Reaction

REPEATS = 41
TARGET_RATIO = 3.0

# invented scenarios (benchmark inputs, not check values)
SHELL = Problem("cylinder", 0.5e-3, (Layer("shell", 1.5e-3, 1e-9),),
                Boundary("concentration", 1.0), Boundary("concentration", 0.1))
WALL = Problem("slab", 0.0, (Layer("coat", 50e-6, 2e-11, partition=3.0),
                             Layer("matrix", 1e-3, 5e-10, partition=0.8)),
               Boundary("concentration", 1.0), Boundary("mass_transfer", coefficient=1e-6,
                                                        bulk=0.0))
MM_CYLINDER = Problem(
    "cylinder", 0.1e-3,
    (Layer("fibre wall", 40e-6, 1.5e-9, partition=0.8),
     Layer("cell layer", 150e-6, 2.0e-9, reaction=Reaction("michaelis_menten", vmax=4e-3,
                                                            km=5e-3))),
    Boundary("concentration", 0.2), Boundary("symmetry"))
ZERO_SPHERE = Problem("sphere", 0.0, (Layer("core", 0.5e-3, 1.2e-9,
                                            reaction=Reaction("zero_order", rate=2e-2)),),
                      Boundary("symmetry"), Boundary("concentration", 0.2))


def _median_time(function, repeats=REPEATS) -> float:
    function()  # warm caches and imports
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def _bare_solve_time(problem, cells) -> float:
    mesh = build_mesh(problem, cells)
    operator = assemble_diffusion(mesh, problem)
    ab, rhs = operator.ab.copy(), operator.rhs.copy()
    return _median_time(lambda: solve_banded((1, 1), ab, rhs))


def test_linear_solve_fv_versus_bare_banded_solve():
    print()
    print(f"{'case':<28}{'N':>7}{'solve_banded':>15}{'solve_fv':>12}{'ratio':>8}"
          f"  (target <= {TARGET_RATIO:g}x)")
    for label, problem in (("single-layer shell", SHELL), ("two-layer wall", WALL)):
        layers = len(problem.layers)
        for per_layer in (100, 500, 2000):
            cells = [per_layer] * layers
            bare = _bare_solve_time(problem, cells)
            full = _median_time(lambda p=problem, c=cells: solve_fv(p, c))
            n = per_layer * layers
            print(f"{label:<28}{n:>7}{bare * 1e6:>12.1f} us{full * 1e6:>9.1f} us"
                  f"{full / bare:>8.2f}")
    solution = solve_fv(SHELL, 100)
    assert solution.success  # the timed call did real work


def test_nonlinear_paths_and_fipy_side_by_side():
    print()
    for label, problem in (("Michaelis-Menten cylinder", MM_CYLINDER),
                           ("zero-order sphere, depleted", ZERO_SPHERE)):
        base = solve_fv(problem).diagnostics["cells_per_layer"]
        fine = [4 * n for n in base]
        one = _median_time(lambda p=problem, c=fine: solve_fv(p, c), repeats=11)
        study = _median_time(lambda p=problem: run_grid_study(p), repeats=11)
        bvp = _median_time(lambda p=problem: solve_bvp_reference(p), repeats=5)
        print(f"{label}: fine mesh {sum(fine)} cells")
        print(f"  solve_fv (fine mesh)         {one * 1e3:9.2f} ms")
        print(f"  three-grid study             {study * 1e3:9.2f} ms")
        print(f"  solve_bvp reference          {bvp * 1e3:9.2f} ms")
        if problem is MM_CYLINDER:
            picard = _median_time(lambda c=fine: _fipy_michaelis_menten(c), repeats=3)
            print(f"  FiPy, Picard sweeps (fine)   {picard * 1e3:9.2f} ms")
            print(f"  FiPy / (study + bvp)         {picard / (study + bvp):9.1f} x")
    assert run_grid_study(MM_CYLINDER)["flux_inner"].convergence == "monotonic"


def _fipy_michaelis_menten(cells_per_layer) -> float:
    """FiPy solve of MM_CYLINDER (u = C/K, coefficient D K) by Picard sweeps to 1e-10."""
    layers = MM_CYLINDER.layers
    widths = np.concatenate([np.full(n, ly.thickness / n)
                             for n, ly in zip(cells_per_layer, layers, strict=True)])
    mesh = fipy.CylindricalGrid1D(dx=widths, origin=(MM_CYLINDER.inner,))
    layer_of = np.repeat(np.arange(len(layers)), cells_per_layer)
    dk = fipy.CellVariable(mesh=mesh, value=np.array([ly.diffusivity * ly.partition
                                                      for ly in layers])[layer_of])
    k = np.array([ly.partition for ly in layers])[layer_of]
    vmax = np.array([ly.reaction.vmax for ly in layers])[layer_of]
    km = np.array([ly.reaction.km or 1.0 for ly in layers])[layer_of]
    u = fipy.CellVariable(mesh=mesh, value=0.2)
    u.constrain(0.2, mesh.facesLeft)
    lagged = fipy.CellVariable(mesh=mesh, value=0.0)
    equation = fipy.DiffusionTerm(coeff=dk.harmonicFaceValue) == fipy.ImplicitSourceTerm(
        coeff=lagged)
    solver = fipy.LinearLUSolver(tolerance=1e-15, criterion="initial")
    for _ in range(500):
        previous = np.array(u.value)
        lagged.value = vmax * k / (km + k * np.maximum(previous, 0.0))
        equation.solve(var=u, solver=solver)
        if np.max(np.abs(u.value - previous)) <= 1e-10 * np.max(np.abs(u.value)):
            break
    return float((-dk.harmonicFaceValue * u.faceGrad)[0].value[0])
