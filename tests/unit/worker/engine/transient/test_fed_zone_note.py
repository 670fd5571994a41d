"""``compartment_checks.fed_zone_note``: the warning that a compartment feeds a zero-order layer
through a zone thinner than the fine mesh's face cell.

The depth of the zone is the steady penetration of a zero-order consumer held at C_s on its
face, delta = sqrt(2 D C_s / k) (A.V. Hill, Proc. R. Soc. Lond. B 104 (1928) 39: D C'' = k with
C = C_s at the face and C = C' = 0 at delta). The stand-in solutions carry invented levels
chosen so that delta is a set multiple of the face cell; the real case is a 0.5 mm sphere whose
own load (1 mol/m^3) runs out within about 1.4 h (1 / 2e-4 s at the full rate) and whose 1 mL
of fluid then feeds it back (invented scenario values).
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import compartment_checks, run_transient

D, RATE, THICK, K = 1e-11, 2e-4, 5e-4, 2.0  # m^2/s, mol/m^3/s, m, layer/fluid partition
CELL = 2.5e-6  # m, the stand-in fine mesh's face cell
TIMES = np.array([0.0, 1000.0, 2000.0])
DAY = 86400.0


def _problem(rate: float = RATE) -> Problem:
    return Problem("sphere", 0.0, (Layer("gel", THICK, D, K, Reaction("zero_order", rate=rate),
                                         initial=1.0),),
                   Boundary("symmetry"), Boundary("compartment", volume=1e-6),
                   Regime("transient", float(TIMES[-1]), tuple(TIMES[1:])))


def _level_for(depth: float) -> float:
    """The fluid level whose fed zone is ``depth`` deep: C_s = K C = k delta^2 / (2 D)."""
    return RATE * depth ** 2 / (2.0 * D * K)


def _fine(level: float, flux: float) -> SimpleNamespace:
    faces = np.concatenate([np.linspace(0.0, THICK - CELL, 200), [THICK]])
    return SimpleNamespace(mesh=SimpleNamespace(faces=faces),
                           compartments={"outer": np.array([0.0, level, level])},
                           flux_outer=np.array([0.0, flux, flux]))


def _note(problem: Problem, fine: SimpleNamespace, amount_scale: float = 1e-20) -> list[str]:
    outcome = Outcome()
    compartment_checks.fed_zone_note(outcome, problem, fine, TIMES, np.array([1, 2]),
                                     amount_scale)
    return outcome.warnings


def test_a_zone_half_a_cell_deep_is_named_with_its_depth():
    warnings = _note(_problem(), _fine(_level_for(0.5 * CELL), flux=-1e-9))
    assert len(warnings) == 1
    assert "at t = 1000 s" in warnings[0]
    assert f"about {0.5 * CELL:.3g} m deep" in warnings[0]
    assert f"face cell ({CELL:.3g} m)" in warnings[0]


@pytest.mark.parametrize("case", ["two cells deep", "fluid not feeding", "first order",
                                  "nothing at stake"])
def test_no_note_where_the_zone_is_resolved_or_not_fed_or_not_zero_order_or_empty(case):
    problem, level, flux, scale = _problem(), _level_for(0.5 * CELL), -1e-9, 1e-20
    if case == "two cells deep":
        level = _level_for(2.0 * CELL)
    elif case == "fluid not feeding":
        flux = 1e-9  # outward: the layer still releases its own load
    elif case == "first order":
        problem = Problem("sphere", 0.0, (Layer("gel", THICK, D, K,
                                                Reaction("first_order", rate_constant=1e-4),
                                                initial=1.0),),
                          problem.inner_boundary, problem.outer_boundary, problem.regime)
    else:
        scale = 1.0  # the fluid holds far less than the release limit of this amount scale
    assert _note(problem, _fine(level, flux), scale) == []


def test_the_drained_sphere_is_warned_about_beside_its_failing_checks():
    times = tuple(30 * DAY * k / 20 for k in range(1, 21))
    problem = Problem("sphere", 0.0, (Layer("gel", THICK, D, 1.0,
                                            Reaction("zero_order", rate=RATE), initial=1.0),),
                      Boundary("symmetry"), Boundary("compartment", volume=1e-6),
                      Regime("transient", 30 * DAY, times))
    outcome = run_transient(problem)
    notes = [w for w in outcome.warnings if w.startswith("zero-order uptake fed from the outer")]
    assert len(notes) == 1, outcome.warnings
    failed = {c.name for c in outcome.checks if not c.passed}
    assert "cross_check.flux_outer" in failed  # flagged, not hidden: the note says why
