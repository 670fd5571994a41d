"""Unit tests of the exact transient series: validation, scope, internal consistency."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient.eigen_roots import scanned_roots, sheet_surface_film_roots
from worker.engine.transient.exact_series import series_unsupported_reason, solve_transient_exact

SINK = Boundary("concentration", 0.0)


def _problem(layers, inner_boundary=SINK, outer_boundary=SINK, geometry="slab", inner=0.0,
             times=(10.0, 100.0)):
    return Problem(geometry, inner, tuple(layers), inner_boundary, outer_boundary,
                   Regime("transient", max(times), tuple(times)))


def test_roots_refuse_bad_arguments():
    with pytest.raises(ValueError, match="film_number"):
        sheet_surface_film_roots(-1.0, 3)
    with pytest.raises(ValueError, match="count"):
        sheet_surface_film_roots(1.0, 0)
    with pytest.raises(ValueError, match="spacing"):
        scanned_roots(np.sin, 10.0, 0.0)


def test_scanned_roots_find_every_root_of_sine():
    # sin(x) has its roots at k*pi (common practice); a scan with spacing pi finds all of them.
    roots = scanned_roots(np.sin, 20.5 * np.pi, np.pi)
    assert_allclose(roots, np.pi * np.arange(1, 21), rtol=1e-14)


@pytest.mark.parametrize(
    ("layers", "reason"),
    [
        ((Layer("a", 1e-3, 1e-10), Layer("b", 1e-3, 1e-10)), "more than one layer"),
        ((Layer("a", 1e-3, 1e-10, reaction=Reaction("zero_order", rate=1.0)),), "nonlinear"),
        ((Layer("a", 1e-3, 1e-10, reaction=Reaction("michaelis_menten", vmax=1.0, km=1.0)),),
         "nonlinear"),
    ],
)
def test_cases_without_a_series_return_none(layers, reason):
    problem = _problem(layers)
    assert reason in series_unsupported_reason(problem)
    assert solve_transient_exact(problem) is None


def test_sealed_body_has_no_series():
    sealed = Boundary("flux", 0.0)
    problem = _problem([Layer("a", 1e-3, 1e-10, initial=1.0)], sealed, Boundary("symmetry"))
    assert solve_transient_exact(problem) is None


def test_bad_times_are_refused():
    problem = _problem([Layer("a", 1e-3, 1e-10, initial=1.0)])
    with pytest.raises(ValueError, match="times"):
        solve_transient_exact(problem, [-1.0])
    with pytest.raises(ValueError, match="times"):
        solve_transient_exact(problem, [])


def test_time_zero_is_the_initial_state():
    problem = _problem([Layer("a", 1e-3, 1e-10, initial=2.0)], times=(0.0, 50.0))
    solution = solve_transient_exact(problem)
    assert solution.remaining[0] == solution.initial_load == pytest.approx(2e-3)
    assert solution.released_outer[0] == 0.0
    assert np.isnan(solution.flux_outer[0])
    assert_allclose(solution.concentration_at([0.5e-3], [0.0]), [[2.0]])


def test_mass_balance_of_the_series_with_reaction_and_film():
    # Released, consumed and remaining come from different series; their sum must be the load.
    layer = Layer("a", 0.8e-3, 2e-10, 1.5, Reaction("first_order", rate_constant=3e-4), 1.2)
    problem = _problem([layer], Boundary("concentration", 0.4),
                       Boundary("mass_transfer", coefficient=5e-7, bulk=0.1), geometry="cylinder",
                       inner=0.2e-3, times=(5.0, 60.0, 600.0, 6000.0))
    solution = solve_transient_exact(problem)
    total = (solution.remaining + solution.released_inner + solution.released_outer
             + solution.consumed)
    assert_allclose(total, solution.initial_load, rtol=1e-10)
    assert np.all(solution.converged)


def test_profile_meets_the_fixed_face_value():
    layer = Layer("a", 1e-3, 1e-10, 0.5, initial=0.0)
    problem = _problem([layer], Boundary("concentration", 3.0), SINK, times=(200.0, 2000.0))
    solution = solve_transient_exact(problem)
    profile = solution.concentration_at([0.0, 1e-3], [200.0, 2000.0])
    assert_allclose(profile[:, 0], 1.5, rtol=1e-9)  # K * C_fluid
    assert_allclose(profile[:, 1], 0.0, atol=1e-9)
