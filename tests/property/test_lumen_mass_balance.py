"""Properties of the lumen's marching solver for drawn tubes and walls (hypothesis).

* Global mass balance: what enters with the flow minus what leaves at the outlet equals what
  crossed the wall, ``F c_in - F c_m(L) = 2 pi R int_0^L j dz`` (conservation of the solute in
  steady flow; common practice). The rates at the ends use the tube's F, not the solver's cell
  weights, so weights that do not sum to the Poiseuille flow rate would show.
* Maximum principle: with a wall held at, or conducting to, one outside concentration the
  mixing cup stays between it and the inlet concentration and moves monotonically towards it
  (M.H. Protter, H.F. Weinberger, *Maximum Principles in Differential Equations*, 1967, ch. 3,
  for parabolic equations; common practice).
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.lumen_checks import BALANCE_RTOL, balance_closes
from worker.engine.lumen.marching import (
    ConductanceWall,
    FixedWall,
    FunctionWall,
    Tube,
    UniformFluxWall,
    march,
)


def log_uniform(low: float, high: float):
    return st.floats(min_value=math.log10(low), max_value=math.log10(high)).map(
        lambda e: 10.0**e)


WALL_KINDS = ("fixed", "conductance", "flux", "michaelis_menten")


@st.composite
def tubes_and_walls(draw, kinds=WALL_KINDS):
    radius = draw(log_uniform(1e-5, 1e-3))
    diffusivity = draw(log_uniform(1e-10, 3e-9))
    flow = draw(log_uniform(1e-13, 1e-8))
    z_star = draw(log_uniform(1e-3, 1.0))
    length = z_star * 4.0 * flow / (math.pi * diffusivity)
    inlet = draw(st.floats(0.1, 2.0))
    kind = draw(st.sampled_from(kinds))
    outside = draw(st.floats(0.0, 2.0))
    if kind == "fixed":
        wall = FixedWall(outside)
    elif kind == "conductance":
        wall = ConductanceWall(draw(log_uniform(1e-2, 1e3)) * diffusivity / radius, outside)
    elif kind == "flux":
        wall = UniformFluxWall(draw(st.floats(-1.0, 1.0)) * inlet * diffusivity / radius)
    else:
        vmax = draw(log_uniform(1e-2, 1e2)) * inlet * diffusivity / radius
        km = draw(log_uniform(1e-2, 1e1)) * inlet

        def law(c, vmax=vmax, km=km):
            if c <= 0.0:  # no uptake of what is not there
                return 0.0, 0.0
            return vmax * c / (km + c), vmax * km / (km + c) ** 2

        wall = FunctionWall(law)
    return Tube(radius, length, flow, diffusivity, inlet), wall


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(tubes_and_walls())
def test_global_mass_balance(case):
    tube, wall = case
    solution = march(tube, wall, 24, 24)
    through = solution.through_wall[-1]
    assert balance_closes(tube, solution.mixing_cup[-1], through)
    # an error of ten times the tolerance injected into either side, either way, is seen
    scale = max(tube.flow_rate * abs(tube.inlet), tube.flow_rate * abs(solution.mixing_cup[-1]),
                abs(through))
    error = 10 * BALANCE_RTOL * scale
    for sign in (1.0, -1.0):
        assert not balance_closes(tube, solution.mixing_cup[-1], through + sign * error)
        shifted = solution.mixing_cup[-1] + sign * error / tube.flow_rate
        assert not balance_closes(tube, shifted, through)


def within_bounds(mixing_cup: np.ndarray, inlet: float, outside: float) -> bool:
    low, high = min(inlet, outside), max(inlet, outside)
    slack = 1e-12 * max(abs(low), abs(high), 1.0)
    steps = np.diff(mixing_cup) * np.sign(outside - inlet)
    return bool(np.all(mixing_cup >= low - slack) and np.all(mixing_cup <= high + slack)
                and np.all(steps >= -slack))


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(tubes_and_walls(kinds=("fixed", "conductance")))
def test_mixing_cup_obeys_the_maximum_principle(case):
    tube, wall = case
    assert isinstance(wall, FixedWall | ConductanceWall)
    outside = wall.value if isinstance(wall, FixedWall) else wall.outside
    solution = march(tube, wall, 24, 24)
    assert within_bounds(solution.mixing_cup, tube.inlet, outside)
    if abs(outside - tube.inlet) > 1e-3 and abs(solution.mixing_cup[-1] - tube.inlet) > 1e-6:
        overshoot = solution.mixing_cup.copy()
        overshoot[-1] = outside + 1e-6 * np.sign(outside - tube.inlet)
        assert not within_bounds(overshoot, tube.inlet, outside)
        backwards = solution.mixing_cup.copy()
        backwards[-1] = tube.inlet + 1e-6 * np.sign(tube.inlet - outside)
        assert not within_bounds(backwards, tube.inlet, outside)
