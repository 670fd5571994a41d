"""The lumen's marching solver (worker.engine.lumen.marching): orders in r and z, the wall laws
(Newton on a nonlinear one), the discrete flow weights, bad input.

Check values: the Poiseuille flow rate ``F = int_0^R 2 u_m (1 - r^2/R^2) 2 pi r dr`` (H.
Schlichting, *Boundary-Layer Theory*, laminar pipe flow; common practice); the orders 2 (finite
volumes on a uniform mesh; Richardson-extrapolated implicit Euler, Lawson & Morris, SIAM J.
Numer. Anal. 15 (1978) 1212) and 1 (implicit Euler) measured by the apparent order of Celik et
al., J. Fluids Eng. 130 (2008) 078001. The wall laws are stand-ins for a wall (common practice:
Michaelis-Menten uptake j = Vmax c / (Km + c)); their numbers are not check values.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from tests.lumen_checks import assert_check_and_injection, balance_closes, within
from worker.engine.lumen import marching
from worker.engine.lumen.inputs import LumenInputError
from worker.engine.lumen.marching import (
    ConductanceWall,
    FixedWall,
    FunctionWall,
    Tube,
    UniformFluxWall,
    march,
    refinement_study,
)

D, R, F = 1e-9, 1e-4, 1e-10


def tube_at(z_star: float, inlet: float = 1.0) -> Tube:
    return Tube(R, z_star * 4 * F / (math.pi * D), F, D, inlet)


def test_cell_weights_carry_the_poiseuille_flow_rate():
    """The discrete convected rate of a uniform inlet is F c_in (the weights are the exact
    integrals of the parabola over each cell)."""
    solution = march(tube_at(0.01, inlet=2.5), FixedWall(0.0), 7, 3)
    assert_check_and_injection(within(F * 2.5, 1e-13), solution.inlet_rate, 1e-10)
    assert solution.mixing_cup[0] == pytest.approx(2.5, rel=1e-14)


@pytest.mark.parametrize("direction", ["r", "z"])
def test_second_order_in_each_direction(direction):
    """Refining r alone (z at the finest) and z alone (r at the finest): the outlet mixing cup
    converges at the apparent order 2 (within 0.2)."""
    studies, solutions = refinement_study(tube_at(0.05), ConductanceWall(3 * D / R, 0.0), 16, 16,
                                          direction=direction)
    order = studies["outlet_mixing_cup"].apparent_order
    assert_check_and_injection(within(2.0, 0.0, atol=0.2), order, 0.25)
    cells = [s.cells for s in solutions]
    moving = 0 if direction == "r" else 1
    assert [c[moving] for c in cells] == [64, 32, 16]
    assert len({c[1 - moving] for c in cells}) == 1


def test_first_order_scheme_fails_the_order_check():
    """Plain implicit Euler in z (first order) is seen as such: the check of order 2 that the
    scheme passes refuses it."""
    studies, _ = refinement_study(tube_at(0.05), ConductanceWall(3 * D / R, 0.0), 16, 16,
                                  direction="z", scheme="implicit_euler")
    order = studies["outlet_mixing_cup"].apparent_order
    assert abs(order - 1.0) < 0.2
    assert not within(2.0, 0.0, atol=0.2)(order)


def test_function_wall_reproduces_the_conductance_wall():
    k, outside = 2 * D / R, 0.3
    tube = tube_at(0.02)
    linear = march(tube, ConductanceWall(k, outside), 24, 24)
    general = march(tube, FunctionWall(lambda c: (k * (c - outside), k)), 24, 24)
    assert_check_and_injection(within(linear.wall_flux, 1e-11), general.wall_flux, 1e-8)
    assert_check_and_injection(within(linear.mixing_cup, 1e-12), general.mixing_cup, 1e-8)


def test_nonlinear_wall_law_is_met_at_every_position():
    """Michaelis-Menten uptake at the wall: after Newton the returned flux is the law at the
    returned wall concentration, at every node (each node's implicit steps combine linearly, so
    the law is met to second order in the step at the extrapolated node; on the half-step
    solutions it is met to the Newton tolerance, checked on the implicit Euler scheme)."""
    vmax, km = 4e-7, 0.2

    def law(c):
        return vmax * c / (km + c), vmax * km / (km + c) ** 2

    solution = march(tube_at(0.05), FunctionWall(law), 32, 32, scheme="implicit_euler")
    expected = np.array([law(c)[0] for c in solution.wall])
    assert_check_and_injection(within(expected, 1e-11), solution.wall_flux, 1e-8)
    assert solution.diagnostics["newton_iterations_max"] >= 2  # it was nonlinear
    assert np.all(np.diff(solution.mixing_cup) < 0)
    second = march(tube_at(0.05), FunctionWall(law), 32, 32)
    expected = np.array([law(c)[0] for c in second.wall])
    assert np.max(np.abs(second.wall_flux / expected - 1)) < 1e-4


def test_safeguarded_newton_with_a_poor_derivative():
    """A saturating law clamped at c = 0 that reports a wrong slope there: plain Newton creeps
    (each step ~1 % of the distance, found while writing this test); the safeguarded iteration
    bisects and meets the law at every node of the first-order scheme."""
    vmax, km = 1.0e-3, 0.04

    def law(c):
        clamped = max(c, 0.0)
        return vmax * clamped / (km + clamped), vmax * km / (km + clamped) ** 2

    tube = Tube(1e-5, 0.0831, 7.18e-12, 1.1e-10, 1.95)
    solution = march(tube, FunctionWall(law), 24, 24, scheme="implicit_euler")
    expected = np.array([law(c)[0] for c in solution.wall])
    assert_check_and_injection(within(expected, 1e-10, atol=1e-14 * vmax), solution.wall_flux,
                               1e-6)


def test_uniform_flux_wall_recovers_its_wall_concentration():
    """With a uniform flux the wall value is the half-cell reconstruction; the flux returned is
    the one imposed at every node."""
    solution = march(tube_at(0.05), UniformFluxWall(3e-7), 16, 16)
    assert_check_and_injection(within(3e-7, 1e-12), solution.wall_flux, 1e-10)
    assert np.all(solution.wall < solution.mixing_cup + 1e-15)


def test_wall_law_without_a_solution_is_reported():
    with pytest.raises(LumenInputError, match="wall"):
        march(tube_at(0.01), FunctionWall(lambda c: (math.nan, 0.0)), 8, 4)


@pytest.mark.parametrize("call, field", [
    (lambda: Tube(-1e-4, 1.0, F, D, 1.0), "radius"),
    (lambda: Tube(R, 0.0, F, D, 1.0), "length"),
    (lambda: Tube(R, 1.0, math.inf, D, 1.0), "flow_rate"),
    (lambda: Tube(R, 1.0, F, D, math.nan), "inlet"),
    (lambda: ConductanceWall(-1.0, 0.0), "conductance"),
    (lambda: FixedWall(math.inf), "value"),
    (lambda: UniformFluxWall(math.nan), "flux_density"),
    (lambda: march(tube_at(0.01), FixedWall(0.0), 1, 4), "radial_cells"),
    (lambda: march(tube_at(0.01), FixedWall(0.0), 8, 0), "axial_steps"),
    (lambda: march(tube_at(0.01), FixedWall(0.0), 8, 4, grading=0.5), "grading"),
    (lambda: march(tube_at(0.01), FixedWall(0.0), 8, 4, scheme="euler"), "scheme"),
    (lambda: refinement_study(tube_at(0.01), FixedWall(0.0), 8, 4, direction="x"), "direction"),
    (lambda: march(tube_at(0.01), FixedWall(0.0), 8, 4).quantity("peak"), "quantity"),
])
def test_bad_input_names_the_field(call, field):
    with pytest.raises(LumenInputError, match=field):
        call()


def test_balance_check_sees_weights_that_miss_the_flow_rate(monkeypatch):
    """The property test's balance (``balance_closes`` in tests/lumen_checks.py) takes the
    tube's F at the ends: midpoint-rule cell weights (u at the centre times r dr), which miss the
    Poiseuille integral by O(dr^2), make it fail, while the exact weights pass."""
    tube, wall = tube_at(0.05), ConductanceWall(2 * D / R, 0.0)
    good = march(tube, wall, 24, 24)
    assert balance_closes(tube, good.mixing_cup[-1], good.through_wall[-1])

    def midpoint_weights(radius, cells, mean_velocity):
        faces = np.linspace(0.0, radius, cells + 1)
        centres = 0.5 * (faces[1:] + faces[:-1])
        u = 2 * mean_velocity * (1 - centres**2 / radius**2)
        return faces, u * centres * np.diff(faces)

    monkeypatch.setattr(marching, "_cell_weights", midpoint_weights)
    bad = march(tube, wall, 24, 24)
    assert abs(bad.mass_balance_residual) < 1e-12  # conservative in its own weights ...
    assert not balance_closes(tube, bad.mixing_cup[-1], bad.through_wall[-1])  # ... not in F
