"""``convergence.space`` of a release that is round-off of the amount scale (after a zero-order
depletion the amount through a compartment face is zero to round-off): the three meshes'
differences are judged against the round-off band of the amount scale, not of the value, and a
difference above that band is banded, not counted as converged (either way).

The grid study is Celik et al., J. Fluids Eng. 130 (2008) 078001 (``convergence.grid_study``);
the values are invented, the fine mesh's released amount at the second time is shifted either
way for the injected error."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import checks

SCALE = 0.05  # amount scale, mol/m^2
TIMES = np.array([1.0e5, 2.0e5])


def _problem() -> Problem:
    return Problem("slab", 0.0, (Layer("gel", 5e-4, 1e-10, 1.0,
                                       Reaction("zero_order", rate=2e-4), initial=100.0),),
                   Boundary("symmetry"), Boundary("compartment", volume=1e-6),
                   Regime("transient", float(TIMES[-1]), tuple(TIMES)), area=1e-4)


def _meshes(late: tuple[float, float, float]) -> list[SimpleNamespace]:
    """Coarse, medium and fine: a release converging at second order at the first time and
    ``late`` (fine, medium, coarse) at the second."""
    early = (1.0e-2 + 1e-7, 1.0e-2 + 4e-7, 1.0e-2 + 1.6e-6)
    out = []
    for k, cells in enumerate((50, 100, 200)):
        index = 2 - k  # fine first in the tuples
        released = np.array([early[index], late[index]])
        out.append(SimpleNamespace(diagnostics={"cells_per_layer": [cells]},
                                   released_inner=np.zeros(2), released_outer=released,
                                   remaining=np.full(2, SCALE) - released))
    return out


def _space(late) -> object:
    outcome = Outcome()
    checks.space_check(outcome, _problem(), _meshes(late), TIMES, 1, SCALE)
    return outcome.check("convergence.space")


def test_roundoff_release_counts_as_converged():
    check = _space((3.9e-15, 2.2e-15, 3.0e-15))
    assert check.passed, check.detail


@pytest.mark.parametrize("shift", [-5e-8, 5e-8, -5e-5, 5e-5])
def test_a_difference_above_roundoff_of_the_scale_is_banded_not_converged(shift):
    # Above the round-off band the second time's study has no order (the other time has
    # one): its band is Roache's safety factor 3 times the larger mesh difference (J. Fluids
    # Eng. 116 (1994) 405), relative to the amount scale, which fails beyond the limit 1e-3.
    check = _space((3.9e-15 + shift, 2.2e-15, 3.0e-15))
    assert check.value == pytest.approx(3.0 * abs(shift) / SCALE, rel=1e-6)
    assert check.passed is (abs(shift) < 1e-6), check.detail
