"""Benchmark: the trial model on 10,000 trials against a plain loop, one trial at a time.

Targets (the design package's brief): 10,000 trials of (a) a linear steady case in <= 1 s,
(b) a two-layer Michaelis-Menten steady case in <= 5 s, (c) a single-layer transient release
with t50 and t90 in <= 5 s, each at least 100x faster than a loop of ``scipy.integrate.
solve_bvp`` (steady) or of the eigenfunction series (transient) one trial at a time, timed on
``LOOP_TRIALS`` trials and extrapolated. The loop's accuracy is printed beside it (its largest
difference from the trial model on the looped trials). Figures printed side by side, nothing
asserted about time (shared, noisy machines). Run with ``make bench``.
"""

from __future__ import annotations

import time

import numpy as np
from scipy.integrate import solve_bvp

from worker.engine.design.paths import with_values
from worker.engine.design.targets import Target
from worker.engine.design.trials import TrialModel
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient import exact_series
from worker.engine.transient.scales import first_crossing

TRIALS = 10_000
LOOP_TRIALS = 100
DAY = 86400.0
BVP_TOLERANCE = 1e-8


def _two_layer(reaction: Reaction) -> Problem:
    return Problem("slab", 0.0, (Layer("wall", 4e-5, 1.5e-9, 0.8),
                                 Layer("cells", 1.5e-4, 2e-9, 1.0, reaction)),
                   Boundary("concentration", value=0.2), Boundary("flux", value=0.0))


def _bvp_flux(problem: Problem) -> float:
    """Inner-face flux of the two-layer slab by solve_bvp, both layers mapped onto s in [0, 1]:
    state (u_w, J_w, u_c, J_c), u = C/K continuous at the interface, J = -D K du/dx."""
    wall, cells = problem.layers

    def fun(s, y):
        rate = cells.reaction.rate_at(np.maximum(cells.partition * y[2], 0.0))
        return np.vstack([-wall.thickness * y[1] / (wall.diffusivity * wall.partition),
                          np.zeros_like(s),
                          -cells.thickness * y[3] / (cells.diffusivity * cells.partition),
                          -cells.thickness * rate])

    def bc(ya, yb):
        return np.array([ya[0] - problem.inner_boundary.value, yb[0] - ya[2], yb[1] - ya[3],
                         yb[3]])

    s = np.linspace(0.0, 1.0, 30)
    y = np.zeros((4, s.size))
    y[0] = y[2] = problem.inner_boundary.value
    solution = solve_bvp(fun, bc, s, y, tol=BVP_TOLERANCE, max_nodes=100_000)
    return float(solution.y[1, 0]) if solution.success else float("nan")


def _series_events(problem: Problem) -> tuple[float | None, float | None]:
    duration = float(problem.regime.duration or 0.0)
    scan = np.geomspace(duration * 1e-4, duration, 400)
    series = exact_series.solve_transient_exact(problem, scan)
    assert series is not None

    def fraction(t):
        _, out_a, out_b, _ = series.amounts_at(t)
        return (out_a + out_b) / series.initial_load

    return first_crossing(fraction, scan, 0.5), first_crossing(fraction, scan, 0.9)


def _compare(label, model, x, loop_one, loop_column):
    start = time.perf_counter()
    y = model(x)
    batched = time.perf_counter() - start
    start = time.perf_counter()
    looped = [loop_one(with_values(model.problem, dict(zip(model.fields, row, strict=True))))
              for row in x[:LOOP_TRIALS]]
    per_trial = (time.perf_counter() - start) / LOOP_TRIALS
    looped_values = np.array(looped, dtype=float).reshape(LOOP_TRIALS, -1)
    reference = y[:LOOP_TRIALS, loop_column]
    spread = np.nanmax(np.abs(looped_values - reference) / np.abs(reference))
    print(f"\n{label}: trial model ({model.method}) {TRIALS} trials {batched:.3f} s "
          f"({batched / TRIALS * 1e6:.1f} us/trial, NaN {int(np.isnan(y).sum())}); loop "
          f"{per_trial * 1e3:.2f} ms/trial x {TRIALS} = {per_trial * TRIALS:.1f} s; ratio "
          f"{per_trial * TRIALS / batched:.0f}x; loop vs model, largest relative difference "
          f"{spread:.1e}")


def test_bench_trials():
    rng = np.random.default_rng(20261204)
    linear = _two_layer(Reaction("first_order", rate_constant=0.05))
    model = TrialModel(linear, ["layers[0].diffusivity", "layers[1].reaction.rate_constant",
                                "layers[1].thickness"],
                       [Target("flux_inner"), Target("concentration_min"),
                        Target("concentration_min", layer=1)])
    x = np.column_stack([1.5e-9 * rng.lognormal(0, 0.3, TRIALS),
                         0.05 * rng.lognormal(0, 0.3, TRIALS),
                         1.5e-4 * rng.lognormal(0, 0.2, TRIALS)])
    _compare("(a) linear steady, two layers", model, x, lambda p: [_bvp_flux(p)], [0])

    saturable = _two_layer(Reaction("michaelis_menten", vmax=4e-3, km=5e-3))
    model = TrialModel(saturable, ["layers[1].reaction.vmax", "layers[0].diffusivity"],
                       [Target("flux_inner"), Target("concentration_min")])
    x = np.column_stack([4e-3 * rng.lognormal(0, 0.3, TRIALS),
                         1.5e-9 * rng.lognormal(0, 0.3, TRIALS)])
    _compare("(b) Michaelis-Menten steady, two layers", model, x, lambda p: [_bvp_flux(p)],
             [0])

    release = Problem("slab", 0.0, (Layer("film", 2e-4, 1e-13, 1.0, initial=10.0),),
                      Boundary("symmetry"), Boundary("concentration", value=0.0),
                      regime=Regime("transient", 30 * DAY, (1 * DAY, 7 * DAY, 30 * DAY)))
    model = TrialModel(release, ["layers[0].diffusivity", "layers[0].thickness"],
                       [Target("t50"), Target("t90")])
    x = np.column_stack([1e-13 * rng.lognormal(0, 0.3, TRIALS),
                         2e-4 * rng.lognormal(0, 0.1, TRIALS)])
    _compare("(c) transient release, t50 and t90", model, x, _series_events, [0, 1])
