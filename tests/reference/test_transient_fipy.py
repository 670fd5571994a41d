"""Method of lines against FiPy (NIST) on a two-layer slab with a partition jump.

FiPy solves the same case independently: cell-centred finite volumes in the continuous
potential u = C/K, ``TransientTerm(coeff=K) == DiffusionTerm(coeff=D K)``, implicit (backward
Euler) steps, the interface face given the series (harmonic) coefficient of its two half cells.
Its answers are Richardson-extrapolated in time (order 1) and in space (order 2), as
is common practice with a first- and a second-order method (moderate meshes: from memory,
FiPy's round-off floor shows above ~1e4 cells).

FiPy: J.E. Guyer, D. Wheeler, J.A. Warren, "FiPy: Partial Differential Equations with Python",
Computing in Science & Engineering 11 (2009) 6-15. Scenario values are invented.
"""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.transient import run_transient
from worker.engine.transient.method_of_lines import solve_transient_fv

RESERVOIR = {"thickness": 100e-6, "diffusivity": 2e-12, "partition": 1.0, "initial": 10.0}
TOPCOAT = {"thickness": 20e-6, "diffusivity": 5e-14, "partition": 0.3, "initial": 0.0}
TIMES = (2.0e4, 1.0e5, 2.0e5)


def _problem():
    layers = (
        Layer("reservoir", RESERVOIR["thickness"], RESERVOIR["diffusivity"],
              RESERVOIR["partition"], initial=RESERVOIR["initial"]),
        Layer("topcoat", TOPCOAT["thickness"], TOPCOAT["diffusivity"], TOPCOAT["partition"],
              initial=TOPCOAT["initial"]),
    )
    return Problem("slab", 0.0, layers, Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", TIMES[-1], TIMES))


def fipy_release_fraction(cells_reservoir: int, cells_topcoat: int, dt: float) -> np.ndarray:
    """Release fraction at TIMES from FiPy, backward Euler with step dt (s)."""
    from fipy import CellVariable, DiffusionTerm, FaceVariable, Grid1D, TransientTerm

    l1, l2 = RESERVOIR["thickness"], TOPCOAT["thickness"]
    dx = np.concatenate((np.full(cells_reservoir, l1 / cells_reservoir),
                         np.full(cells_topcoat, l2 / cells_topcoat)))
    mesh = Grid1D(dx=dx)
    x = mesh.cellCenters[0].value
    in_reservoir = x < l1
    k1, k2 = RESERVOIR["partition"], TOPCOAT["partition"]
    dk1, dk2 = RESERVOIR["diffusivity"] * k1, TOPCOAT["diffusivity"] * k2
    capacity = CellVariable(mesh=mesh, value=np.where(in_reservoir, k1, k2))
    u = CellVariable(mesh=mesh, value=np.where(in_reservoir, RESERVOIR["initial"] / k1,
                                               TOPCOAT["initial"] / k2))
    xf = mesh.faceCenters[0].value
    face_coefficient = np.where(xf < l1, dk1, dk2)
    interface = int(np.argmin(np.abs(xf - l1)))
    h1, h2 = 0.5 * l1 / cells_reservoir, 0.5 * l2 / cells_topcoat
    face_coefficient[interface] = (h1 + h2) / (h1 / dk1 + h2 / dk2)
    u.constrain(0.0, mesh.facesRight)  # sink; the left face keeps FiPy's default no flux
    equation = TransientTerm(coeff=capacity) == DiffusionTerm(
        coeff=FaceVariable(mesh=mesh, value=face_coefficient))
    volumes = np.asarray(mesh.cellVolumes)
    load = float(np.sum(capacity.value * u.value * volumes))
    fractions, now = [], 0.0
    for target in TIMES:
        for _ in range(int(round((target - now) / dt))):
            equation.solve(var=u, dt=dt)
        now = target
        fractions.append(1.0 - float(np.sum(capacity.value * u.value * volumes)) / load)
    return np.array(fractions)


@pytest.fixture(scope="module")
def fipy_reference():
    coarse_long = fipy_release_fraction(40, 10, 2000.0)
    coarse_short = fipy_release_fraction(40, 10, 1000.0)
    fine_long = fipy_release_fraction(80, 20, 2000.0)
    fine_short = fipy_release_fraction(80, 20, 1000.0)
    in_time_coarse = 2.0 * coarse_short - coarse_long  # backward Euler: first order in time
    in_time_fine = 2.0 * fine_short - fine_long
    extrapolated = (4.0 * in_time_fine - in_time_coarse) / 3.0  # second order in space
    spread = np.abs(extrapolated - in_time_fine)
    return extrapolated, spread


@pytest.mark.slow
def test_method_of_lines_matches_fipy_two_layer_partition(fipy_reference):
    reference, spread = fipy_reference
    # the extrapolated FiPy answer must itself be settled well below the comparison tolerance
    assert np.all(spread < 5e-5)
    solution = solve_transient_fv(_problem(), TIMES, (160, 40))
    fraction = (solution.released_inner + solution.released_outer) / solution.initial_load
    np.testing.assert_allclose(fraction, reference, atol=5e-5)
    assert np.all(solution.released_inner == 0.0)


@pytest.mark.slow
def test_run_transient_release_matches_fipy(fipy_reference):
    reference, _ = fipy_reference
    outcome = run_transient(_problem())
    fraction = np.array(outcome.series["release_fraction"]["values"])
    np.testing.assert_allclose(fraction, reference, atol=5e-5)
    failed = [c.name for c in outcome.checks if not c.passed]
    assert failed == []
