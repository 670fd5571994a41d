"""Per-layer closed-form bases, the Thiele modulus and the effectiveness factors."""

import math

import mpmath
import numpy as np
import pytest
from numpy.testing import assert_allclose

from worker.engine.basis_functions import LayerBasis
from worker.engine.graded_quadrature import graded_gauss_rule
from worker.engine.model import Boundary, Layer, Problem, Reaction
from worker.engine.reaction_measures import effectiveness_factor, thiele_modulus

LAYOUTS = [  # (exponent, a, b, solid)
    (0, 0.2e-3, 1.2e-3, False), (1, 0.2e-3, 1.2e-3, False), (2, 0.2e-3, 1.2e-3, False),
    (1, 0.0, 1.0e-3, True), (2, 0.0, 1.0e-3, True),
]


@pytest.mark.parametrize("exponent, a, b, solid", LAYOUTS)
@pytest.mark.parametrize("thiele", [0.0, 0.4, 1.0, 3.0, 40.0])
@pytest.mark.parametrize("zero_order", [0.0, 0.7])
def test_basis_solves_the_layer_equation(exponent, a, b, solid, thiele, zero_order):
    """(1/r^n)(r^n D g')' = k g for both homogeneous functions and (1/r^n)(r^n D P')' = Q for
    the particular one, checked by central differences of the returned derivative
    (fourth-order accurate)."""
    d = 1.3e-9
    k = (thiele / (b - a)) ** 2 * d
    basis = LayerBasis(exponent, a, b, d, rate_constant=k, zero_order_rate=zero_order, solid=solid)
    r = np.linspace(a + 0.1 * (b - a), b - 0.1 * (b - a), 7)
    h = 1e-4 * (b - a)
    stencil = [r - 2 * h, r - h, r + h, r + 2 * h]
    parts = [basis.evaluate(x) for x in stencil]
    here = basis.evaluate(r)
    for index, rate, source in ((0, k, 0.0), (1, k, 0.0), (2, 0.0, zero_order / d)):
        flux_like = [x**exponent * p[index + 3] for x, p in zip(stencil, parts, strict=True)]
        divergence = (flux_like[0] - 8 * flux_like[1] + 8 * flux_like[2] - flux_like[3]) / (12 * h)
        lhs = divergence / r**exponent
        rhs = rate / d * here[index] + source
        scale = np.max(np.abs(rhs)) + np.max(np.abs(here[index + 3])) / (b - a) + 1e-30
        assert_allclose(lhs, rhs, atol=1e-7 * scale)


@pytest.mark.parametrize("exponent, a, b, solid", LAYOUTS)
@pytest.mark.parametrize("thiele", [0.0, 0.4, 1.0, 3.0, 40.0, 3000.0])
@pytest.mark.parametrize("zero_order", [0.0, 0.7])
def test_a_single_position_gives_the_values_it_has_in_an_array(exponent, a, b, solid, thiele,
                                                               zero_order):
    """The closed-form system evaluates each edge alone (scalar arithmetic, ``edge_values``): the
    values must be those of the same position evaluated in an array, bit for bit."""
    d = 1.3e-9
    k = (thiele / (b - a)) ** 2 * d
    basis = LayerBasis(exponent, a, b, d, rate_constant=k, zero_order_rate=zero_order, solid=solid)
    r = np.concatenate(([a, b], np.linspace(a, b, 9)[1:-1]))
    together = basis.evaluate(r)
    for j, position in enumerate(r.tolist()):
        alone = basis.evaluate(position)
        for field, value in zip(together, alone, strict=True):
            assert np.shape(value) == ()
            assert np.array_equal(field[j], value, equal_nan=True)
        # edge_values (what the closed-form system reads at the edges) gives the same floats
        for field, value in zip(together, basis.edge_values(position), strict=True):
            assert type(value) is float
            assert np.array_equal(field[j], value, equal_nan=True)


@pytest.mark.parametrize("exponent, a, b, solid", LAYOUTS)
@pytest.mark.parametrize("thiele", [0.0, 1.0, 40.0])
@pytest.mark.parametrize("zero_order", [0.0, 0.7])
@pytest.mark.parametrize("c1, c2", [(0.3, -1.7), (-0.25, 0.25), (2.0, 0.0)])
def test_combination_is_the_combination_of_the_evaluated_functions(exponent, a, b, solid, thiele,
                                                                   zero_order, c1, c2):
    """``combination`` (with its shortcut for layers without reaction) gives K (c1 g1 + c2 g2) + P
    and its derivative exactly as formed from ``evaluate``, signs of zeros included."""
    d = 1.3e-9
    k = (thiele / (b - a)) ** 2 * d
    basis = LayerBasis(exponent, a, b, d, rate_constant=k, zero_order_rate=zero_order, solid=solid)
    r = np.linspace(a, b, 11)
    g1, g2, part, dg1, dg2, dpart = basis.evaluate(r)
    partition = 1.7
    expected = (partition * (c1 * g1 + c2 * g2) + part, partition * (c1 * dg1 + c2 * dg2) + dpart)
    for got, want in zip(basis.combination(r, c1, c2, partition), expected, strict=True):
        assert np.array_equal(got, want)
        assert np.array_equal(np.signbit(got), np.signbit(want))


@pytest.mark.parametrize("exponent, a, b, solid", LAYOUTS)
@pytest.mark.parametrize("thiele", [0.0, 0.5, 2.0, 3000.0])
def test_basis_edge_values(exponent, a, b, solid, thiele):
    """g2(a) = 0, g2(b) = 1; g1(a) = 1 with g1'(a) = 0 (m L <= 1) or g1(b) = 0 (m L > 1);
    the particular solution vanishes at both edges (solid: at the outer edge)."""
    d = 1e-9
    k = (thiele / (b - a)) ** 2 * d
    basis = LayerBasis(exponent, a, b, d, rate_constant=k, zero_order_rate=2.0, solid=solid)
    g1, g2, part, dg1, dg2, dpart = basis.evaluate(np.array([a, b]))
    assert np.all(np.isfinite([g1, g2, part, dg1, dg2, dpart]))
    assert_allclose(g2[1], 1.0, rtol=1e-14)
    assert_allclose(part[1], 0.0, atol=1e-20)
    if solid:
        assert_allclose(dg2[0], 0.0, atol=1e-20)
        return
    assert_allclose(g2[0], 0.0, atol=1e-15)
    assert_allclose(part[0], 0.0, atol=1e-20)
    assert_allclose(g1[0], 1.0, rtol=1e-14)
    if thiele > 1.0:
        assert_allclose(g1[1], 0.0, atol=1e-15)
    else:
        assert_allclose(dg1[0], 0.0, atol=1e-9 / (b - a))


@pytest.mark.parametrize("phi", [0.0, 1e-4, 0.05, 0.0999, 0.1, 0.5, 2.0, 30.0, 700.0, 1e4])
@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
def test_effectiveness_factor_against_mpmath(geometry, phi):
    """Thiele 1939 (Ind. Eng. Chem. 31, 916); Aris 1975: tanh(phi)/phi, 2 I1/(phi I0),
    (3/phi^2)(phi coth phi - 1), evaluated with mpmath at 50 digits (limit 1 at phi = 0)."""
    with mpmath.workdps(50):
        p = mpmath.mpf(phi)
        if phi == 0.0:
            expected = 1.0
        elif geometry == "slab":
            expected = float(mpmath.tanh(p) / p)
        elif geometry == "cylinder":
            expected = float(2 * mpmath.besseli(1, p) / (p * mpmath.besseli(0, p)))
        else:
            expected = float(3 / p**2 * (p * mpmath.coth(p) - 1))
    assert_allclose(effectiveness_factor(geometry, phi), expected, rtol=2e-15)


def _mpmath_effectiveness(geometry, phi):
    """Thiele 1939; Aris 1975 (as above), at 50 digits."""
    with mpmath.workdps(50):
        p = mpmath.mpf(phi)
        if geometry == "slab":
            return float(mpmath.tanh(p) / p)
        if geometry == "cylinder":
            return float(2 * mpmath.besseli(1, p) / (p * mpmath.besseli(0, p)))
        return float(3 / p**2 * (p * mpmath.coth(p) - 1))


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
def test_effectiveness_factor_of_an_array_is_taken_value_by_value(geometry):
    # Below and above the sphere's series limit (phi = 1) in one array.
    phis = np.array([0.05, 0.5, 0.9, 2.0, 30.0])
    factors = effectiveness_factor(geometry, phis)
    assert factors.dtype == np.float64 and factors.shape == phis.shape
    assert_allclose(factors, [_mpmath_effectiveness(geometry, p) for p in phis], rtol=2e-15)


def test_effectiveness_factor_rejects_bad_input():
    with pytest.raises(ValueError, match="phi"):
        effectiveness_factor("slab", -1.0)
    for not_finite in (math.nan, math.inf, [0.5, math.nan]):
        with pytest.raises(ValueError, match="phi"):
            effectiveness_factor("sphere", not_finite)
    with pytest.raises(ValueError, match="geometry"):
        effectiveness_factor("cone", 1.0)


def test_thiele_modulus_definitions():
    """Thiele modulus (E.W. Thiele, Ind. Eng. Chem. 31 (1939) 916-920; R. Aris, The Mathematical
    Theory of Diffusion and Reaction in Permeable Catalysts, 1975): thickness * sqrt(k/D),
    k = rate_constant or vmax/km; zero order
    thickness * sqrt(Q/(D Cs)) with Cs the largest surface concentration; None without
    reaction."""
    layers = (Layer("core", 2e-3, 1e-9, reaction=Reaction("first_order", rate_constant=4e-3)),
              Layer("mm", 1e-3, 2e-9, partition=2.0,
                    reaction=Reaction("michaelis_menten", vmax=1e-2, km=5e-3)),
              Layer("zero", 5e-4, 1e-9, partition=0.5, reaction=Reaction("zero_order", rate=3e-3)),
              Layer("inert", 1e-4, 1e-9))
    problem = Problem(geometry="sphere", inner=0.0, layers=layers,
                      inner_boundary=Boundary("symmetry"),
                      outer_boundary=Boundary("concentration", value=0.4))
    assert_allclose(thiele_modulus(layers[0], problem), 2e-3 * math.sqrt(4e-3 / 1e-9))
    assert_allclose(thiele_modulus(layers[1], problem), 1e-3 * math.sqrt(2.0 / 2e-9))
    # Outer face imposes C = 1.0 * 0.4 on the inert layer, i.e. C/K = 0.4; zero layer K = 0.5.
    assert_allclose(thiele_modulus(layers[2], problem), 5e-4 * math.sqrt(3e-3 / (1e-9 * 0.2)))
    assert thiele_modulus(layers[3], problem) is None
    sealed = Problem(geometry="slab", inner=0.0, layers=(layers[2],),
                     inner_boundary=Boundary("symmetry"),
                     outer_boundary=Boundary("flux", value=1e-6))
    assert thiele_modulus(layers[2], sealed) is None


def test_zero_order_thiele_modulus_takes_each_face_at_its_own_partition():
    """phi = thickness * sqrt(Q / (D * Cs)) (definition above; Hill 1928) with Cs the largest
    concentration a face imposes: K_face * C_fluid at a concentration face, carried into the
    layer as C/K. A sealed film (coefficient 0) imposes nothing."""
    layer = Layer("gel", 1e-3, 1e-9, partition=0.5, reaction=Reaction("zero_order", rate=2e-3))
    # Inner face: K_face 0.25 over a fluid at 2.0 -> C = 0.5 in the layer; outer face: the
    # layer's own K 0.5 over a fluid at 0.8 -> C = 0.4. Cs = 0.5, set by the inner face.
    problem = Problem(geometry="slab", inner=0.0, layers=(layer,),
                      inner_boundary=Boundary("concentration", value=2.0, partition=0.25),
                      outer_boundary=Boundary("concentration", value=0.8))
    assert_allclose(thiele_modulus(layer, problem), 1e-3 * math.sqrt(2e-3 / (1e-9 * 0.5)),
                    rtol=1e-14)
    # The same with the roles swapped: Cs = 0.5 from the outer face.
    swapped = Problem(geometry="slab", inner=0.0, layers=(layer,),
                      inner_boundary=Boundary("concentration", value=0.8),
                      outer_boundary=Boundary("concentration", value=2.0, partition=0.25))
    assert_allclose(thiele_modulus(layer, swapped), 1e-3 * math.sqrt(2e-3 / (1e-9 * 0.5)),
                    rtol=1e-14)
    # A sealed film over a richer bulk imposes nothing: Cs = 0.4 from the concentration face.
    sealed_film = Problem(geometry="slab", inner=0.0, layers=(layer,),
                          inner_boundary=Boundary("mass_transfer", coefficient=0.0, bulk=5.0),
                          outer_boundary=Boundary("concentration", value=0.8))
    assert_allclose(thiele_modulus(layer, sealed_film), 1e-3 * math.sqrt(2e-3 / (1e-9 * 0.4)),
                    rtol=1e-14)


@pytest.mark.parametrize("width", [None, 1e-2, 1e-5, 1e-9])
def test_graded_rule_integrates_boundary_layers(width):
    """Integral of exp(-(r - a)/w) + exp(-(b - r)/w) + r^2 ln r over [a, b] in closed form.
    Nodes are absolute positions, so (b - r)/w carries a rounding error of about eps b / w:
    the tolerance allows for that conditioning of the integrand, not of the rule."""
    a, b = 1e-4, 2e-3
    nodes, weights = graded_gauss_rule(a, b, width)
    poly = np.sum(weights * nodes**2 * np.log(nodes))
    exact_poly = (b**3 * (3 * math.log(b) - 1) - a**3 * (3 * math.log(a) - 1)) / 9
    assert_allclose(poly, exact_poly, rtol=1e-13)
    if width is not None:
        layers = np.sum(weights * (np.exp(-(nodes - a) / width) + np.exp(-(b - nodes) / width)))
        conditioning = 4 * np.finfo(float).eps * b / width
        assert_allclose(layers, 2 * width * -math.expm1(-(b - a) / width),
                        rtol=1e-13 + conditioning)
