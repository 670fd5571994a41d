"""Finite-volume solver against FiPy, an independent general-purpose finite-volume library.

FiPy: J.E. Guyer, D. Wheeler, J.A. Warren, "FiPy: partial differential equations with
Python", Computing in Science & Engineering 11(3) (2009) 6-15 (NIST). FiPy solves the
transformed variable u = C/K, which is continuous across a partition interface, with the
coefficient D K per cell (flux J = -D K du/dr); the mesh has a face on the interface. FiPy
results on moderate meshes (its round-off floor rises above about 1e4 cells) are
Richardson-extrapolated (L.F. Richardson, Phil. Trans. R. Soc. A 210 (1911) 307; order 2
observed from FiPy's own three meshes) and compared with the extrapolated ``run_grid_study``
figures. Michaelis-Menten is solved in FiPy by Picard sweeps of a lagged implicit source.

Scenario values are invented for these tests.
"""

from __future__ import annotations

import fipy  # a test dependency (pyproject "test" extra): missing it is an error, not a skip
import numpy as np
import pytest

from worker.engine.convergence import run_grid_study
from worker.engine.model import Boundary, Layer, Problem, Reaction

FIPY_CELLS = (100, 200, 400)  # per layer, coarse to fine
AGREEMENT = 1e-6  # relative, extrapolated FV vs extrapolated FiPy
PICARD_TOLERANCE = 1e-13  # relative change of u ending the FiPy sweeps
PICARD_MAX_SWEEPS = 500


def _fipy_solver():
    """LU with a tight tolerance: FiPy's default tolerance ends the solve (and so the Picard
    sweeps) early, leaving errors of order 1e-2 (measured on these cases)."""
    return fipy.LinearLUSolver(tolerance=1e-15, criterion="initial")


def _fipy_mesh(problem: Problem, cells: int):
    widths = np.concatenate([np.full(cells, ly.thickness / cells) for ly in problem.layers])
    if problem.geometry == "slab":
        return fipy.Grid1D(dx=widths) + ((problem.inner,),)
    grid = {"cylinder": fipy.CylindricalGrid1D, "sphere": fipy.SphericalGrid1D}[problem.geometry]
    return grid(dx=widths, origin=(problem.inner,))


def _volume_correction(mesh, exponent: int) -> np.ndarray:
    """Exact r^n-weighted shell volume / FiPy's cell volume, per cell.

    FiPy 4.0.3's SphericalGrid1D reports cell volumes 1.5 times the shell volumes that match
    its face areas r^2 (measured: (r_e^3 - r_w^3)/2 instead of /3; see
    ``test_fipy_sphere_volumes_need_the_correction``), so volumetric sources are scaled by this
    ratio; for slab and cylinder it is 1.
    """
    faces = np.asarray(mesh.faceCenters.value[0])
    exact = (faces[1:] ** (exponent + 1) - faces[:-1] ** (exponent + 1)) / (exponent + 1)
    return exact / np.asarray(mesh.cellVolumes)


def _fipy_fluxes(problem: Problem, cells: int) -> tuple[float, float]:
    """(flux_inner, flux_outer) from FiPy; faces of kind concentration or symmetry only."""
    mesh = _fipy_mesh(problem, cells)
    layer_of = np.repeat(np.arange(len(problem.layers)), cells)
    d = np.array([ly.diffusivity for ly in problem.layers])[layer_of]
    k = np.array([ly.partition for ly in problem.layers])[layer_of]
    dk = fipy.CellVariable(mesh=mesh, value=d * k)
    u = fipy.CellVariable(mesh=mesh, value=1.0)
    for boundary, faces in ((problem.inner_boundary, mesh.facesLeft),
                            (problem.outer_boundary, mesh.facesRight)):
        if boundary.kind == "concentration":
            u.constrain(boundary.value, faces)  # u = C/K = fluid concentration at the face
        else:
            assert boundary.kind == "symmetry"  # FiPy's natural condition: zero flux
    coefficient = dk.harmonicFaceValue
    reactions = [ly.reaction for ly in problem.layers]
    if any(r.kind == "michaelis_menten" for r in reactions):
        vmax = np.array([r.vmax for r in reactions])[layer_of]
        km = np.array([r.km if r.kind == "michaelis_menten" else 1.0 for r in reactions])[layer_of]
        # R(C) = vmax C/(km + C) with C = K u, lagged: [vmax K/(km + K u_old)] u
        correction = _volume_correction(mesh, problem.exponent)
        lagged = fipy.CellVariable(mesh=mesh, value=0.0)
        equation = fipy.DiffusionTerm(coeff=coefficient) == fipy.ImplicitSourceTerm(coeff=lagged)
        for _ in range(PICARD_MAX_SWEEPS):
            previous = np.array(u.value)
            lagged.value = correction * vmax * k / (km + k * np.maximum(previous, 0.0))
            equation.solve(var=u, solver=_fipy_solver())
            if np.max(np.abs(u.value - previous)) <= PICARD_TOLERANCE * np.max(np.abs(u.value)):
                break
        else:
            raise AssertionError("FiPy Picard sweeps did not settle")
    else:
        fipy.DiffusionTerm(coeff=coefficient).solve(var=u, solver=_fipy_solver())
    flux = np.asarray((-coefficient * u.faceGrad)[0].value)
    inner = float(flux[np.asarray(mesh.facesLeft.value)][0])
    outer = float(flux[np.asarray(mesh.facesRight.value)][0])
    return inner, outer


def _extrapolated(values):
    """Richardson extrapolation of coarse, medium, fine values (ratio 2) and observed order."""
    coarse, medium, fine = values
    order = np.log2((medium - coarse) / (fine - medium))
    return fine + (fine - medium) / (2.0**order - 1.0), order


D = 1.0e-9
CS = 0.3

CASES = {
    "two-layer-slab-partition": Problem(
        "slab", 0.0,
        (Layer("membrane", 0.1e-3, 0.2 * D, partition=2.5), Layer("gel", 0.4e-3, D,
                                                                   partition=0.7)),
        Boundary("concentration", CS), Boundary("concentration", 0.05)),
    "two-layer-cylinder-partition": Problem(
        "cylinder", 0.2e-3,
        (Layer("wall", 50e-6, 0.5 * D, partition=0.6), Layer("tissue", 0.3e-3, 2 * D,
                                                              partition=1.3)),
        Boundary("concentration", CS), Boundary("concentration", 0.02)),
    "two-layer-sphere-partition": Problem(
        "sphere", 0.3e-3,
        (Layer("coat", 40e-6, 0.1 * D, partition=4.0), Layer("matrix", 0.2e-3, D,
                                                              partition=0.9)),
        Boundary("concentration", CS), Boundary("concentration", 0.0)),
    "michaelis-menten-cylinder": Problem(
        "cylinder", 0.1e-3,
        (Layer("fibre wall", 40e-6, 1.5e-9, partition=0.8),
         Layer("cell layer", 150e-6, 2.0e-9,
               reaction=Reaction("michaelis_menten", vmax=4e-3, km=5e-3))),
        Boundary("concentration", CS), Boundary("symmetry")),
    "michaelis-menten-sphere": Problem(
        "sphere", 0.0,
        (Layer("spheroid", 0.25e-3, D,
               reaction=Reaction("michaelis_menten", vmax=2e-2, km=2e-2)),),
        Boundary("symmetry"), Boundary("concentration", CS)),
}


@pytest.mark.parametrize("name", list(CASES))
def test_face_fluxes_match_extrapolated_fipy(name):
    problem = CASES[name]
    fipy_values = [_fipy_fluxes(problem, n) for n in FIPY_CELLS]
    studies = run_grid_study(problem, 50)
    for index, quantity in enumerate(("flux_inner", "flux_outer")):
        boundary = problem.inner_boundary if index == 0 else problem.outer_boundary
        series = [v[index] for v in fipy_values]
        study = studies[quantity]
        if boundary.kind == "symmetry":
            assert abs(study.fine) < 1e-12 * max(abs(v) for v in fipy_values[-1])
            continue
        if abs(series[2] - series[0]) <= 1e-10 * abs(series[2]):
            reference = series[2]  # FiPy reproduces this case exactly on every mesh
        else:
            reference, order = _extrapolated(series)
            assert 1.8 < order < 2.2, (quantity, series)  # FiPy's meshes are in the range
        assert study.extrapolated == pytest.approx(reference, rel=AGREEMENT), (quantity, study)
        assert study.fine == pytest.approx(reference, rel=1e-4)


@pytest.mark.parametrize("geometry", ["cylinder", "sphere"])
def test_fipy_sphere_volumes_need_the_correction(geometry):
    """Why ``_volume_correction`` exists, and that it makes FiPy right.

    Uniform consumption Q in a solid body with C = Cs at r = R has the closed form
    C(r) = Cs - Q (R^2 - r^2) / (2 (n+1) D) (J. Crank, The Mathematics of Diffusion, 2nd ed.,
    1975, ch. 14; n+1 = 2 cylinder, 3 sphere).
    """
    d, cs, q, radius, cells = 1e-9, 1.0, 1e-3, 0.5e-3, 200
    n = {"cylinder": 1, "sphere": 2}[geometry]
    mesh = (fipy.CylindricalGrid1D if n == 1 else fipy.SphericalGrid1D)(
        dx=np.full(cells, radius / cells))
    correction = _volume_correction(mesh, n)
    r = np.asarray(mesh.cellCenters.value[0])
    exact = cs - q * (radius**2 - r**2) / (2 * (n + 1) * d)

    def solve(source):
        u = fipy.CellVariable(mesh=mesh, value=0.0)
        u.constrain(cs, mesh.facesRight)
        (fipy.DiffusionTerm(coeff=d) == fipy.CellVariable(mesh=mesh, value=source)).solve(
            var=u, solver=_fipy_solver())
        return np.asarray(u.value)

    np.testing.assert_allclose(solve(q * correction), exact, rtol=1e-4)
    if n == 2:
        np.testing.assert_allclose(correction, 2.0 / 3.0, rtol=1e-12)
        assert abs(solve(np.full(cells, q))[0] - exact[0]) > 0.1 * abs(cs - exact[0])
    else:
        np.testing.assert_allclose(correction, 1.0, rtol=1e-12)
