"""Unit tests of the Laplace-domain transient (``transient/laplace.py``): the Talbot inversion on
published transform pairs and against mpmath, single layers against the eigenfunction series
in every geometry, the mass balance, the faces the series does not cover, the input errors, and
that an injected error moves the answer far beyond the method's accuracy.

Scenario values (sizes, diffusivities, times) are invented; check values come from published
transform pairs (Abramowitz & Stegun 1964, ch. 29), from mpmath (reference library), from the
project's independent methods (eigenfunction series: Crank 1975; method of lines) or from
conservation, never from this module.
"""

from __future__ import annotations

import dataclasses

import mpmath
import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import special

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient.exact_series import solve_transient_exact
from worker.engine.transient.laplace import (
    TALBOT_NODES,
    invert_talbot,
    laplace_transforms,
    laplace_unsupported_reason,
    solve_transient_laplace,
)
from worker.engine.transient.method_of_lines import solve_transient_fv

DIFFUSIVITY = 3.0e-11  # m^2/s, invented
SINK = Boundary("concentration", 0.0)
CENTRE = Boundary("symmetry")
FILM = Boundary("mass_transfer", coefficient=2.0e-8, bulk=0.3, partition=0.7)
SOURCE = Boundary("concentration", 2.0, partition=1.5)
AMOUNTS = ("remaining", "released_inner", "released_outer", "consumed")


def _layer(thickness, diffusivity=DIFFUSIVITY, partition=1.0, rate_constant=0.0, initial=1.0,
           name="body"):
    reaction = Reaction("first_order", rate_constant=rate_constant) if rate_constant else Reaction()
    return Layer(name, thickness, diffusivity, partition, reaction, initial)


def _problem(layers, inner_boundary, outer_boundary, times, geometry="slab", inner=0.0):
    times = tuple(float(t) for t in times)
    return Problem(geometry, inner, tuple(layers), inner_boundary, outer_boundary,
                   Regime("transient", max(times), times))


def _two_layer(times=(2.0e4, 1.0e5, 2.0e5), geometry="slab", inner=0.0, outer_boundary=FILM,
               inner_boundary=CENTRE):
    layers = (_layer(100e-6, 2e-12, 1.0, initial=10.0, name="reservoir"),
              _layer(20e-6, 5e-14, 0.3, rate_constant=1e-6, initial=0.0, name="topcoat"))
    return _problem(layers, inner_boundary, outer_boundary, times, geometry, inner)


def _balance(solution):
    """Mass-balance residual relative to the larger of the load and the throughput."""
    residual = solution.initial_load - sum(getattr(solution, name) for name in AMOUNTS)
    scale = max(abs(solution.initial_load), float(np.max(
        np.abs(solution.released_inner) + np.abs(solution.released_outer)
        + np.abs(solution.consumed))))
    return float(np.max(np.abs(residual))) / scale


# --------------------------------------------------------------------------------------------
# The inversion on published pairs
# --------------------------------------------------------------------------------------------

TIMES_WIDE = np.geomspace(1e-3, 1e3, 25)


def test_talbot_inverts_the_unit_step_and_the_ramp():
    # L{1} = 1/s, L{t} = 1/s^2 (Abramowitz & Stegun 1964, 29.3.1 and 29.3.3)
    assert_allclose(invert_talbot(lambda s: 1.0 / s, TIMES_WIDE), 1.0, rtol=1e-11)
    assert_allclose(invert_talbot(lambda s: 1.0 / s**2, TIMES_WIDE), TIMES_WIDE, rtol=1e-11)


def test_talbot_inverts_the_exponential():
    # L{exp(-a t)} = 1/(s + a) (Abramowitz & Stegun 1964, 29.3.8); relative where the value is
    # above 1e-12 of its scale, absolute below (the method's documented limit).
    rate = 0.7
    found = invert_talbot(lambda s: 1.0 / (s + rate), TIMES_WIDE)
    expected = np.exp(-rate * TIMES_WIDE)
    assert_allclose(found, expected, rtol=1e-10, atol=1e-12)


def test_talbot_inverts_the_erfc_pair_of_a_half_space():
    # L{erfc(a / (2 sqrt t))} = exp(-a sqrt s)/s (Abramowitz & Stegun 1964, 29.3.83): a
    # branch point at s = 0, the transform of every short-time diffusion front.
    a = 1.3
    found = invert_talbot(lambda s: np.exp(-a * np.sqrt(s)) / s, TIMES_WIDE)
    assert_allclose(found, special.erfc(a / (2.0 * np.sqrt(TIMES_WIDE))), rtol=1e-9, atol=1e-12)


def test_fewer_nodes_lose_accuracy_and_the_default_keeps_it():
    # The truncation error of the fixed Talbot rule falls roughly as 10^(-0.6 M) (Abate & Valko
    # 2004): 8 nodes miss the erfc pair at 1e-5 or worse, the default gets within 1e-11.
    a = 1.3
    expected = special.erfc(a / (2.0 * np.sqrt(TIMES_WIDE)))
    coarse = invert_talbot(lambda s: np.exp(-a * np.sqrt(s)) / s, TIMES_WIDE, nodes=8)
    fine = invert_talbot(lambda s: np.exp(-a * np.sqrt(s)) / s, TIMES_WIDE, nodes=TALBOT_NODES)
    assert np.max(np.abs(coarse - expected)) > 1e-6
    assert np.max(np.abs(fine - expected)) < 1e-11


def test_talbot_refuses_bad_times_and_nodes():
    with pytest.raises(ValueError, match="times"):
        invert_talbot(lambda s: 1.0 / s, [0.0, 1.0])
    with pytest.raises(ValueError, match="nodes"):
        invert_talbot(lambda s: 1.0 / s, [1.0], nodes=1)


@pytest.mark.parametrize("name", ["released_outer", "remaining", "consumed", "flux_outer"])
def test_layered_transform_inverted_by_mpmath_agrees(name):
    # mpmath.invertlaplace (method 'talbot': its own contour and node count, multiprecision
    # weights) inverts the same layered transform: two layers, a partition jump, first-order
    # uptake in the topcoat, a film with its own partition outside.
    problem = _two_layer()
    ours = getattr(solve_transient_laplace(problem), name)

    def transform(s):
        value = laplace_transforms(problem, np.array([complex(s)]))[name][0]
        return mpmath.mpc(complex(value))

    with mpmath.workdps(15):  # the transform is double precision: so is the reference's
        reference = [float(mpmath.invertlaplace(transform, t, method="talbot"))
                     for t in problem.regime.times]
    assert_allclose(ours, reference, rtol=1e-9)


# --------------------------------------------------------------------------------------------
# Single layers against the eigenfunction series (Crank 1975, ch. 4-6, 8)
# --------------------------------------------------------------------------------------------

SERIES_TIMES = np.geomspace(1.0, 3.0e4, 12)
BODIES = [("slab", 0.0), ("cylinder", 0.0), ("sphere", 0.0), ("cylinder", 2e-4),
          ("sphere", 2e-4)]
FACES = [("film-sink", FILM, SINK), ("source-film", SOURCE, FILM)]


@pytest.mark.parametrize(("geometry", "inner"), BODIES)
@pytest.mark.parametrize(("faces", "inner_boundary", "outer_boundary"), FACES)
@pytest.mark.parametrize("rate_constant", [0.0, 1e-4])
def test_single_layer_matches_the_eigenfunction_series(geometry, inner, faces, inner_boundary,
                                                       outer_boundary, rate_constant):
    # The series (Crank 1975 eqs. 4.18, 5.23, 6.20 with their film and reaction variants,
    # Danckwerts 1951) is built from real eigenvalues; this module from complex q: they share
    # only the face rows. A solid centre takes a symmetry face.
    if inner == 0.0 and geometry != "slab":
        inner_boundary = CENTRE
    thickness = 5e-4
    problem = _problem([_layer(thickness, rate_constant=rate_constant)], inner_boundary,
                       outer_boundary, SERIES_TIMES, geometry, inner)
    positions = np.linspace(inner, inner + thickness, 7)
    series = solve_transient_exact(problem)
    ours = solve_transient_laplace(problem, positions=positions)
    for name in (*AMOUNTS, "flux_inner", "flux_outer"):
        expected = getattr(series, name)
        scale = max(float(np.max(np.abs(expected))), 1e-300)
        assert np.max(np.abs(getattr(ours, name) - expected)) <= 1e-10 * scale, name
    fraction = (ours.released_inner + ours.released_outer) / ours.initial_load
    expected_fraction = (series.released_inner + series.released_outer) / series.initial_load
    assert_allclose(fraction, expected_fraction, rtol=1e-9, atol=1e-12)
    profile = series.concentration_at(positions, SERIES_TIMES)
    assert np.max(np.abs(ours.profile - profile)) <= 1e-10 * np.max(np.abs(profile))
    assert_allclose(ours.initial_load, series.initial_load, rtol=1e-14)
    assert _balance(ours) < 1e-10


# --------------------------------------------------------------------------------------------
# What the series does not cover: layers, flux faces, sealed bodies
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize(("geometry", "inner", "inner_boundary"),
                         [("slab", 0.0, FILM), ("cylinder", 0.0, CENTRE),
                          ("sphere", 0.0, CENTRE), ("cylinder", 5e-5, SOURCE),
                          ("sphere", 5e-5, Boundary("flux", 3e-9))])
def test_layered_mass_balance_closes(geometry, inner, inner_boundary):
    # Conservation (common practice): initial = remaining + released + consumed. The remaining
    # amount comes from the antiderivatives of the basis, the releases from the face slopes, the
    # initial load from a quadrature of the initial state: three separate routes.
    problem = _two_layer(times=np.geomspace(10.0, 1e6, 20), geometry=geometry, inner=inner,
                         inner_boundary=inner_boundary)
    solution = solve_transient_laplace(problem)
    assert _balance(solution) < 1e-8
    assert np.all(np.isfinite([getattr(solution, name) for name in AMOUNTS]))


def test_flux_into_a_sealed_slab_accumulates_and_its_surface_rises_as_sqrt_t():
    # Constant inflow F through x = L into an empty slab sealed at x = 0: the amount held is
    # F t exactly (conservation), and while the front is far from the seal the surface
    # concentration is 2 F sqrt(t / (pi D)) (Carslaw & Jaeger 1959, section 2.9, constant flux
    # into a semi-infinite solid, from memory).
    inflow = 4e-9  # mol/(m^2 s), invented
    thickness = 1e-3
    times = np.array([1.0, 10.0, 100.0, 1e4, 1e6])
    problem = _problem([_layer(thickness, initial=0.0)], CENTRE, Boundary("flux", inflow), times)
    solution = solve_transient_laplace(problem, positions=[thickness])
    assert_allclose(solution.remaining, inflow * times, rtol=1e-10)
    assert_allclose(solution.released_outer, -inflow * times, rtol=1e-10)
    assert_allclose(solution.flux_outer, -inflow, rtol=1e-10)
    assert np.all(np.abs(solution.released_inner) < 1e-12 * inflow * times)  # sealed face
    assert np.all(np.abs(solution.flux_inner) < 1e-12 * inflow)
    early = times <= 100.0  # sqrt(D t) <= 5.5e-5 m, far from the seal at 1e-3 m
    assert_allclose(solution.profile[early, 0],
                    2.0 * inflow * np.sqrt(times[early] / (np.pi * DIFFUSIVITY)), rtol=1e-9)


def test_sealed_layers_keep_their_load_and_even_out_the_potential():
    # Symmetry at both faces: nothing leaves, and the layers relax to one C/K (the partition
    # equilibrium, common practice): C_i = K_i * load / sum(K_j L_j).
    layers = (_layer(1e-4, 1e-11, 1.0, initial=5.0), _layer(5e-5, 2e-11, 3.0, initial=0.0))
    late = 1e4 * (1.5e-4) ** 2 / 1e-11
    problem = _problem(layers, CENTRE, CENTRE, [1.0, 100.0, late])
    solution = solve_transient_laplace(problem, positions=[5e-5, 1.2e-4])
    assert_allclose(solution.remaining, 5.0 * 1e-4, rtol=1e-11)  # at 1e4 L^2/D too
    assert np.max(np.abs(solution.released_outer)) < 1e-12 * 5.0 * 1e-4
    level = 5.0 * 1e-4 / (1.0 * 1e-4 + 3.0 * 5e-5)
    assert_allclose(solution.profile[-1], [level, 3.0 * level], rtol=1e-8)


def test_interface_keeps_the_partition_ratio():
    # At an interface C_a/K_a = C_b/K_b (the convention of model.py; Crank 1975 ch. 12):
    # the profile read on either side of the interface keeps the ratio at every time.
    problem = _two_layer(times=[1e3, 1e4, 1e5])
    interface = 100e-6
    solution = solve_transient_laplace(problem)
    inside = solution.concentration_at([interface, interface * (1 + 1e-12)], [1e3, 1e4, 1e5])
    assert_allclose(inside[:, 1] / inside[:, 0], 0.3 / 1.0, rtol=1e-6)


# --------------------------------------------------------------------------------------------
# t = 0, input errors, scope
# --------------------------------------------------------------------------------------------


def test_time_zero_is_the_initial_state_exactly():
    problem = _two_layer(times=[0.0, 5.0])
    solution = solve_transient_laplace(problem, positions=[0.0, 100e-6, 110e-6, 120e-6])
    assert solution.remaining[0] == solution.initial_load
    assert solution.released_inner[0] == solution.released_outer[0] == solution.consumed[0] == 0
    assert np.isnan(solution.flux_outer[0]) and np.isnan(solution.flux_inner[0])
    # an r exactly on the interface takes the inner layer's value
    assert solution.profile[0].tolist() == [10.0, 10.0, 0.0, 0.0]
    assert_allclose(solution.initial_load, 10.0 * 100e-6, rtol=1e-14)


def test_bad_input_is_refused_naming_the_field():
    problem = _two_layer()
    with pytest.raises(ValueError, match="times"):
        solve_transient_laplace(problem, [-1.0])
    with pytest.raises(ValueError, match="times"):
        solve_transient_laplace(problem, [np.nan])
    with pytest.raises(ValueError, match="positions"):
        solve_transient_laplace(problem, [1.0], positions=[1.0])
    broken = dataclasses.replace(problem, layers=(
        dataclasses.replace(problem.layers[0], diffusivity=-1.0), problem.layers[1]))
    with pytest.raises(ValueError, match=r"layers\[0\]\.diffusivity"):
        solve_transient_laplace(broken)


@pytest.mark.parametrize("reaction", [Reaction("zero_order", rate=1.0),
                                      Reaction("michaelis_menten", vmax=1.0, km=1.0)])
def test_nonlinear_kinetics_are_out_of_scope(reaction):
    problem = _two_layer()
    nonlinear = dataclasses.replace(problem, layers=(
        problem.layers[0], dataclasses.replace(problem.layers[1], reaction=reaction)))
    reason = laplace_unsupported_reason(nonlinear)
    assert reason is not None and "layers[1]" in reason and "nonlinear" in reason
    with pytest.raises(ValueError, match="nonlinear"):
        solve_transient_laplace(nonlinear)
    assert laplace_unsupported_reason(problem) is None


# --------------------------------------------------------------------------------------------
# An injected error shows (what a cross-check against the method of lines would see)
# --------------------------------------------------------------------------------------------

#: Agreement of the method of lines (mesh below) with this module on the two-layer case.
CROSS_CHECK_TOLERANCE = 1e-3


@pytest.fixture(scope="module")
def method_of_lines_release():
    problem = _two_layer()
    fv = solve_transient_fv(problem, problem.regime.times, (160, 40))
    assert fv.success
    return problem, fv.released_outer


def _release_error(problem, reference):
    ours = solve_transient_laplace(problem).released_outer
    return float(np.max(np.abs(ours - reference) / np.abs(reference)))


def test_the_method_of_lines_agrees_on_the_two_layer_case(method_of_lines_release):
    problem, reference = method_of_lines_release
    assert _release_error(problem, reference) < CROSS_CHECK_TOLERANCE


@pytest.mark.parametrize("factor", [2.0, 0.5])
def test_a_scaled_initial_state_moves_the_release_far_beyond_the_tolerance(
        method_of_lines_release, factor):
    # The seeded bug of the issue: the initial state multiplied by a factor (K) in one solver.
    problem, reference = method_of_lines_release
    reservoir = problem.layers[0]
    wrong = dataclasses.replace(problem, layers=(
        dataclasses.replace(reservoir, initial=factor * reservoir.initial), problem.layers[1]))
    assert _release_error(wrong, reference) > 100 * CROSS_CHECK_TOLERANCE


@pytest.mark.parametrize("factor", [2.0, 0.5])
def test_a_wrong_interface_partition_moves_the_release_far_beyond_the_tolerance(
        method_of_lines_release, factor):
    problem, reference = method_of_lines_release
    topcoat = problem.layers[1]
    wrong = dataclasses.replace(problem, layers=(
        problem.layers[0], dataclasses.replace(topcoat, partition=factor * topcoat.partition)))
    assert _release_error(wrong, reference) > 10 * CROSS_CHECK_TOLERANCE


# --------------------------------------------------------------------------------------------
# Hard regimes: a thin fast layer long after its own diffusion time; a weak film
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize(("geometry", "inner"), [("slab", 0.0), ("cylinder", 1e-4),
                                                 ("sphere", 1e-4), ("sphere", 0.0)])
@pytest.mark.parametrize("fast_diffusivity", [1e-12, 1e-9])
def test_a_thin_fast_layer_keeps_the_mass_balance_for_months(geometry, inner, fast_diffusivity):
    # A 1 um adhesive layer with D up to 1e-9 m^2/s (diffusion time 1e-3 s) between a
    # reservoir and a topcoat (D 1e-15 and 5e-17 m^2/s), 90 days: its capacity term is 1e-20 of
    # its conductance at the last times. Conservation (common practice) must still close.
    day = 86400.0
    layers = (_layer(8e-6, 1e-15, 1.0, initial=50.0, name="reservoir"),
              _layer(1e-6, fast_diffusivity, 2.0, initial=0.0, name="adhesive"),
              _layer(2e-6, 5e-17, 0.5, initial=0.0, name="topcoat"))
    problem = _problem(layers, CENTRE, SINK, np.geomspace(60.0, 90 * day, 20), geometry, inner)
    solution = solve_transient_laplace(problem)
    assert _balance(solution) < 1e-10
    fraction = solution.released_outer / solution.initial_load
    # non-decreasing up to the inversion's absolute floor (before breakthrough it is ~1e-17)
    assert np.all(np.diff(fraction) > -1e-12) and 0.0 < fraction[-1] < 1.0


def test_a_weak_film_matches_the_method_of_lines():
    # Biot number h L/(K D) ~ 1e-3: the slowest mode decays on ~L K/h, far slower than the
    # diffusion time; the method of lines (fine mesh) is the independent reference here.
    layer = _layer(1.33e-5, 1.78e-10, 23.3, rate_constant=0.02, initial=0.0)
    film = Boundary("mass_transfer", coefficient=2.877e-8, bulk=1.0, partition=2.4)
    times = (1e-3, 0.1, 1.0, 10.0)
    for geometry in ("slab", "cylinder", "sphere"):
        problem = _problem([layer], CENTRE, film, times, geometry)
        ours = solve_transient_laplace(problem)
        fv = solve_transient_fv(problem, times, (400,), rtol=1e-8)
        assert_allclose(ours.remaining, fv.remaining, rtol=1e-6)
        assert_allclose(ours.consumed, fv.consumed, rtol=1e-5)
