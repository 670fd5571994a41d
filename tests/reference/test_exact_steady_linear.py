"""Exact steady solutions without reaction, with partition jumps, films and multiple layers.

Every check value below comes from a published closed form (source named beside it) or from the
``ht`` library's conduction resistances by the heat-mass analogy, evaluated here independently of
the code under test. Scenario values are invented for these tests.
"""

import math

import ht.conduction
import numpy as np
import pytest
from numpy.testing import assert_allclose

from worker.engine.exact_steady import solve_exact
from worker.engine.model import Boundary, Layer, Problem


def make(geometry, inner, layers, inner_boundary, outer_boundary):
    return Problem(geometry=geometry, inner=inner, layers=tuple(layers),
                   inner_boundary=inner_boundary, outer_boundary=outer_boundary)


def conc(value, partition=None):
    return Boundary("concentration", value=value, partition=partition)


def film(coefficient, bulk, partition=None):
    return Boundary("mass_transfer", coefficient=coefficient, bulk=bulk, partition=partition)


# ---------------------------------------------------------------------------------------------
# Single layers, fixed surface concentrations
# ---------------------------------------------------------------------------------------------

def test_plane_sheet_fixed_concentrations():
    """Crank 1975, The Mathematics of Diffusion, ch. 4 (steady state in a plane sheet): C is linear
    between C1 and C2 and the flux is D (C1 - C2) / l."""
    d, x0, thickness, c1, c2 = 3.7e-10, 2e-3, 0.45e-3, 7.5, 1.25
    sol = solve_exact(make("slab", x0, [Layer("sheet", thickness, d)], conc(c1), conc(c2)))
    assert sol.success
    expected_flux = d * (c1 - c2) / thickness
    assert_allclose([sol.flux_inner, sol.flux_outer], expected_flux, rtol=1e-13)
    x = x0 + thickness * np.array([0.0, 0.2, 0.55, 1.0])
    assert_allclose(sol.concentration_at(x), c1 + (c2 - c1) * (x - x0) / thickness, rtol=1e-13)
    assert_allclose(sol.flux_at(x), expected_flux, rtol=1e-13)
    assert sol.consumption == 0.0


def test_hollow_cylinder_fixed_concentrations():
    """Crank 1975, ch. 5 (steady state, hollow cylinder): C = C1 + (C2 - C1) ln(r/r1)/ln(r2/r1),
    rate per unit length 2 pi D (C1 - C2)/ln(r2/r1)."""
    d, r1, r2, c1, c2 = 8.1e-11, 0.35e-3, 1.9e-3, 0.42, 3.3
    sol = solve_exact(make("cylinder", r1, [Layer("tube", r2 - r1, d)], conc(c1), conc(c2)))
    rate = 2 * math.pi * d * (c1 - c2) / math.log(r2 / r1)
    assert_allclose(2 * math.pi * r1 * sol.flux_inner, rate, rtol=1e-13)
    assert_allclose(2 * math.pi * r2 * sol.flux_outer, rate, rtol=1e-13)
    r = np.linspace(r1, r2, 7)
    assert_allclose(sol.concentration_at(r), c1 + (c2 - c1) * np.log(r / r1) / math.log(r2 / r1),
                    rtol=1e-13)


def test_hollow_sphere_fixed_concentrations():
    """Crank 1975, ch. 6 (steady state, hollow sphere): rate 4 pi D (C1 - C2)/(1/r1 - 1/r2),
    C = (r1 C1 (r2 - r) + r2 C2 (r - r1)) / (r (r2 - r1))."""
    d, r1, r2, c1, c2 = 1.3e-9, 0.8e-3, 2.6e-3, 11.0, 0.7
    sol = solve_exact(make("sphere", r1, [Layer("shell", r2 - r1, d)], conc(c1), conc(c2)))
    rate = 4 * math.pi * d * (c1 - c2) / (1 / r1 - 1 / r2)
    assert_allclose(4 * math.pi * r1**2 * sol.flux_inner, rate, rtol=1e-13)
    assert_allclose(4 * math.pi * r2**2 * sol.flux_outer, rate, rtol=1e-13)
    r = np.linspace(r1, r2, 6)
    expected = (r1 * c1 * (r2 - r) + r2 * c2 * (r - r1)) / (r * (r2 - r1))
    assert_allclose(sol.concentration_at(r), expected, rtol=1e-13)


def test_face_partition_multiplies_fluid_concentration():
    """Partition at a face (J. Crank, The Mathematics of Diffusion, 1975, ch. 4): the surface
    concentration is K x C_fluid, so the sheet flux is D (K1 C1 - K2 C2)/l."""
    d, thickness = 2e-10, 1e-4
    sol = solve_exact(make("slab", 0.0, [Layer("m", thickness, d, partition=0.3)],
                           conc(5.0, partition=0.3), conc(1.0, partition=2.0)))
    assert_allclose(sol.flux_inner, d * (0.3 * 5.0 - 2.0 * 1.0) / thickness, rtol=1e-13)
    assert_allclose(sol.concentration_at(np.array([0.0, thickness])), [1.5, 2.0], rtol=1e-13)


# ---------------------------------------------------------------------------------------------
# Composite walls with partition jumps and films: resistances in series
# ---------------------------------------------------------------------------------------------

def test_composite_slab_with_partitions_and_films():
    """Bird, Stewart & Lightfoot 2002, Transport Phenomena §10.6 (composite walls, resistances in
    series) by the heat-mass analogy with C/K continuous: flux =
    (C_bulk,in - C_bulk,out) / (1/h_in + sum L_i/(D_i K_i) + 1/h_out)."""
    layers = [Layer("coat", 20e-6, 4e-11, partition=3.0),
              Layer("matrix", 300e-6, 6e-10, partition=0.4),
              Layer("skin", 50e-6, 1.5e-10, partition=1.7)]
    h_in, h_out, c_in, c_out = 2.5e-6, 8e-6, 9.0, 0.5
    sol = solve_exact(make("slab", -1e-4, layers, film(h_in, c_in), film(h_out, c_out)))
    resistance = 1 / h_in + 1 / h_out + sum(ly.thickness / (ly.diffusivity * ly.partition)
                                             for ly in layers)
    flux = (c_in - c_out) / resistance
    assert_allclose([sol.flux_inner, sol.flux_outer], flux, rtol=1e-12)
    # Interfaces: C_a/K_a = C_b/K_b while C itself jumps (Crank 1975 ch. 4).
    edges = -1e-4 + np.cumsum([0.0] + [ly.thickness for ly in layers])
    for i in (1, 2):
        left = sol.concentration_at(edges[i], layer=i - 1)
        right = sol.concentration_at(edges[i], layer=i)
        assert_allclose(left / layers[i - 1].partition, right / layers[i].partition, rtol=1e-12)
        assert not np.isclose(left, right, rtol=1e-3)
        assert_allclose(sol.flux_at(edges[i], layer=i - 1), sol.flux_at(edges[i], layer=i),
                        rtol=1e-12)
    # Film law at the inner face: flux = h (bulk - C_s/K).
    surface = sol.concentration_at(edges[0])
    assert_allclose(sol.flux_inner, h_in * (c_in - surface / layers[0].partition), rtol=1e-12)


def test_composite_cylinder_matches_ht_resistances():
    """Heat-mass analogy with the ht library (ht.conduction.cylindrical_heat_transfer, its rate Q
    per metre, the only figure of it compared): conductivity k_i = D_i K_i, film coefficients h,
    temperatures = fluid concentrations (Bird, Stewart & Lightfoot 2002 §10.6)."""
    r_in = 0.15e-3
    layers = [Layer("fibre", 40e-6, 1.5e-9, partition=0.8),
              Layer("gel", 250e-6, 2.2e-9, partition=1.3),
              Layer("jacket", 60e-6, 3e-10, partition=0.05)]
    h_in, h_out, c_in, c_out = 4e-5, 1.2e-5, 0.21, 0.02
    sol = solve_exact(make("cylinder", r_in, layers, film(h_in, c_in), film(h_out, c_out)))
    reference = ht.conduction.cylindrical_heat_transfer(
        Ti=c_in, To=c_out, hi=h_in, ho=h_out, Di=2 * r_in, ts=[ly.thickness for ly in layers],
        ks=[ly.diffusivity * ly.partition for ly in layers])
    assert_allclose(2 * math.pi * r_in * sol.flux_inner, reference["Q"], rtol=1e-11)
    assert_allclose(2 * math.pi * sol.flux_outer * (r_in + sum(ly.thickness for ly in layers)),
                    reference["Q"], rtol=1e-11)


def test_composite_cylinder_matches_ht_r_cylinder():
    """ht.conduction.R_cylinder(Di, Do, k, L) = ln(Do/Di)/(2 pi k L) per layer, films
    1/(2 pi r h) (Bird, Stewart & Lightfoot 2002 §10.6), fixed fluid concentrations at both
    faces replaced by a concentration face and a film."""
    r_in = 1.2e-3
    layers = [Layer("a", 0.3e-3, 5e-10, partition=2.0), Layer("b", 1.1e-3, 9e-11, partition=0.6)]
    h_out, c_in, c_out = 3e-6, 4.0, 1.0
    sol = solve_exact(make("cylinder", r_in, layers, conc(c_in), film(h_out, c_out)))
    radii = r_in + np.cumsum([0.0] + [ly.thickness for ly in layers])
    resistance = sum(ht.conduction.R_cylinder(2 * radii[i], 2 * radii[i + 1],
                                              ly.diffusivity * ly.partition, 1.0)
                     for i, ly in enumerate(layers))
    resistance += 1 / (2 * math.pi * radii[-1] * h_out)
    assert_allclose(2 * math.pi * r_in * sol.flux_inner, (c_in - c_out) / resistance, rtol=1e-12)


def test_composite_sphere_resistances():
    """Spherical shells in series (Bird, Stewart & Lightfoot 2002 §10.6 analogue for spheres;
    Crank 1975 ch. 6): resistance (1/r_i - 1/r_{i+1}) / (4 pi D K) per shell, film
    1/(4 pi r^2 h)."""
    r_in = 0.5e-3
    layers = [Layer("core shell", 0.2e-3, 7e-10, partition=1.0),
              Layer("membrane", 15e-6, 2e-12, partition=12.0)]
    h_out, c_in, c_out = 6e-6, 2.0, 0.0
    sol = solve_exact(make("sphere", r_in, layers, conc(c_in), film(h_out, c_out)))
    radii = r_in + np.cumsum([0.0] + [ly.thickness for ly in layers])
    resistance = sum((1 / radii[i] - 1 / radii[i + 1]) / (4 * math.pi * ly.diffusivity
                                                         * ly.partition)
                     for i, ly in enumerate(layers)) + 1 / (4 * math.pi * radii[-1]**2 * h_out)
    assert_allclose(4 * math.pi * r_in**2 * sol.flux_inner, (c_in - c_out) / resistance,
                    rtol=1e-12)


@pytest.mark.parametrize("biot", [1e-3, 0.37, 25.0, 4e4])
def test_slab_film_biot_number(biot):
    """Crank 1975 §4.3.5 (surface evaporation condition) and Incropera & DeWitt, Fundamentals of
    Heat and Mass Transfer (plane wall with convection): steady flux through a sheet with a film
    on one face and a fixed concentration on the other is (C_bulk - C2)/(1/h + L/D); the surface
    concentration is C_bulk - (C_bulk - C2) Bi/(1 + Bi) with the mass Biot number Bi = hL/D."""
    d, thickness, c_bulk, c2 = 1e-9, 2e-4, 3.0, 0.25
    h = biot * d / thickness
    sol = solve_exact(make("slab", 0.0, [Layer("sheet", thickness, d)], conc(c2),
                           film(h, c_bulk)))
    assert_allclose(-sol.flux_outer, (c_bulk - c2) / (1 / h + thickness / d), rtol=1e-12)
    surface = sol.concentration_at(thickness)
    assert_allclose(surface, c2 + (c_bulk - c2) * biot / (1 + biot), rtol=1e-12)


def test_prescribed_influx_through_slab():
    """Fick's first law in a plane sheet (Crank 1975 ch. 4): a flux N into the inner face and a
    fixed concentration C2 at the outer face x = L give C(x) = C2 + N (L - x)/D, flux N
    throughout."""
    d, thickness, influx, c2 = 5e-10, 1e-3, 2e-7, 0.1
    sol = solve_exact(make("slab", 0.0, [Layer("sheet", thickness, d)],
                           Boundary("flux", value=influx), conc(c2)))
    x = np.linspace(0.0, thickness, 5)
    assert_allclose(sol.concentration_at(x), c2 + influx * (thickness - x) / d, rtol=1e-13)
    assert_allclose(sol.flux_at(x), influx, rtol=1e-13)


def test_outer_influx_into_hollow_cylinder():
    """Hollow cylinder with a flux N into the outer face and a fixed inner concentration:
    conservation of the rate per length 2 pi r J (Crank 1975 ch. 5) gives
    C(r) = C1 + N r2 ln(r/r1)/D."""
    d, r1, r2, influx, c1 = 1e-9, 1e-3, 3e-3, 1e-8, 0.0
    sol = solve_exact(make("cylinder", r1, [Layer("tube", r2 - r1, d)], conc(c1),
                           Boundary("flux", value=influx)))
    r = np.linspace(r1, r2, 5)
    assert_allclose(sol.concentration_at(r), c1 + influx * r2 * np.log(r / r1) / d, rtol=1e-13)
    assert_allclose(sol.flux_outer, -influx, rtol=1e-13)


def test_undetermined_level_is_reported_not_solved():
    """Only flux faces and no uptake: the steady level is not fixed (Neumann problem; Crank 1975
    ch. 4); the solver must say so rather than return numbers."""
    sol = solve_exact(make("slab", 0.0, [Layer("s", 1e-3, 1e-9)], Boundary("symmetry"),
                           Boundary("flux", value=0.0)))
    assert not sol.success
    assert "undetermined" in sol.message
    assert np.isnan(sol.concentration_at(np.array([0.0]))).all()


def test_position_lookup_on_interfaces_and_outside():
    """SteadySolution contract (worker/engine/model.py): an interface position takes the inner
    layer's value; positions outside the body are rejected with a message naming r."""
    layers = [Layer("a", 1e-3, 1e-9, partition=1.0), Layer("b", 1e-3, 1e-9, partition=4.0)]
    sol = solve_exact(make("slab", 0.0, layers, conc(1.0), conc(0.0, partition=4.0)))
    inner_side = sol.concentration_at(1e-3, layer=0)
    outer_side = sol.concentration_at(1e-3, layer=1)
    assert_allclose(outer_side, 4.0 * inner_side, rtol=1e-13)
    assert_allclose(sol.concentration_at(np.array([1e-3])), [inner_side], rtol=0)
    with pytest.raises(ValueError, match="r: expected positions within the body"):
        sol.concentration_at(np.array([2.5e-3]))
    with pytest.raises(ValueError, match="within layer 1"):
        sol.flux_at(np.array([0.5e-3]), layer=1)


@pytest.mark.parametrize("field, problem_change, message", [
    ("thickness", {"layers": (Layer("a", -1e-3, 1e-9),)}, "layers[0].thickness"),
    ("diffusivity", {"layers": (Layer("a", 1e-3, 0.0),)}, "layers[0].diffusivity"),
    ("partition", {"layers": (Layer("a", 1e-3, 1e-9, partition=-2.0),)}, "layers[0].partition"),
    ("centre", {"geometry": "sphere", "inner": 0.0}, "inner_boundary.kind"),
    ("coefficient", {"outer_boundary": film(-1.0, 1.0)}, "outer_boundary.coefficient"),
    ("geometry", {"geometry": "torus"}, "geometry"),
])
def test_bad_input_names_the_field(field, problem_change, message):
    """Bad input gets a clear error naming the field (project rules)."""
    base = dict(geometry="slab", inner=0.0, layers=(Layer("a", 1e-3, 1e-9),),
                inner_boundary=conc(1.0), outer_boundary=conc(0.0))
    base.update(problem_change)
    with pytest.raises(ValueError, match=message.replace("[", r"\[").replace("]", r"\]")):
        solve_exact(Problem(**base))


def test_face_partitions_differing_from_the_layers():
    """Resistances in series (Bird, Stewart & Lightfoot 2002 §10.6) written in u = C/K, which is
    continuous between layers: a concentration face gives u_0 = K_face,in c_in / K_1; a film with
    its own K_face,out gives J = h (bulk - K_N u_N / K_face,out). Eliminating the layer drops
    L_i/(D_i K_i): J = (K_in c_in/K_1 - K_out bulk/K_N) / (sum L_i/(D_i K_i) + K_out/(h K_N))."""
    layers = [Layer("a", 80e-6, 3e-10, partition=1.5), Layer("b", 120e-6, 7e-10, partition=0.2)]
    k_in, k_out, c_in, bulk, h = 0.9, 0.35, 2.0, 0.4, 3e-6
    sol = solve_exact(make("slab", 0.0, layers, conc(c_in, partition=k_in),
                           film(h, bulk, partition=k_out)))
    series = sum(ly.thickness / (ly.diffusivity * ly.partition) for ly in layers)
    expected = ((k_in * c_in / layers[0].partition - k_out * bulk / layers[-1].partition)
                / (series + k_out / (h * layers[-1].partition)))
    assert_allclose([sol.flux_inner, sol.flux_outer], expected, rtol=1e-12)
    assert_allclose(sol.concentration_at(0.0), k_in * c_in, rtol=1e-13)
    surface = sol.concentration_at(200e-6)
    assert_allclose(-sol.flux_outer, h * (bulk - surface / k_out), rtol=1e-12)
