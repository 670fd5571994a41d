"""The lumen's marching solver (finite volumes in r, extrapolated implicit Euler in z) against
the Graetz eigenfunction series and the fully developed limits.

Sources: L. Graetz, Ann. Phys. 254 (1883) 79 and W. Nusselt, Z. VDI 54 (1910) 1154 (the series
for a wall held at one concentration); R.K. Shah, A.L. London, *Laminar Flow Forced Convection
in Ducts*, 1978, ch. 5 (the wall of finite conductance, Sh = 3.657 and 48/11 far from the inlet);
R. Siegel, E.M. Sparrow, T.M. Hallman, Appl. Sci. Res. A 7 (1958) 386 (uniform wall flux). The
series are checked on their own against an mpmath computation in
tests/unit/worker/engine/lumen/test_graetz.py. Refinement: I.B. Celik et al., J. Fluids Eng.
130 (2008) 078001 (apparent order, GCI), through worker.engine.convergence.grid_study. The
tube's dimensions are arbitrary (only z* = pi D z / (4F) and Bi = k R / D matter).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from tests.lumen_checks import assert_check_and_injection, within
from worker.engine.convergence import grid_study
from worker.engine.lumen.graetz import graetz_series
from worker.engine.lumen.marching import (
    ConductanceWall,
    FixedWall,
    Tube,
    UniformFluxWall,
    march,
    refinement_study,
)

DIFFUSIVITY, RADIUS, FLOW = 1e-9, 1e-4, 1e-10
#: Coarse mesh of the three (32, 64, 128 cells and steps): apparent orders within 0.2 of the
#: scheme's 2 at every length tested (measured: 1.82-2.09).
BASE = 32
ORDER_BAND = 0.2


def tube_at(z_star: float, inlet: float = 1.0) -> Tube:
    return Tube(RADIUS, z_star * 4 * FLOW / (math.pi * DIFFUSIVITY), FLOW, DIFFUSIVITY, inlet)


@pytest.fixture(scope="module")
def series():
    return {math.inf: graetz_series(60), 2.0: graetz_series(60, biot=2.0)}


def inside_gci(reference):
    """A check on a grid study: the reference lies within the fine grid's GCI band."""
    def check(study_values) -> bool:
        fine, gci = study_values
        return abs(fine - reference) <= gci * abs(fine)
    return check


@pytest.mark.parametrize("z_star", [0.002, 0.05, 0.3])
@pytest.mark.parametrize("biot", [math.inf, 2.0])
def test_mixing_cup_series_against_the_marching_solver(series, z_star, biot):
    """Short (z* = 0.002, inside the Leveque range) and long lengths (z* = 0.3, fully developed):
    the series' mixing cup lies inside the fine mesh's GCI band, the observed order is the
    scheme's 2, and the Richardson extrapolation is closer to the series than the fine mesh."""
    wall = FixedWall(0.0) if math.isinf(biot) else ConductanceWall(biot * DIFFUSIVITY / RADIUS,
                                                                    0.0)
    studies, _ = refinement_study(tube_at(z_star), wall, BASE, BASE)
    study = studies["outlet_mixing_cup"]
    reference = float(series[biot].mixing_cup(z_star)[0])
    assert study.convergence == "monotonic"
    order = within(2.0, 0.0, atol=ORDER_BAND)
    assert_check_and_injection(order, study.apparent_order, 0.25)
    check = inside_gci(reference)
    assert check((study.fine, study.gci_fine))
    for sign in (1.0, -1.0):
        assert not check((study.fine * (1 + sign * 3 * study.gci_fine), study.gci_fine))
    assert abs(study.extrapolated - reference) < abs(study.fine - reference)


@pytest.mark.parametrize("wall, reference", [
    (FixedWall(0.0), None),          # lambda_0^2 / 2 from the series, 3.657 (Shah & London)
    (UniformFluxWall(-1e-6), 48 / 11),
])
def test_fully_developed_sherwood_from_the_marching_solver(series, wall, reference):
    """Local Sherwood number j D_h / (D (c_m - c_w)) at the outlet of a long tube (z* = 0.5):
    the Richardson-extrapolated value of three meshes (order ~2) against lambda_0^2/2 =
    3.6568 and 48/11, within 1e-6 relative (measured 1e-8), and 3.657 / 4.364 to the table's
    three decimals (from memory)."""
    if reference is None:
        reference = float(series[math.inf].eigenvalues[0] ** 2 / 2)
    values = []
    for n in (4 * BASE, 2 * BASE, BASE):
        solution = march(tube_at(0.5), wall, n, n)
        values.append(solution.wall_flux[-1] * 2 * RADIUS
                      / (DIFFUSIVITY * (solution.mixing_cup[-1] - solution.wall[-1])))
    study = grid_study(values, ratios=(2, 2))
    assert abs(study.apparent_order - 2.0) < ORDER_BAND
    assert_check_and_injection(within(reference, 1e-6), study.extrapolated, 1e-5)
    table = 3.657 if isinstance(wall, FixedWall) else 4.364
    assert_check_and_injection(within(table, 0.0, atol=5e-4), study.extrapolated, 1e-3)


def test_fully_developed_sherwood_of_a_conducting_wall_from_the_marching_solver():
    """At Bi = k R / D = 2 the first Graetz mode is exp(-eta^2) with lambda_0 = 2 (by
    substitution in the Graetz equation; tests/unit/worker/engine/lumen/test_graetz.py), so far
    from the inlet the fluid-side Sherwood number j D_h / (D (c_m - c_w)) is exactly 4: the
    three meshes converge monotonically and their extrapolation reaches it to 1e-9 (measured
    5e-13; the apparent order of this ratio is 4.0 here, above the scheme's 2, so it is not
    checked against 2)."""
    values = []
    for n in (4 * BASE, 2 * BASE, BASE):
        solution = march(tube_at(0.5), ConductanceWall(2 * DIFFUSIVITY / RADIUS, 0.0), n, n)
        values.append(solution.wall_flux[-1] * 2 * RADIUS
                      / (DIFFUSIVITY * (solution.mixing_cup[-1] - solution.wall[-1])))
    study = grid_study(values, ratios=(2, 2))
    assert study.convergence == "monotonic"
    assert_check_and_injection(within(4.0, 1e-9), study.extrapolated, 1e-8)
    assert_check_and_injection(within(4.0, 1e-8), study.fine, 1e-7)


def test_robin_wall_without_resistance_reproduces_the_fixed_wall():
    """A conductance k -> inf to an outside concentration is the wall held at it: on one mesh
    the outlet profiles converge to the FixedWall solution as k grows (the difference falls
    like 1/k), and at k R / D = 1e8 they agree to 1e-6."""
    tube = tube_at(0.05)
    fixed = march(tube, FixedWall(0.2), 64, 64)
    gaps = []
    for biot in (1e2, 1e4, 1e6, 1e8):
        robin = march(tube, ConductanceWall(biot * DIFFUSIVITY / RADIUS, 0.2), 64, 64)
        gaps.append(np.max(np.abs(robin.mixing_cup - fixed.mixing_cup)))
    assert all(a > 50 * b for a, b in zip(gaps[:2], gaps[1:3], strict=True))
    close = march(tube, ConductanceWall(1e8 * DIFFUSIVITY / RADIUS, 0.2), 64, 64)
    assert_check_and_injection(within(fixed.mixing_cup[1:] - 0.2, 1e-6),
                               close.mixing_cup[1:] - 0.2, 1e-5)
    assert_check_and_injection(within(fixed.wall_flux[1:], 1e-5), close.wall_flux[1:], 1e-4)
