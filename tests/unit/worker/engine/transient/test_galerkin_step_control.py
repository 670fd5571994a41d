"""Step control of the Galerkin stepper (``transient.galerkin_steps``): the step-size factor
after a rejection, and the landing of a step on the instant a node's undissolved solute
would run out (``galerkin._System.event_spans``).

Check values are definitions: the standard controller factor 0.9 err^(-1/p) (E. Hairer,
G. Wanner, *Solving Ordinary Differential Equations II*, 2nd ed., 1996, section IV.9); an error
that scales as h^p shows order p between two step sizes; a saturated node's undissolved amount
falls at the rate of its balance (the node's implicit Euler equation with u held at its limit).
Scenario values are invented.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.transient import galerkin, galerkin_steps
from worker.engine.transient.galerkin_steps import ORDER, SAFETY, SHRINK, _shrink


def test_first_rejection_uses_the_method_order():
    assert _shrink(2.0, 10.0, None) == pytest.approx(SAFETY * 2.0 ** (-1.0 / ORDER))


@pytest.mark.parametrize("order", [1.0, 2.0])
def test_second_rejection_uses_the_lower_order_the_two_attempts_show(order):
    # error = C h^order: the two attempts at h = 10 and h = 8 show that order
    e1, e2 = 3.0 * 1.0**order, 3.0 * 0.8**order
    factor = _shrink(e2, 8.0, (0.0, 10.0, e1))
    assert factor == pytest.approx(max(SHRINK, SAFETY * e2 ** (-1.0 / order)))
    # and it shrinks harder than the method's own order would
    assert factor < SAFETY * e2 ** (-1.0 / ORDER)


def test_an_observed_order_above_the_method_order_is_not_used():
    e1, e2 = 10.0 * 1.0**6, 10.0 * 0.8**6
    assert _shrink(e2, 8.0, (0.0, 10.0, e1)) == pytest.approx(SAFETY * e2 ** (-1.0 / ORDER))


def test_an_error_that_did_not_fall_shrinks_at_the_lowest_order_and_never_below_the_bound():
    factor = _shrink(1.5, 8.0, (0.0, 10.0, 1.4))
    lowest = galerkin_steps.LOWEST_ORDER
    assert factor == pytest.approx(max(SHRINK, SAFETY * 1.5 ** (-1.0 / lowest)))
    assert _shrink(1e6, 8.0, (0.0, 10.0, 1e7)) == SHRINK
    assert _shrink(math.inf, 8.0, None) == SHRINK


def _system():
    problem = Problem("slab", 0.0, (Layer("matrix", 1e-3, 1e-12, initial=10.0, solubility=1.0),),
                      Boundary("symmetry"), Boundary("concentration", 0.0),
                      Regime("transient", 1e5, (1e5,)))
    mesh = galerkin.build_galerkin_mesh(problem, (16,))
    return galerkin._System(problem, [mesh], 1.0)


def test_a_step_lands_on_the_instant_a_node_runs_out():
    system = _system()
    y = system.start_state()
    size = system.size
    # saturated everywhere; undissolved solute left only at the sink face's neighbour
    node = size - 2
    y[size:2 * size] = 0.0
    y[size + node] = 1e-3 * system.undissolved_capacity[node]
    flow, _, _ = system.balance(y[:size], 1.0, slopes=False)
    assert flow[node] > 0.0
    spans = system.event_spans(y, 1.0, galerkin_steps.StepHistory(ts=[0.0], states=[y]),
                               flow)
    expected = y[size + node] / flow[node]
    assert spans == [(pytest.approx(expected), galerkin.SWITCH_LANDING,
                      galerkin.SWITCH_SLIVER)]
    # a longer step is cut to land on it; a shorter one is kept, and so is a step for which
    # the span is only a sliver
    assert system.limit_to_events(spans, 1.0, 2.0 * expected) == pytest.approx(
        galerkin.SWITCH_LANDING * expected)
    assert system.limit_to_events(spans, 1.0, 0.5 * expected) == 0.5 * expected
    long_step = 1.01 * expected / galerkin.SWITCH_SLIVER
    assert system.limit_to_events(spans, 1.0, long_step) == long_step
    # nothing left to dissolve: no span
    y[size + node] = 0.0
    assert system.event_spans(y, 1.0, galerkin_steps.StepHistory(ts=[0.0], states=[y]),
                              flow) == []


def test_rounds_reading_the_first_rounds_matrix_give_the_substeps_built_afresh(monkeypatch):
    # The sequences' rounds take the leading part of the first round's substep matrix where the
    # copies' lumped masses agree to the bit; the same step with every matrix built afresh
    # gives the same end states, to the last bit.
    system = _system()
    y = system.start_state()
    size = system.size
    # the front halfway: the outer half of the nodes dissolved, falling linearly to the sink
    outer = np.arange(size) >= size // 2
    y[:size][outer] = np.linspace(1.0, 0.0, int(outer.sum()))
    y[size:2 * size][outer] = 0.0
    linear = system.balance(y[:size], 1.0, slopes=True)
    h = 2e3
    shared = galerkin_steps._euler_together(system, y, h, linear[1:], galerkin_steps.StepHistory(),
                                            linear[0])
    assert system._mass_shared
    monkeypatch.setattr(galerkin_steps, "_shared_mass", lambda system, copies: False)
    afresh = galerkin_steps._euler_together(system, y, h, linear[1:], galerkin_steps.StepHistory(),
                                            linear[0])
    assert sorted(shared) == sorted(afresh) == sorted(galerkin_steps.SEQUENCE)
    for n in shared:
        assert shared[n].tobytes() == afresh[n].tobytes()


def test_the_stiffness_along_the_chain_of_nodes_sums_each_elements_flow_as_the_gather_does():
    # A u of several meshes side by side, along the chain of nodes, equals the element flows
    # gathered per node (-flow to the inner node, +flow to the outer one), to the last bit.
    system = _system().replica(3)
    u = np.random.default_rng(7).uniform(-1.0, 2.0, system.size)
    flow = system.stiffness * (u[system.right] - u[system.left])
    assert system.stiffness_apply(u).tobytes() == system._gather(-flow, flow).tobytes()
