"""Benchmark: a steady flow case with Michaelis-Menten uptake checked end to end (issue 16).

Printed: ``check_case`` of an invented hollow fibre (a 100 um lumen, a 50 um wall and 300 um of
cells with Michaelis-Menten uptake; invented benchmark input, not data), and the parts of its
flow run: the wall table (nodes and seconds), the five marches of the studies in r and z, and
the design trial (``flow_figures``). Medians of repeated ``time.perf_counter`` timings; nothing
is asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import copy
import statistics
import time

from schemas import validate_case
from schemas.checking import check_case
from worker.engine.lumen.run import flow_figures, layers_problem, solve_flow
from worker.engine.lumen.wall_table import tabulate

REPEATS = 5
#: The run's table tolerance with the default limits: 0.1 x min(cross_check 1e-4,
#: mass_balance 1e-6) (``lumen.run.solve_flow``).
TABLE_TOLERANCE = 1e-7
FIBRE = {
    "schema_version": 1,
    "title": "invented hollow fibre (benchmark input)",
    "geometry": "cylinder", "inner": "100 um", "length": "10 cm",
    "layers": [
        {"name": "fibre wall", "thickness": "50 um", "diffusivity": "1e-10 m^2/s"},
        {"name": "cells", "thickness": "300 um", "diffusivity": "1.5e-9 m^2/s",
         "reaction": {"kind": "michaelis_menten", "vmax": "2e-3 mol/m^3/s",
                      "km": "5e-3 mol/m^3"}},
    ],
    "inner_boundary": {"kind": "flow", "flow_rate": "0.072 mL/min", "inlet": "0.2 mol/m^3",
                       "diffusivity": "2e-9 m^2/s"},
    "outer_boundary": {"kind": "symmetry"},
    "regime": {"kind": "steady"},
}


def _median_seconds(fn) -> float:
    times = []
    for _ in range(REPEATS):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def test_bench_michaelis_menten_flow_case():
    problem = validate_case(copy.deepcopy(FIBRE)).problem
    layers = layers_problem(problem)
    run = solve_flow(problem)
    tolerance = TABLE_TOLERANCE
    print(f"\nflow case (Michaelis-Menten fibre): the run's wall table {len(run.table.nodes)} "
          f"nodes; a table to {tolerance:g} alone "
          f"{_median_seconds(lambda: tabulate(layers, 0.2, tolerance)):.3f} s")
    print(f"  solve_flow (table + 5 marches, finest {max(run.by_mesh)}): "
          f"{_median_seconds(lambda: solve_flow(problem)):.3f} s")
    print(f"  design trial (flow_figures): {_median_seconds(lambda: flow_figures(problem)):.3f} s")
    record = check_case(copy.deepcopy(FIBRE))
    print(f"  check_case: {_median_seconds(lambda: check_case(copy.deepcopy(FIBRE))):.3f} s, "
          f"verdict {record['verdict']}")
