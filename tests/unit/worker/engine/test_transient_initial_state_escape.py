"""A layered or nonlinear transient whose method of lines starts from the wrong state fails.

The seeded bug: the method of lines' initial state multiplied by the layer's partition
coefficient (a slip between the material-side and fluid-side concentration), which doubled the
released amounts of a layered coating and passed, since only the method's own refinement, mass
balance and steady limit applied. Every transient case now has an independent route (the exact
Laplace-domain solution for linear kinetics, the Galerkin second discretisation otherwise)
that builds its own initial state, so the load and the amounts disagree.

The cases are invented; the check is the disagreement itself (and the plain cases passing).
"""

from __future__ import annotations

import dataclasses

import pytest

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient import method_of_lines, run_transient

SINK = Boundary("concentration", 0.0)
SEALED = Boundary("symmetry")


def _coating(reaction: Reaction) -> Problem:
    """A drug reservoir under a topcoat (partition 2) on a sealed base, into a sink."""
    return Problem("slab", 0.0, (
        Layer("reservoir", 0.1e-3, 2e-12, 1.0, initial=5.0),
        Layer("topcoat", 0.03e-3, 5e-13, 2.0, reaction, initial=2.0),
    ), SEALED, SINK, Regime("transient", 20000.0, (0.0, 2000.0, 8000.0, 20000.0)))


CASES = {
    "linear": _coating(Reaction()),
    "first order": _coating(Reaction("first_order", rate_constant=2e-5)),
    "zero order": _coating(Reaction("zero_order", rate=2e-4)),
    "Michaelis-Menten": _coating(Reaction("michaelis_menten", vmax=2e-4, km=0.5)),
}


def _failed(outcome) -> set[str]:
    return {c.name for c in outcome.checks if not c.passed}


@pytest.mark.parametrize("name", sorted(CASES))
def test_the_plain_case_passes(name):
    outcome = run_transient(CASES[name])
    assert not _failed(outcome), [c.as_dict() for c in outcome.checks if not c.passed]
    assert sum(m["role"] == "independent" for m in outcome.methods) >= 1


@pytest.mark.parametrize("name", sorted(CASES))
def test_an_initial_state_times_k_in_the_method_of_lines_fails(monkeypatch, name):
    solve_meshes = method_of_lines.solve_transient_fv_meshes

    def times_k(problem, *args, **kwargs):
        slipped = dataclasses.replace(problem, layers=tuple(
            dataclasses.replace(layer, initial=layer.initial * layer.partition)
            for layer in problem.layers))
        return solve_meshes(slipped, *args, **kwargs)

    monkeypatch.setattr(method_of_lines, "solve_transient_fv_meshes", times_k)
    failed = _failed(run_transient(CASES[name]))
    assert {"cross_check.initial_load", "cross_check.remaining"} <= failed
