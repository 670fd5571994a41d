"""Wall laws from the layers around the lumen (worker.engine.lumen.layer_walls).

Sources: the resistance of a cylindrical wall ln(r_o/r_i) / (2 pi D K) per unit length (J.
Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, eq. 5.5; ht.R_cylinder by analogy, in
test_graetz.py); a first-order annulus c = A I0(m r) + B K0(m r), m = sqrt(k/D) (Crank 1975,
ch. 5 and H.S. Carslaw, J.C. Jaeger, *Conduction of Heat in Solids*, 1959, §7.2, modified
Bessel functions), evaluated here with mpmath; the Graetz series with a Robin wall (Shah &
London 1978, ch. 5); the lumen's mass balance F (c_in - c_out) = what crossed the wall = what
the layers consumed plus what left through their outer face (conservation; common practice).
Layer and tube dimensions are invented scenario values, not check values.
"""

from __future__ import annotations

import dataclasses
import math

import mpmath
import numpy as np
import pytest

from tests.lumen_checks import assert_check_and_injection, within
from worker.engine.convergence import grid_study
from worker.engine.lumen.graetz import graetz_series, layered_wall_conductance
from worker.engine.lumen.inputs import LumenInputError
from worker.engine.lumen.layer_walls import layer_wall_law, linear_layer_wall, solve_layers_at
from worker.engine.lumen.marching import Tube, march
from worker.engine.model import Boundary, Layer, Problem, Reaction

R_LUMEN = 100e-6  # m (invented)
D_FLUID = 1e-9    # m^2/s (invented)


def test_reaction_free_layers_give_the_series_resistance():
    layers = [(20e-6, 1e-10, 0.5), (80e-6, 4e-10, 1.2)]
    problem = Problem("cylinder", R_LUMEN,
                      tuple(Layer(f"layer {i}", t, d, partition=k)
                            for i, (t, d, k) in enumerate(layers)),
                      Boundary("concentration", 0.0), Boundary("concentration", 0.3))
    wall = linear_layer_wall(problem)
    assert_check_and_injection(within(layered_wall_conductance(R_LUMEN, layers), 1e-10),
                               wall.conductance, 1e-8)
    # the outer fluid at 0.3 seen from the lumen (C/K continuous through the layers)
    assert_check_and_injection(within(0.3, 1e-10), wall.outside, 1e-8)


def _first_order_annulus(k=2e-2, d=4e-10, thickness=80e-6):
    return Problem("cylinder", R_LUMEN,
                   (Layer("tissue", thickness, d, reaction=Reaction("first_order",
                                                                   rate_constant=k)),),
                   Boundary("concentration", 0.0), Boundary("flux", 0.0))


def _bessel_conductance(k=2e-2, d=4e-10, thickness=80e-6) -> float:
    """-D c'(r_i) for c(r_i) = 1 and c'(r_o) = 0 with c = A I0(m r) + B K0(m r) (mpmath)."""
    with mpmath.workdps(30):
        m = mpmath.sqrt(mpmath.mpf(k) / d)
        ri, ro = mpmath.mpf(R_LUMEN), mpmath.mpf(R_LUMEN + thickness)
        # c'(r) = m (A I1(m r) - B K1(m r)); c'(ro) = 0 gives B = A I1(m ro) / K1(m ro)
        ratio = mpmath.besseli(1, m * ro) / mpmath.besselk(1, m * ro)
        a = 1 / (mpmath.besseli(0, m * ri) + ratio * mpmath.besselk(0, m * ri))
        b = a * ratio
        slope = m * (a * mpmath.besseli(1, m * ri) - b * mpmath.besselk(1, m * ri))
        return float(-d * slope)


def test_first_order_layer_conductance_against_bessel_functions():
    wall = linear_layer_wall(_first_order_annulus())
    assert_check_and_injection(within(_bessel_conductance(), 1e-9), wall.conductance, 1e-7)
    assert abs(wall.outside) < 1e-12  # no source outside: the wall takes solute towards zero


def test_graetz_series_with_the_layers_against_marching_on_the_layer_solves():
    """Linear kinetics, two routes: the Graetz series with Bi = k R / D from the closed-form
    conductance, and the marching solver calling the layers' steady solve at every step
    (layer_wall_law, derivative by differences). Outlet mixing cup at z* = 0.05: the series
    inside the marching solver's GCI band of three meshes (16, 32, 64)."""
    problem = _first_order_annulus()
    wall = linear_layer_wall(problem)
    biot = wall.conductance * R_LUMEN / D_FLUID
    flow = 1e-10
    length = 0.05 * 4 * flow / (math.pi * D_FLUID)
    tube = Tube(R_LUMEN, length, flow, D_FLUID, 1.0)
    reference = float(graetz_series(60, biot=biot).mixing_cup(0.05)[0])
    law = layer_wall_law(problem)
    values = [march(tube, law, n, n).mixing_cup[-1] for n in (64, 32, 16)]
    study = grid_study(values, ratios=(2, 2))
    assert abs(study.apparent_order - 2.0) < 0.25
    check = within(reference, study.gci_fine)
    assert_check_and_injection(check, study.fine, 3 * study.gci_fine)


def test_mass_balance_from_the_flow_to_the_layers():
    """Michaelis-Menten layer: F (c_in - c_out) equals the amount through the wall (the
    scheme's own integral, to round-off) and, within the trapezoid rule's O(h^2) on 64 steps
    (1e-4), the integral along the lumen of what the layers consume plus what leaves their outer
    face, re-solved at each node's wall concentration."""
    problem = Problem("cylinder", R_LUMEN,
                      (Layer("tissue", 80e-6, 4e-10, partition=0.8,
                             reaction=Reaction("michaelis_menten", vmax=1e-3, km=0.05)),),
                      Boundary("concentration", 0.0),
                      Boundary("mass_transfer", coefficient=1e-6, bulk=0.02))
    tube = Tube(R_LUMEN, 0.02, 1e-10, D_FLUID, 0.2)
    solution = march(tube, layer_wall_law(problem, scale=0.2), 32, 64)
    entering_minus_leaving = tube.flow_rate * (tube.inlet - solution.mixing_cup[-1])
    assert_check_and_injection(within(entering_minus_leaving, 1e-10),
                               solution.through_wall[-1], 1e-8)
    per_length = []
    for c_wall in solution.wall:
        layers = solve_layers_at(problem, c_wall)
        outer = problem.outer
        per_length.append(2 * math.pi * (layers.consumption + outer * layers.flux_outer))
    integral = float(np.trapezoid(per_length, solution.position))
    assert_check_and_injection(within(entering_minus_leaving, 1e-4), integral, 1e-3)


@pytest.mark.parametrize("change, field", [
    (dict(geometry="slab", inner=0.0), "geometry"),
    (dict(inner=0.0), "inner"),
    (dict(inner_boundary=Boundary("flux", 0.0)), "inner_boundary.kind"),
])
def test_bad_problems_are_refused_naming_the_field(change, field):
    problem = dataclasses.replace(_first_order_annulus(), **change)
    with pytest.raises(LumenInputError, match=field):
        linear_layer_wall(problem)


def test_nonlinear_layers_are_refused_by_the_conductance_wall():
    problem = Problem("cylinder", R_LUMEN,
                      (Layer("t", 80e-6, 4e-10, reaction=Reaction("michaelis_menten", vmax=1e-3,
                                                                  km=0.05)),),
                      Boundary("concentration", 0.0), Boundary("flux", 0.0))
    with pytest.raises(LumenInputError, match="linear kinetics"):
        linear_layer_wall(problem)
