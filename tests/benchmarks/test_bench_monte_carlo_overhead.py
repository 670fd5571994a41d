"""Benchmark: the overhead of the Monte Carlo machinery itself (sampling and statistics).

Target (design numerics): 10,000 trials of a trivial numpy model (the sum of the inputs) cost
well under 0.1 s through ``propagate`` (two blocks of 5,000, copula, block statistics, sample,
worst trial, merging). Printed beside it: the bare numpy baseline (normal draws, the model,
mean, standard deviation and two quantiles), each sampler, marginals whose inverse distribution
is costlier (lognormal, truncated normal, triangular), and the Sobol indices at N = 1024.
Medians of repeated ``time.perf_counter`` timings, side by side in one run; figures printed,
nothing asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import statistics
import time

import numpy as np

from worker.engine.design.monte_carlo import Bound, propagate
from worker.engine.design.sampling import InputDistribution, UncertaintySpec, draw
from worker.engine.design.sensitivity import sensitivity

REPEATS = 15
TRIALS = 10_000
TARGET_SECONDS = 0.1

# invented scenario (benchmark inputs, not check values)
NORMALS = tuple(InputDistribution(f"x{i}", "normal", 1.0, sd=0.1) for i in range(4))
MIXED = (InputDistribution("layers[0].diffusivity", "lognormal", 1e-10, relative_sd=0.3),
         InputDistribution("layers[0].reaction.rate", "normal", 3e-3, sd=1e-3, domain=0.0,
                           domain_open=True),
         InputDistribution("outer_boundary.bulk", "uniform", 0.17, low=0.15, high=0.2),
         InputDistribution("layers[1].thickness", "triangular", 1.75e-4, low=1.5e-4,
                           mode=1.75e-4, high=2e-4))


def _median_time(function, repeats=REPEATS) -> float:
    function()
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def _model(x):
    return x.sum(axis=1, keepdims=True)


def _spec(inputs, sampler="latin_hypercube", block=5000, correlations=()):
    # six significant digits: never converged, so both blocks always run
    return UncertaintySpec(inputs, seed=1, max_trials=TRIALS, block_size=block,
                           sampler=sampler, significant_digits=6, correlations=correlations)


def _bare_numpy():
    x = np.random.default_rng(1).normal(1.0, 0.1, (TRIALS, 4))
    y = _model(x)[:, 0]
    return y.mean(), y.std(ddof=1), np.quantile(y, [0.025, 0.975])


def test_monte_carlo_overhead_for_ten_thousand_trials():
    requirement = [Bound(0, 3.5, None, "R")]
    bare = _median_time(_bare_numpy)
    print()
    print(f"{'10,000 trials of a numpy sum':<46}{'median':>10}{'vs bare':>9}"
          f"  (target well under {TARGET_SECONDS:g} s)")
    print(f"{'bare numpy: draw, model, mean, sd, quantiles':<46}{bare * 1e3:>7.2f} ms{1:>9.1f}")
    rows = [
        ("propagate, 4 normals, latin hypercube", _spec(NORMALS)),
        ("propagate, 4 normals, random", _spec(NORMALS, "random")),
        ("propagate, 4 normals, sobol (2 x 4096)", _spec(NORMALS, "sobol", 4096)),
        ("propagate, 4 normals, correlated pair", _spec(NORMALS, correlations=((0, 1, 0.5),))),
        ("propagate, mixed marginals (lognormal ...)", _spec(MIXED)),
    ]
    for label, spec in rows:
        elapsed = _median_time(lambda s=spec: propagate(s, _model, ["y"], requirement))
        print(f"{label:<46}{elapsed * 1e3:>7.2f} ms{elapsed / bare:>9.1f}")
    spec = _spec(MIXED)
    sampling_only = _median_time(lambda: (draw(spec, 5000, 0), draw(spec, 5000, 1)))
    print(f"{'  of which draw() of the mixed marginals':<46}{sampling_only * 1e3:>7.2f} ms"
          f"{sampling_only / bare:>9.1f}")
    sobol = _median_time(lambda: sensitivity(spec, _model, ["y"], base_points=1024), repeats=5)
    print(f"{'sensitivity, N = 1024 (6,153 model rows)':<46}{sobol * 1e3:>7.2f} ms"
          f"{sobol / bare:>9.1f}")
