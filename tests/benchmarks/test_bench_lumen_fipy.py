"""Benchmark: a steady flow case checked whole (``check_case``) against FiPy solving the same
two-dimensional problem at the same accuracy (issue 16, "Speed": the target is 10 times).

The problem, on both sides: fully developed laminar (Poiseuille) flow in the lumen,
``u(r) = 2 u_m (1 - r^2/R^2)``, ``u_m = F / (pi R^2)``; in the fluid radial diffusion and axial
convection; in the layers radial diffusion with reaction; axial diffusion neglected everywhere;
no partition at the lumen wall or between the layers (K = 1 in both cases); the inlet at a
uniform concentration. FiPy's side, built as a user would: ``CylindricalGrid2D`` in (r, z),
cells of one radial size across the lumen and the layers (faces on the lumen wall and on the
layer interfaces), equal axial cells; the diffusion coefficient a face variable, the harmonic
mean of the cells' diffusivities on the radial faces and exactly zero on the axial faces (an
anisotropic coefficient with no axial component: no axial diffusion at all); axial convection by
``UpwindConvectionTerm`` (the velocity on the axial faces, zero in the layers), the inlet value
constrained on the lumen's inlet faces and a zero gradient at the outlet (the convective outflow);
Michaelis-Menten uptake by Newton sweeps (``ImplicitSourceTerm`` of the slope, the rest as a
source) until a sweep changes no cell by more than 1e-12 of the inlet. The linear LU solver is
asked for a residual 1e-12 of the initial one: with FiPy's default criterion it skips the solve
of a late Newton sweep whose residual is small beside the right-hand side, and the sweeps stop
short (seen here: the body's minimum then off by 0.3 %). FiPy refines r and z together (x2 each
time) until its error is at or below ours, or until the next run would not fit its time budget;
then the last run's time is a lower bound of FiPy's time at our accuracy. FiPy's finest meshes
here hold about a million cells; its LU factorisation then takes several GB of memory.

Cases (invented, not data):

1. Linear: the lumen and flow of the fibre below inside one 50 um membrane (D = 5e-10 m^2/s)
   held at zero outside. Reference: the Graetz series with the membrane as a Robin wall (L.
   Graetz, Ann. Phys. 254 (1883) 79; R.K. Shah, A.L. London, *Laminar Flow Forced Convection
   in Ducts*, 1978, ch. 5: T3 condition), 60 terms, its conductance from the cylindrical wall's
   resistance ln(r_o/r_i) / (2 pi D) (J. Crank, *The Mathematics of Diffusion*, 1975, eq. 5.5):
   the outlet mixing cup exactly (truncation below 1e-12).
2. Michaelis-Menten: ``FIBRE`` of tests/unit/schemas/test_flow_case.py (100 um lumen, 50 um wall,
   300 um of cells, sealed outside), through ``schemas.validate_case`` / ``check_case``.
   No closed form. Reference: FiPy's own sequence extrapolated (Richardson, with the order
   observed on its last three meshes), independent of our code; the record's value and band are
   printed beside it. For the body's minimum (at the outlet, on the sealed outer face) FiPy's
   sequence is second order and the extrapolation sharp; for the outlet mixing cup the axial
   upwinding is first order, the radial error second, and the observed order in between, so
   the extrapolated cup is given with the spread of the two last extrapolations. Our cup's
   error is taken as the largest of its distance from that extrapolation, the spread and our
   record's band (in FiPy's favour: a larger target is reached sooner). A third route for the
   minimum: the layers alone shot with scipy at our own outlet wall concentration, which
   separates the error of our layers' solve from the lumen's.

Times: ours is ``check_case`` whole (reading, units, both readings, every mesh of both grid
studies, the wall table and its verification, every cross-check and the record), the median of
``REPEATS`` calls after a first (cold) call, which is printed too; FiPy's is one solve at one
mesh (mesh, terms, every Newton sweep). Figures printed side by side; nothing asserted about
time (shared, noisy machines). The benchmark asserts that FiPy converges: its error against
the exact series falls at every refinement (case 1), its successive differences fall (case 2),
and our outlet value lies within our record's band of the exact series (case 1).

Run with ``make bench``.
"""

from __future__ import annotations

import copy
import math
import statistics
import time
from dataclasses import dataclass
from itertools import pairwise

import numpy as np

from schemas import validate_case
from schemas.checking import check_case
from tests.unit.schemas.test_flow_case import FIBRE
from worker.engine.lumen.graetz import (
    dimensionless_length,
    graetz_series,
    layered_wall_conductance,
    wall_biot_number,
)
from worker.engine.model import Problem

REPEATS = 3
#: FiPy's meshes: radial cells across the lumen (the layers get cells of the same size) and
#: axial cells, refined together
FIPY_MESHES = [(8, 100), (16, 200), (32, 400), (64, 800), (128, 1600), (256, 3200)]
#: Seconds of FiPy runs per case; the next mesh is run only if its expected time (the last
#: run's, times the growth seen so far and at least 4) fits in what is left
FIPY_BUDGET_SECONDS = 90.0
NEWTON_TOLERANCE = 1e-12
NEWTON_SWEEPS = 30
#: the Graetz series' terms (truncation below 1e-12 at the outlet of case 1)
SERIES_TERMS = 60

#: Case 1: the fibre's lumen and flow; one membrane held at zero outside (linear)
MEMBRANE = {**copy.deepcopy(FIBRE),
            "title": "invented membrane fibre, sink outside (benchmark input)",
            "layers": [{"name": "membrane", "thickness": "50 um",
                        "diffusivity": "5e-10 m^2/s"}],
            "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"}}


@dataclass
class FipyRun:
    n_r: int
    n_z: int
    cells: int
    mixing_cup: float
    minimum: float
    sweeps: int
    seconds: float


def _fipy(problem: Problem, lumen_cells: int, n_z: int) -> FipyRun:
    """One FiPy solve of ``problem`` (a flow case) on ``lumen_cells`` radial cells across the
    lumen (cells of the same size in the layers) and ``n_z`` axial cells; the outlet mixing cup
    (the convected flux over the outlet faces over the flow) and the lowest cell value."""
    from fipy import (
        CellVariable,
        CylindricalGrid2D,
        DiffusionTerm,
        FaceVariable,
        ImplicitSourceTerm,
        LinearLUSolver,
        UpwindConvectionTerm,
    )

    start = time.perf_counter()
    face = problem.inner_boundary
    radius, length = problem.inner, problem.length
    assert length is not None
    size = radius / lumen_cells
    widths = [radius] + [layer.thickness for layer in problem.layers]
    counts = [max(1, round(w / size)) for w in widths]
    dx = np.concatenate([np.full(n, w / n) for n, w in zip(counts, widths, strict=True)])
    mesh = CylindricalGrid2D(dx=dx, dy=length / n_z, ny=n_z)
    # region of each cell: 0 the fluid, k the k-th layer
    region = np.repeat(np.arange(len(counts)), counts)[np.arange(mesh.numberOfCells)
                                                        % dx.size]
    diffusivity = np.array([face.diffusivity] + [la.diffusivity for la in problem.layers])
    d_cells = CellVariable(mesh=mesh, value=diffusivity[region])
    radial = np.abs(np.asarray(mesh.faceNormals[0])) > 0.5
    d_faces = d_cells.harmonicFaceValue * radial
    r_faces = np.asarray(mesh.faceCenters[0])
    mean_velocity = face.flow_rate / (math.pi * radius**2)
    u_z = np.where(~radial & (r_faces < radius),
                   2.0 * mean_velocity * (1.0 - (r_faces / radius) ** 2), 0.0)
    velocity = FaceVariable(mesh=mesh, rank=1, value=np.vstack([np.zeros_like(u_z), u_z]))
    c = CellVariable(mesh=mesh, value=face.inlet * (region == 0))
    c.constrain(face.inlet, mesh.facesBottom & (r_faces < radius))
    c.faceGrad.constrain([[0.0], [0.0]], mesh.facesTop)
    outer = problem.outer_boundary
    if outer.kind == "concentration":
        c.constrain(outer.value, mesh.facesRight)
    else:
        assert outer.kind == "symmetry"
    vmax = np.zeros(mesh.numberOfCells)
    km = np.ones(mesh.numberOfCells)
    for k, layer in enumerate(problem.layers, start=1):
        kind = layer.reaction.kind
        if kind == "michaelis_menten":
            vmax[region == k], km[region == k] = layer.reaction.vmax, layer.reaction.km
        else:
            assert kind == "none", kind
    solver = LinearLUSolver(tolerance=1e-12, criterion="initial")
    slope = CellVariable(mesh=mesh, value=0.0)
    rest = CellVariable(mesh=mesh, value=0.0)
    equation = (UpwindConvectionTerm(coeff=velocity)
                == DiffusionTerm(coeff=d_faces) - ImplicitSourceTerm(coeff=slope) - rest)
    sweeps = 0
    while sweeps < NEWTON_SWEEPS:
        sweeps += 1
        value = np.maximum(np.asarray(c.value), 0.0)
        slope.setValue(vmax * km / (km + value) ** 2)
        rest.setValue(vmax * value / (km + value) - np.asarray(slope.value) * value)
        previous = np.array(c.value)
        # FiPy's upwind weights divide each face's convection by its diffusion: on the faces
        # with neither (axial faces outside the lumen) that is 0/0, a NaN that only selects the
        # weight of a zero velocity, so numpy's warning about it is silenced here alone.
        with np.errstate(divide="ignore", invalid="ignore"):
            equation.solve(var=c, solver=solver)
        if not vmax.any() or np.max(np.abs(c.value - previous)) <= NEWTON_TOLERANCE * face.inlet:
            break
    field = np.asarray(c.value).reshape(n_z, dx.size)
    top = np.asarray(mesh.facesTop)
    weights = (np.asarray(mesh._faceAreas) * u_z)[top]
    cup = float(np.sum(weights * field[-1]) / np.sum(weights))
    return FipyRun(int(dx.size), n_z, int(mesh.numberOfCells), cup, float(field.min()),
                   sweeps, time.perf_counter() - start)


def _ours(doc: dict) -> tuple[dict, float, float]:
    """The record of ``check_case``, its cold time and its median warm time (s)."""
    start = time.perf_counter()
    record = check_case(copy.deepcopy(doc))
    cold = time.perf_counter() - start
    times = []
    for _ in range(REPEATS):
        start = time.perf_counter()
        check_case(copy.deepcopy(doc))
        times.append(time.perf_counter() - start)
    return record, cold, statistics.median(times)


def _falling(values: list[float]) -> bool:
    return all(b < a for a, b in pairwise(values))


def _richardson(values: list[float]) -> tuple[float, float]:
    """(extrapolated value, observed order) from the last three of a sequence refined by 2."""
    f3, f2, f1 = values[-3:]
    ratio = (f3 - f2) / (f2 - f1)
    order = math.log2(ratio) if ratio > 0 else math.nan
    if not math.isfinite(order):
        return f1, order
    return f1 + (f1 - f2) / (2.0**order - 1.0), order


def _sequence(problem: Problem, reached, ours_seconds: float) -> list[FipyRun]:
    """FiPy on ``FIPY_MESHES`` until ``reached(runs)`` or the budget; printed as it goes."""
    runs: list[FipyRun] = []
    spent = 0.0
    for lumen_cells, n_z in FIPY_MESHES:
        if runs:
            growth = runs[-1].seconds / runs[-2].seconds if len(runs) > 1 else 4.0
            expected = runs[-1].seconds * max(growth, 4.0)
            if spent + expected > FIPY_BUDGET_SECONDS:
                print(f"  next mesh ({lumen_cells} lumen cells, {n_z} axial) not run: about "
                      f"{expected:.0f} s expected, {FIPY_BUDGET_SECONDS - spent:.0f} s left of "
                      "the budget")
                break
        run = _fipy(problem, lumen_cells, n_z)
        spent += run.seconds
        runs.append(run)
        print(f"  FiPy {run.n_r} x {run.n_z} cells (r x z; {run.cells} cells), {run.sweeps} "
              f"sweep(s): outlet mixing cup {run.mixing_cup:.9f}, lowest cell "
              f"{run.minimum:.9g}, {run.seconds:.2f} s (ratio FiPy / ours "
              f"{run.seconds / ours_seconds:.1f})")
        if reached(runs):
            break
    return runs


def _verdict(runs: list[FipyRun], reached: bool, ours_seconds: float) -> None:
    last = runs[-1]
    if reached:
        print(f"  FiPy reached our accuracy on {last.n_r} x {last.n_z} cells in "
              f"{last.seconds:.2f} s: ratio FiPy / ours {last.seconds / ours_seconds:.1f} "
              "(our whole check)")
    else:
        print(f"  FiPy did not reach our accuracy in {last.seconds:.2f} s (its finest run, "
              f"{last.n_r} x {last.n_z} cells): ratio FiPy / ours above "
              f"{last.seconds / ours_seconds:.1f} (our whole check)")


def test_bench_linear_fibre_against_fipy():
    """Case 1: outlet mixing cup against the Graetz series (Robin wall)."""
    problem = validate_case(copy.deepcopy(MEMBRANE)).problem
    face = problem.inner_boundary
    layer = problem.layers[0]
    conductance = layered_wall_conductance(problem.inner, [(layer.thickness,
                                                            layer.diffusivity, 1.0)])
    series = graetz_series(SERIES_TERMS, wall_biot_number(conductance, problem.inner,
                                                          face.diffusivity))
    z_star = float(dimensionless_length(problem.length, face.flow_rate, face.diffusivity))
    assert z_star > series.smallest_z_star(1e-12)
    exact = face.inlet * float(series.mixing_cup(z_star)[0])  # outside at zero

    record, cold, seconds = _ours(MEMBRANE)
    ours = record["quantities"]["outlet_concentration"]
    error = abs(ours["value"] - exact)
    print(f"\ncase 1, linear (membrane held at zero outside, Bi = {series.biot:.4g}, z* = "
          f"{z_star:.4g}): Graetz series outlet mixing cup {exact:.9f}")
    print(f"  ours: check_case whole {seconds:.3f} s (median of {REPEATS}; first call "
          f"{cold:.3f} s), verdict {record['verdict']}; outlet mixing cup {ours['value']:.9f}, "
          f"error {error:.2e} (band in the record {ours['uncertainty']:.2e})")
    assert error <= ours["uncertainty"], "our outlet value lies outside our own band"

    runs = _sequence(problem, lambda runs: abs(runs[-1].mixing_cup - exact) <= error, seconds)
    errors = [abs(r.mixing_cup - exact) for r in runs]
    for k in range(1, len(runs)):
        print(f"  FiPy {runs[k].n_r} x {runs[k].n_z}: error {errors[k]:.2e}, observed order "
              f"{math.log2(errors[k - 1] / errors[k]):.2f} per refinement of both")
    _verdict(runs, errors[-1] <= error, seconds)
    assert _falling(errors), errors


def _layers_minimum(problem: Problem, c_wall: float) -> float:
    """The layers' lowest concentration (on the sealed outer face) with the fluid at the lumen
    wall at ``c_wall``: shooting from the outer face inwards, ``y = (c, r D dc/dr)`` (both
    continuous across the interfaces, K = 1), integrated by scipy's DOP853 (E. Hairer, S.P.
    Norsett, G. Wanner, *Solving Ordinary Differential Equations I*, 1993) and the outer value
    found by Brent's method so that c reaches ``c_wall`` at the wall. Independent of our steady
    solvers and of FiPy."""
    from scipy.integrate import solve_ivp
    from scipy.optimize import brentq

    edges = problem.edges

    def wall_value(outer_value: float) -> float:
        y = [outer_value, 0.0]
        for k in reversed(range(len(problem.layers))):
            layer = problem.layers[k]
            d = layer.diffusivity
            vmax = layer.reaction.vmax if layer.reaction.kind == "michaelis_menten" else 0.0
            km = layer.reaction.km if vmax else 1.0

            def rhs(r, y, d=d, vmax=vmax, km=km):
                return [y[1] / (r * d), r * vmax * y[0] / (km + y[0])]

            y = solve_ivp(rhs, (edges[k + 1], edges[k]), y, method="DOP853", rtol=1e-13,
                          atol=1e-30).y[:, -1]
        return float(y[0])

    return brentq(lambda m: wall_value(m) - c_wall, 0.0, c_wall, xtol=1e-20, rtol=1e-14)


def test_bench_michaelis_menten_fibre_against_fipy():
    """Case 2: outlet mixing cup and the body's minimum against FiPy's extrapolated sequence."""
    problem = validate_case(copy.deepcopy(FIBRE)).problem
    assert problem.outer_boundary.kind == "symmetry"
    record, cold, seconds = _ours(FIBRE)
    cup = record["quantities"]["outlet_concentration"]
    low = record["quantities"]["concentration_min"]
    print(f"\ncase 2, Michaelis-Menten fibre: ours check_case whole {seconds:.3f} s (median of "
          f"{REPEATS}; first call {cold:.3f} s), verdict {record['verdict']}; outlet mixing cup "
          f"{cup['value']:.9f} (band {cup['uncertainty']:.2e}), body minimum "
          f"{low['value']:.9g} (band {low['uncertainty']:.2e})")
    # every mesh the budget allows: the reference is extrapolated from FiPy's finest three
    runs = _sequence(problem, lambda runs: False, seconds)
    assert len(runs) >= 3, "fewer than three FiPy meshes in the budget"
    cups, lows = [r.mixing_cup for r in runs], [r.minimum for r in runs]
    for values in (cups, lows):  # FiPy converges: its successive differences fall
        steps = [abs(b - a) for a, b in pairwise(values)]
        assert _falling(steps), steps
    ref_cup, p_cup = _richardson(cups)
    ref_low, p_low = _richardson(lows)
    spread_cup = abs(ref_cup - _richardson(cups[:-1])[0]) if len(runs) > 3 else math.inf
    spread_low = abs(ref_low - _richardson(lows[:-1])[0]) if len(runs) > 3 else math.inf
    print(f"  FiPy extrapolated (its finest three meshes): outlet mixing cup {ref_cup:.9f} "
          f"(observed order {p_cup:.2f}; the two last extrapolations differ by "
          f"{spread_cup:.1e}), body minimum {ref_low:.9g} (observed order {p_low:.2f}; "
          f"differ by {spread_low:.1e})")
    outlet_wall = record["series"]["axial"]["wall"][-1]
    shot = _layers_minimum(problem, outlet_wall)
    off = abs(low["value"] - shot)
    print(f"  layers shot (scipy DOP853) at our outlet wall concentration {outlet_wall:.9f}: "
          f"minimum {shot:.9g}; ours {low['value']:.9g}, off by {off / shot:.2%} "
          f"({off / low['uncertainty']:.0f} times our band); FiPy's extrapolation differs from "
          f"it by {abs(ref_low - shot):.1e}")
    # our errors: the minimum against FiPy's extrapolation; the outlet cup, where ours is closer
    # to FiPy's extrapolation than that is certain, at the larger of the spread and our band
    # (in FiPy's favour: a larger target is reached sooner)
    our_low_error = abs(low["value"] - ref_low)
    our_cup_error = max(abs(cup["value"] - ref_cup), spread_cup, cup["uncertainty"])
    print(f"  ours against FiPy's extrapolation: outlet mixing cup "
          f"{abs(cup['value'] - ref_cup):.2e} (target taken: {our_cup_error:.2e}), body minimum "
          f"{our_low_error:.2e} ({our_low_error / abs(ref_low):.2%} of it)")
    reached_low = reached_cup = None
    for run in runs:
        cup_error, low_error = abs(run.mixing_cup - ref_cup), abs(run.minimum - ref_low)
        print(f"  FiPy {run.n_r} x {run.n_z}: errors outlet mixing cup {cup_error:.2e}, "
              f"minimum {low_error:.2e}")
        if reached_low is None and low_error <= our_low_error:
            reached_low = run
        if reached_cup is None and cup_error <= our_cup_error:
            reached_cup = run
    for name, run in (("body minimum alone", reached_low), ("outlet mixing cup alone",
                                                              reached_cup)):
        if run is None:
            continue
        k = runs.index(run)
        # a mesh between the last one short of our error and this one may reach it sooner
        below = (f"; the mesh before it was short, {runs[k - 1].seconds:.2f} s, ratio "
                 f"{runs[k - 1].seconds / seconds:.1f}" if k else "")
        print(f"  {name}: FiPy at our error on {run.n_r} x {run.n_z} cells, {run.seconds:.2f}"
              f" s, ratio FiPy / ours {run.seconds / seconds:.1f}{below}")
    both = [run for run in runs if abs(run.mixing_cup - ref_cup) <= our_cup_error
            and abs(run.minimum - ref_low) <= our_low_error]
    _verdict(both[:1] or runs, bool(both), seconds)
