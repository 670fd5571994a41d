"""Properties of the steady flow run (``worker.engine.lumen.run``) for drawn fibres (hypothesis).

Global mass balance of the coupled lumen and layers: what enters with the flow minus what
leaves at the outlet equals what crossed the wall, and that equals what the layers consumed
plus what left their outer face (conservation of the solute in steady flow; common practice).
The rates at the ends here use the drawn F, not the solver's, and the layers' totals are
integrated here by the trapezoid rule along the lumen from direct solves of the layers at the
marched wall concentrations, not from the run's tables. Drawn values are invented inputs.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from worker.engine.lumen import run as flow
from worker.engine.lumen.wall_table import layer_answer
from worker.engine.model import Boundary, Layer, Problem, Reaction


def log_uniform(low: float, high: float):
    return st.floats(min_value=math.log10(low), max_value=math.log10(high)).map(
        lambda e: 10.0**e)


@st.composite
def fibres(draw):
    radius = draw(log_uniform(5e-5, 5e-4))
    d_fluid = draw(log_uniform(5e-10, 3e-9))
    flow_rate = draw(log_uniform(1e-11, 1e-8))
    z_star = draw(log_uniform(1e-2, 0.5))
    length = z_star * 4.0 * flow_rate / (math.pi * d_fluid)
    kind = draw(st.sampled_from(["first_order", "michaelis_menten", "zero_order"]))
    reaction = {"first_order": Reaction("first_order", rate_constant=draw(log_uniform(1e-3, 1.0))),
                "michaelis_menten": Reaction("michaelis_menten", vmax=draw(log_uniform(1e-4, 1e-2)),
                                             km=draw(log_uniform(1e-3, 0.1))),
                "zero_order": Reaction("zero_order", rate=draw(log_uniform(1e-5, 1e-3)))}[kind]
    layers = (Layer("wall", draw(log_uniform(1e-5, 1e-4)), draw(log_uniform(1e-11, 1e-9)),
                    draw(st.floats(0.5, 2.0))),
              Layer("cells", draw(log_uniform(5e-5, 5e-4)), draw(log_uniform(5e-10, 3e-9)),
                    1.0, reaction))
    outer = draw(st.sampled_from([Boundary("symmetry"),
                                  Boundary("mass_transfer", coefficient=1e-6, bulk=0.01)]))
    return Problem("cylinder", radius, layers,
                   Boundary("flow", flow_rate=flow_rate, inlet=0.2, diffusivity=d_fluid),
                   outer, length=length)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(fibres())
def test_the_solute_entering_is_consumed_or_leaves(problem):
    run = flow.solve_flow(problem)
    fine = run.fine
    f = problem.inner_boundary.flow_rate
    through = f * 0.2 - f * float(fine.mixing_cup[-1])
    scale = max(abs(through), f * 0.2 * 1e-9)
    assert abs(through - float(fine.through_wall[-1])) <= 1e-9 * max(scale, f * 0.2)
    layers = flow.layers_problem(problem)
    answers = [layer_answer(layers, float(c)) for c in fine.wall]
    per_length = np.array([a.consumption_per_length + a.outer_per_length for a in answers])
    wall = np.array([2.0 * math.pi * problem.inner * a.wall_flux for a in answers])
    # the layers' own balance at each position (closed form or finite volumes)
    np.testing.assert_allclose(per_length, wall, rtol=1e-6, atol=1e-9 * np.max(np.abs(wall)))
    # the wall's total by the trapezoid rule against the scheme's: agree to the grid band
    # (the first interval holds the inlet's singular flux, so a loose bound)
    trapezoid = float(np.sum(0.5 * (wall[1:] + wall[:-1]) * np.diff(fine.position)))
    assert abs(trapezoid - float(fine.through_wall[-1])) <= 0.05 * abs(trapezoid) + 1e-30
