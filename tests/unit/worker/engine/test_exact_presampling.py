"""``solve_exact(..., sample_at=...)``: profile values computed with the solve are the values a
later evaluation gives.

The check here is consistency, bit for bit, between two routes through the same closed form
(the closed forms themselves are checked against published solutions and mpmath in
``tests/reference``).
"""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine.exact_steady import solve_exact
from worker.engine.model import Boundary, Layer, Problem, Reaction

D = 1e-9
FIRST = Reaction("first_order", rate_constant=4e-2)

CASES = {
    "hollow sphere, first order": Problem(
        "sphere", 2e-4, (Layer("shell", 3e-4, D, reaction=FIRST),),
        Boundary("concentration", 1.0), Boundary("concentration", 0.5)),
    "slab, reacting and plain layers": Problem(
        "slab", 0.0,
        (Layer("a", 1e-4, 0.5 * D, partition=2.0, reaction=FIRST), Layer("b", 2e-4, D)),
        Boundary("concentration", 1.0),
        Boundary("mass_transfer", coefficient=1e-5, bulk=0.1)),
    "solid cylinder, first order": Problem(
        "cylinder", 0.0, (Layer("core", 3e-4, D, reaction=FIRST),),
        Boundary("symmetry"), Boundary("concentration", 0.2)),
}


def _positions(problem: Problem) -> list[np.ndarray]:
    edges = problem.edges
    return [np.linspace(a, b, 23) for a, b in zip(edges[:-1], edges[1:], strict=True)]


@pytest.mark.parametrize("name", list(CASES))
def test_presampled_profile_equals_a_later_evaluation(name):
    problem = CASES[name]
    positions = _positions(problem)
    plain = solve_exact(problem)
    sampled = solve_exact(problem, sample_at=positions)
    assert plain.success and sampled.success
    assert sampled.flux_inner == plain.flux_inner
    assert sampled.flux_outer == plain.flux_outer
    assert sampled.consumption == plain.consumption
    # the reacting layers were evaluated with the solve (else this test would compare a route
    # with itself)
    reacting = {i for i, ly in enumerate(problem.layers) if ly.reaction.kind == "first_order"}
    assert set(sampled.profile_at.__self__._presampled) == reacting
    for layer, r in enumerate(positions):
        c, j = sampled.profile_at(r, layer=layer)
        c_ref, j_ref = plain.profile_at(r, layer=layer)
        assert np.array_equal(c, c_ref) and np.array_equal(j, j_ref)
        # other positions, and the same positions through the other accessors, still evaluate
        middle = r[1:-1] + 0.5 * np.diff(r)[:-1]
        assert np.array_equal(sampled.profile_at(middle, layer=layer)[0],
                              plain.profile_at(middle, layer=layer)[0])
        assert np.array_equal(sampled.concentration_at(r, layer=layer), c_ref)


def test_positions_outside_their_layer_are_not_presampled_but_still_answered():
    problem = CASES["slab, reacting and plain layers"]
    edges = problem.edges
    outside = [np.linspace(edges[0], edges[2], 11), np.linspace(edges[1], edges[2], 11)]
    sampled = solve_exact(problem, sample_at=outside)
    plain = solve_exact(problem)
    r = outside[1]
    assert np.array_equal(sampled.profile_at(r, layer=1)[0], plain.profile_at(r, layer=1)[0])
    with pytest.raises(ValueError, match="layer 0"):
        sampled.concentration_at(outside[0], layer=0)
