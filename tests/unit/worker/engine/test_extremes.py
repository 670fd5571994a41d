"""The true extremes of a continuous solution (``worker.engine.extremes``), the second route of
the totals (``steady_totals``) and the dimensionless numbers by their definitions
(``dimensionless``), each against values known in closed form.

Check values: the minimum of A e^(px) + B e^(-px) is 2 sqrt(A B) at x = ln(B/A) / (2p)
(elementary calculus); a parabola's vertex; the shell measures 1, 2 pi, 4 pi per unit size
(Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, §5.2 and §6.2); Thiele modulus
L sqrt(k/D) (Thiele 1939) and Biot number h L / (K D) (Bird, Stewart & Lightfoot 2002, §10.6).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from worker.engine import dimensionless, steady_totals
from worker.engine.extremes import Extreme, layer_extremes, true_extreme
from worker.engine.model import Boundary, Layer, Problem, Reaction

A, B, P = 0.2, 3.0, 6.0


def _exponential(r, layer=None):
    r = np.asarray(r, dtype=float)
    return A * np.exp(P * r) + B * np.exp(-P * r)


def _parabola(r, layer=None):
    r = np.asarray(r, dtype=float)
    return 2.0 - 5.0 * (r - 0.3137) ** 2


def _samples(function, points=41):
    r = np.linspace(0.0, 1.0, points)
    return [r], [function(r)]


# dC/dr of A e^(pr) + B e^(-pr) at r = 0 and r = 1 (the end slopes the steady check passes)
EXPONENTIAL_SLOPES = (P * (A - B), P * (A * math.exp(P) - B * math.exp(-P)))


@pytest.mark.parametrize("slopes", [None, [EXPONENTIAL_SLOPES]])
def test_interior_minimum_is_the_closed_form_minimum(slopes):
    positions, values = _samples(_exponential)
    found = layer_extremes(_exponential, positions, values, lowest=True, end_slopes=slopes)[0]
    assert found.value == pytest.approx(2.0 * math.sqrt(A * B), rel=1e-12)
    assert found.position == pytest.approx(math.log(B / A) / (2 * P), abs=1e-5)
    assert found.layer == 0
    assert min(values[0]) - found.value > 1e-6  # the samples alone miss it


@pytest.mark.parametrize("slopes", [None, [(10.0 * 0.3137, -10.0 * (1.0 - 0.3137))]])
def test_interior_maximum_is_the_vertex(slopes):
    positions, values = _samples(_parabola)
    found = layer_extremes(_parabola, positions, values, lowest=False, end_slopes=slopes)[0]
    assert found.value == pytest.approx(2.0, rel=1e-13)
    assert found.position == pytest.approx(0.3137, abs=1e-6)
    assert max(values[0]) < 2.0 - 1e-6


@pytest.mark.parametrize("slopes", [None, [EXPONENTIAL_SLOPES]])
def test_maximum_of_the_exponential_is_at_its_higher_end(slopes):
    positions, values = _samples(_exponential)
    found = layer_extremes(_exponential, positions, values, lowest=False, end_slopes=slopes)[0]
    assert found.value == pytest.approx(A * math.exp(P) + B * math.exp(-P), rel=1e-14)
    assert found.position == 1.0


@pytest.mark.parametrize("slopes", [None, (-1.0, -1.0)])
def test_an_extreme_at_an_end_with_the_profile_rising_into_the_layer_is_the_end(slopes):
    def falling(r, layer=None):
        return 1.0 - np.asarray(r, dtype=float)

    positions, values = _samples(falling)
    lowest = layer_extremes(falling, positions, values, lowest=True,
                            end_slopes=None if slopes is None else [slopes])[0]
    highest = layer_extremes(falling, positions, values, lowest=False,
                             end_slopes=None if slopes is None else [slopes])[0]
    assert (lowest.position, lowest.value) == (1.0, 0.0)
    assert (highest.position, highest.value) == (0.0, 1.0)


def test_a_minimum_just_inside_an_end_is_found_when_the_slope_points_out():
    def dip(r, layer=None):
        return (np.asarray(r, dtype=float) - 0.01) ** 2

    positions, values = _samples(dip)  # spacing 0.025: the sampled minimum is r = 0
    found = layer_extremes(dip, positions, values, lowest=True,
                           end_slopes=[(-0.02, 1.98)])[0]
    assert found.value == pytest.approx(0.0, abs=1e-14)
    assert found.position == pytest.approx(0.01, abs=1e-7)


def test_the_extreme_of_the_body_is_the_extreme_of_its_layers():
    extremes = [Extreme(0.5, 0.1, 0), Extreme(0.2, 0.3, 1), Extreme(0.9, 0.5, 2)]
    assert true_extreme(extremes, lowest=True).layer == 1
    assert true_extreme(extremes, lowest=False).layer == 2


def test_each_layer_is_read_in_its_own_layer():
    def two_layers(r, layer=None):
        return np.asarray(r, dtype=float) * (1.0 if layer == 0 else -1.0)

    r0, r1 = np.linspace(0.0, 1.0, 11), np.linspace(1.0, 2.0, 11)
    found = layer_extremes(two_layers, [r0, r1], [r0, -r1], lowest=True)
    assert [e.value for e in found] == [0.0, -2.0]


# --- the totals' second route ----------------------------------------------------------------

@pytest.mark.parametrize(("geometry", "factor"), [("slab", 1.0), ("cylinder", 2 * math.pi),
                                                  ("sphere", 4 * math.pi)])
def test_shell_factor_is_the_measure_of_a_unit_shell(geometry, factor):
    assert steady_totals.shell_factor(geometry) == pytest.approx(factor, rel=1e-15)


def test_shell_factor_refuses_an_unknown_geometry():
    with pytest.raises(ValueError, match="geometry"):
        steady_totals.shell_factor("torus")


def _problem(geometry: str, **kwargs) -> Problem:
    return Problem(geometry=geometry, inner=2e-3,
                   layers=(Layer("wall", 1e-3, 1e-9, 2.0, Reaction("first_order",
                                                                   rate_constant=0.1)),),
                   inner_boundary=Boundary("concentration", value=1.0),
                   outer_boundary=Boundary("mass_transfer", coefficient=2e-5, bulk=0.0,
                                           partition=0.5), **kwargs)


def test_cylinder_totals_by_the_second_route():
    totals = steady_totals.totals_by_second_route(_problem("cylinder", length=0.05),
                                                  3.0, 1.5, 7.0)
    assert totals["rate_per_length_inner"] == pytest.approx(2 * math.pi * 2e-3 * 3.0)
    assert totals["rate_per_length_outer"] == pytest.approx(2 * math.pi * 3e-3 * 1.5)
    assert totals["consumption_per_length"] == pytest.approx(2 * math.pi * 7.0)
    assert totals["rate_outer"] == pytest.approx(0.05 * 2 * math.pi * 3e-3 * 1.5)
    assert totals["consumption"] == pytest.approx(0.05 * 2 * math.pi * 7.0)


def test_sphere_and_slab_totals_by_the_second_route():
    sphere = steady_totals.totals_by_second_route(_problem("sphere"), 3.0, 1.5, 7.0)
    assert sphere["rate_inner"] == pytest.approx(4 * math.pi * 2e-3**2 * 3.0)
    assert sphere["rate_outer"] == pytest.approx(4 * math.pi * 3e-3**2 * 1.5)
    assert sphere["consumption"] == pytest.approx(4 * math.pi * 7.0)
    slab = steady_totals.totals_by_second_route(_problem("slab", area=4e-4), 3.0, 1.5, 7.0)
    assert slab["consumption_per_area"] == 7.0
    assert slab["rate_inner"] == pytest.approx(4e-4 * 3.0)
    assert "rate_per_length_inner" not in slab
    no_size = steady_totals.totals_by_second_route(_problem("cylinder"), 3.0, 1.5, 7.0)
    assert "rate_inner" not in no_size and "consumption_per_length" in no_size


# --- Thiele and Biot by their definitions ----------------------------------------------------

def test_thiele_and_biot_by_their_definitions():
    problem = _problem("slab")
    assert dimensionless.thiele_by_definition(problem, 0) == pytest.approx(
        1e-3 * math.sqrt(0.1 / 1e-9), rel=1e-14)
    # the face's own partition 0.5, not the layer's 2.0
    assert dimensionless.biot_by_definition(problem, "outer") == pytest.approx(
        2e-5 * 1e-3 / (0.5 * 1e-9), rel=1e-14)
    assert dimensionless.biot_by_definition(problem, "inner") is None


def test_michaelis_menten_and_zero_order_thiele_moduli():
    mm = Problem("slab", 0.0, (Layer("cells", 2e-4, 2e-9, 1.0,
                                     Reaction("michaelis_menten", vmax=0.02, km=0.01)),),
                 Boundary("symmetry"), Boundary("concentration", value=0.2))
    assert dimensionless.thiele_by_definition(mm, 0) == pytest.approx(
        2e-4 * math.sqrt(0.02 / 0.01 / 2e-9), rel=1e-14)
    zero = Problem("slab", 0.0, (Layer("a", 1e-4, 1e-9, 3.0),
                                 Layer("b", 2e-4, 2e-9, 0.5, Reaction("zero_order", rate=0.01))),
                   Boundary("concentration", value=0.4, partition=6.0), Boundary("symmetry"))
    # the level in layer b: K_b * (K_face C / K_a) = 0.5 * (6 * 0.4 / 3) = 0.4
    assert dimensionless.thiele_by_definition(zero, 1) == pytest.approx(
        2e-4 * math.sqrt(0.01 / 0.4 / 2e-9), rel=1e-14)
    assert dimensionless.thiele_by_definition(zero, 0) is None
    sealed = Problem("slab", 0.0, zero.layers, Boundary("symmetry"),
                     Boundary("mass_transfer", coefficient=0.0, bulk=1.0))
    assert dimensionless.thiele_by_definition(sealed, 1) is None  # no face imposes a level
