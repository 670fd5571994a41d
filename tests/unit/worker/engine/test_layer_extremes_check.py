"""``cross_check.extremes`` judges each layer's true extremes too: a disagreement inside one
layer fails it even when the body's overall extremes agree, either way round."""

from __future__ import annotations

import pytest

from tests.unit.worker.engine.design.support import sphere_problem
from worker.engine.model import Layer, Problem
from worker.engine.outcome import Outcome
from worker.engine.steady_check import _cross_check_extremes


def _two_layers() -> Problem:
    bead = sphere_problem()
    shell = Layer("shell", 50e-6, 2e-9)
    return Problem(geometry="sphere", inner=0.0, layers=(bead.layers[0], shell),
                   inner_boundary=bead.inner_boundary, outer_boundary=bead.outer_boundary)


@pytest.mark.parametrize(("name", "layer", "words"), [
    ("concentration_min_layers", 1, "concentration_min of shell"),
    ("concentration_max_layers", 0, "concentration_max of bead")])
def test_a_layer_whose_extreme_differs_fails_though_the_body_agrees(name, layer, words):
    """The limit is 1e-4 of the concentration scale (worker/engine/limits.py); the other
    route's extreme of one layer is off by 3e-4 of it while the body's extremes agree."""
    extremes = {"concentration_min": (0.01, 0.0), "concentration_max": (0.2, 0.0),
                "concentration_min_layers": ([0.01, 0.05], [0.0, 0.0]),
                "concentration_max_layers": ([0.05, 0.2], [0.0, 0.0])}
    extremes[name][1][layer] = 3e-4
    outcome = Outcome()
    _cross_check_extremes(outcome, _two_layers(), extremes, 1.0, "a vs b")
    check = outcome.check("cross_check.extremes")
    assert check is not None and not check.passed
    assert words in check.detail


def test_layers_that_agree_pass():
    extremes = {"concentration_min": (0.01, 1e-6), "concentration_max": (0.2, 0.0),
                "concentration_min_layers": ([0.01, 0.05], [1e-6, 2e-6]),
                "concentration_max_layers": ([0.05, 0.2], [0.0, 0.0])}
    outcome = Outcome()
    _cross_check_extremes(outcome, _two_layers(), extremes, 1.0, "a vs b")
    check = outcome.check("cross_check.extremes")
    assert check is not None and check.passed
    assert check.value == pytest.approx(2e-6)
