"""Benchmark: design runs end to end (issue "Speed"), figures and ratios side by side.

* 10,000 Monte Carlo trials through ``DesignRunner.uncertainty`` (sampling, the trial model,
  statistics, sensitivity indices, the verification subset's full checks, histograms), with
  the time of each part, for (a) a linear steady two-layer slab, (b) the same slab with
  Michaelis-Menten uptake, (c) a single-layer sheet releasing into a sink (t50, t90); each
  beside a plain loop, one trial at a time, of ``scipy.integrate.solve_bvp`` (steady, tolerance
  ``BVP_TOLERANCE``) or the eigenfunction series (transient) on ``LOOP_TRIALS`` trials,
  extrapolated to 10,000. Accuracy matched: the loop's figures are compared with the trial
  model's on the same trials and the largest relative difference is printed beside the ratio
  (the trial model carries the full check's grid accuracy; the loop is asked for 1e-8).
* (d) an encapsulated islet (zero-order core with a depleted zone behind a capsule and a film),
  20,000 trials of the trial model, beside the trial-by-trial path it replaces.
* A design limit on a steady case (the bracketing search, and the full check at the limit).
* Memory of a Monte Carlo run: tracemalloc peak for ``max_trials`` 1e4 and 1e6 with a model
  that never meets its stopping rule (every block runs): flat.

Nothing asserted about time (shared, noisy machines). Run with ``make bench``.
"""

from __future__ import annotations

import time
import tracemalloc
from collections.abc import Callable

import numpy as np

from tests.benchmarks import test_bench_trials as bench_trials
from tests.benchmarks.test_bench_trials import _bvp_flux, _series_events, _two_layer
from worker.engine.design import runner as runner_module
from worker.engine.design.monte_carlo import Bound, propagate
from worker.engine.design.paths import resolve, with_values
from worker.engine.design.request import (
    DesignRequest,
    LimitRequest,
    UncertainInput,
    UncertaintyRequest,
)
from worker.engine.design.requirements import Requirement
from worker.engine.design.runner import DesignRunner
from worker.engine.design.sampling import InputDistribution, UncertaintySpec
from worker.engine.design.targets import Target
from worker.engine.design.trials import TrialModel, _steady_one
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.run import run_problem

TRIALS = 10_000
LOOP_TRIALS = 100
#: solve_bvp's tolerance in the loop: tight enough that the loop's figures meet the trial
#: model's (the full check's grid accuracy) to about 1e-8, the difference printed.
BVP_TOLERANCE = 1e-10
DAY = 86400.0

# invented scenarios (benchmark inputs, not check values)
LINEAR = _two_layer(Reaction("first_order", rate_constant=0.05))
SATURABLE = _two_layer(Reaction("michaelis_menten", vmax=4e-3, km=5e-3))
RELEASE = Problem("slab", 0.0, (Layer("film", 2e-4, 1e-13, 1.0, initial=10.0),),
                  Boundary("symmetry"), Boundary("concentration", value=0.0),
                  regime=Regime("transient", 30 * DAY, (1 * DAY, 7 * DAY, 30 * DAY)))
ISLET = Problem("sphere", 0.0,
                (Layer("islet", 125e-6, 1.3e-9, 1.0, Reaction("zero_order", rate=0.034)),
                 Layer("capsule", 175e-6, 2.5e-9, 1.0)),
                Boundary("symmetry"), Boundary("mass_transfer", coefficient=1e-5, bulk=0.052))


def _lognormal(problem: Problem, path: str, cv: float) -> UncertainInput:
    ref = resolve(problem, path)
    nominal = TrialModel(problem, [ref], [Target("concentration_min")] if
                         problem.regime.kind == "steady" else [Target("t50")]).nominal_inputs()
    return UncertainInput(ref, "lognormal", float(nominal[0]), (0.0, True), relative_sd=cv)


def _request(problem: Problem, paths: list[str], requirement: Requirement) -> DesignRequest:
    inputs = tuple(_lognormal(problem, p, 0.3) for p in paths)
    # five significant digits are never reached: exactly max_trials trials run
    return DesignRequest(requirements=(requirement,), uncertainty=UncertaintyRequest(
        inputs=inputs, significant_digits=5, seed=20261205, max_trials=TRIALS))


def _timed(function: Callable, *args):
    start = time.perf_counter()
    value = function(*args)
    return value, time.perf_counter() - start


class _Clock:
    """Wraps the runner's parts to time them: the trial model, sensitivity, verification."""

    def __init__(self, monkeypatch):
        self.parts: dict[str, float] = {}
        self.inside = False
        for module, name, label in ((runner_module, "sensitivity", "sensitivity indices"),
                                    (runner_module.DesignRunner, "_verify",
                                     "verification subset (full checks)"),
                                    (runner_module, "_histogram", "histograms")):
            original = getattr(module, name)
            monkeypatch.setattr(module, name, self._wrap(original, label))
        original_call = TrialModel.__call__
        monkeypatch.setattr(TrialModel, "__call__", self._wrap(original_call, "trial model"))

    def _wrap(self, function, label):
        """Times the outermost timed call only: the trial model called by the sensitivity
        indices or the verification counts under them."""
        def timed(*args, **kwargs):
            if self.inside:
                return function(*args, **kwargs)
            self.inside = True
            start = time.perf_counter()
            try:
                return function(*args, **kwargs)
            finally:
                self.inside = False
                self.parts[label] = self.parts.get(label, 0.0) + time.perf_counter() - start
        return timed


def _loop(problem: Problem, fields, x, one) -> tuple[np.ndarray, float]:
    start = time.perf_counter()
    values = [one(with_values(problem, dict(zip(fields, row, strict=True))))
              for row in x[:LOOP_TRIALS]]
    return np.array(values, dtype=float).reshape(LOOP_TRIALS, -1), \
        (time.perf_counter() - start) / LOOP_TRIALS


def _two_blocks(request: UncertaintyRequest, seed: int) -> UncertaintySpec:
    """The runner's spec in two blocks of 5,000 (JCGM 101's default block is 10,000 and a run
    needs two of them)."""
    return UncertaintySpec(
        inputs=tuple(runner_module._distribution(s) for s in request.inputs), seed=seed,
        max_trials=request.max_trials, correlations=request.correlations,
        coverage=request.coverage, significant_digits=request.significant_digits,
        block_size=TRIALS // 2)


def _uncertainty_row(label, problem, paths, requirement, loop_one, columns, monkeypatch):
    request = _request(problem, paths, requirement)
    monkeypatch.setattr(runner_module, "uncertainty_spec", _two_blocks)
    clock = _Clock(monkeypatch)
    design = DesignRunner(problem, None, request, run_problem)
    block, elapsed = _timed(design.uncertainty)
    monkeypatch.undo()
    monkeypatch.setattr(bench_trials, "BVP_TOLERANCE", BVP_TOLERANCE)
    model = TrialModel(problem, [resolve(problem, p) for p in paths],
                       [Target(c) for c in columns])
    rng = np.random.default_rng(5)
    x = model.nominal_inputs() * rng.lognormal(0.0, 0.3, (LOOP_TRIALS, len(paths)))
    fast = model(x)
    looped, per_trial = _loop(problem, model.fields, x, loop_one)
    difference = float(np.nanmax(np.abs(looped - fast) / np.abs(fast)))
    loop_total = per_trial * TRIALS
    print(f"\n{label}: {block['trials']} trials, {model.method}; "
          f"{block['verification']['trials_checked']} full checks in the verification subset")
    print(f"  DesignRunner.uncertainty {elapsed:7.2f} s   plain loop {per_trial * 1e3:7.2f} "
          f"ms/trial x {TRIALS} = {loop_total:8.1f} s   ratio {loop_total / elapsed:6.0f}x"
          f" (trial model alone {loop_total / clock.parts['trial model']:6.0f}x)")
    print(f"  loop vs trial model, largest relative difference {difference:.1e}")
    rest = elapsed - sum(clock.parts.values())
    for part, seconds in [*clock.parts.items(), ("sampling, statistics, the rest", rest)]:
        print(f"    {part:<36}{seconds:7.3f} s")


def test_bench_uncertainty_of_three_cases(monkeypatch):
    _uncertainty_row("(a) linear steady, two layers", LINEAR,
                     ["layers[0].diffusivity", "layers[1].reaction.rate_constant"],
                     Requirement("R", "concentration_min", low=0.01, unit="mol/m^3"),
                     lambda p: [_bvp_flux(p)], ["flux_inner"], monkeypatch)
    _uncertainty_row("(b) Michaelis-Menten steady, two layers", SATURABLE,
                     ["layers[1].reaction.vmax", "layers[0].diffusivity"],
                     Requirement("R", "concentration_min", low=0.1, unit="mol/m^3"),
                     lambda p: [_bvp_flux(p)], ["flux_inner"], monkeypatch)
    _uncertainty_row("(c) transient release, t50 and t90", RELEASE,
                     ["layers[0].diffusivity", "layers[0].thickness"],
                     Requirement("R", "t90", high=20 * DAY, unit="s"),
                     _series_events, ["t50", "t90"], monkeypatch)


def test_bench_islet_trials():
    n = 2 * TRIALS
    model = TrialModel(ISLET, ["layers[0].reaction.rate", "layers[1].thickness"],
                       [Target("concentration_min", layer=1), Target("flux_outer")])
    rng = np.random.default_rng(9)
    x = model.nominal_inputs() * rng.lognormal(0.0, 0.3, (n, 2))
    y, batched = _timed(model, x)
    start = time.perf_counter()
    alone = np.array([_steady_one(with_values(ISLET, dict(zip(model.fields, row, strict=True))),
                                  model.targets) for row in x[:LOOP_TRIALS]])
    per_trial = (time.perf_counter() - start) / LOOP_TRIALS
    difference = float(np.nanmax(np.abs(alone - y[:LOOP_TRIALS]) / np.abs(alone)))
    print(f"\n(d) islet capsule, depleted core: {n} trials {batched:.2f} s ({model.method}, "
          f"NaN {int(np.isnan(y).sum())}); trial by trial {per_trial * 1e3:.2f} ms x {n} = "
          f"{per_trial * n:.1f} s; ratio {per_trial * n / batched:.0f}x; largest relative "
          f"difference {difference:.1e}")


def test_bench_design_limit():
    slab = _two_layer(Reaction("first_order", rate_constant=0.05))
    ref = resolve(slab, "layers[1].thickness")
    requirement = Requirement("R", "concentration_min", low=0.05, unit="mol/m^3")
    request = DesignRequest(requirements=(requirement,),
                            limit=LimitRequest(ref, "R", 5e-5, 2e-3, "m"))
    design = DesignRunner(slab, None, request, run_problem)
    checks = []

    def counted(problem, independent):
        start = time.perf_counter()
        outcome = run_problem(problem, independent)
        checks.append(time.perf_counter() - start)
        return outcome

    design.check = counted
    block, elapsed = _timed(design.limit)
    print(f"\ndesign limit, linear steady slab (cells layer thickness): {elapsed:.3f} s "
          f"(target 0.5 s): search {elapsed - sum(checks):.3f} s over {block['evaluations']} "
          f"evaluations, full check at the limit {sum(checks):.3f} s; limit "
          f"{block['value']:.6g} m, verdict {block['verdict']}")


def _never_converges(x: np.ndarray) -> np.ndarray:
    return x.sum(axis=1, keepdims=True)


def test_bench_memory_is_flat_in_max_trials():
    inputs = tuple(InputDistribution(f"x{i}", "normal", 1.0, sd=0.1) for i in range(4))
    print("\nMonte Carlo memory (tracemalloc peak), a model that never meets its stopping rule:")
    for max_trials in (10_000, 1_000_000):
        spec = UncertaintySpec(inputs, seed=1, max_trials=max_trials, significant_digits=6,
                               block_size=5000)
        tracemalloc.start()
        start = time.perf_counter()
        result = propagate(spec, _never_converges, ["y"], [Bound(0, 3.5, None, "R")])
        elapsed = time.perf_counter() - start
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        print(f"  max_trials {max_trials:>9,}: {result.trials:>9,} trials in {result.blocks} "
              f"blocks, peak {peak / 2**20:6.2f} MiB, {elapsed:.2f} s")
