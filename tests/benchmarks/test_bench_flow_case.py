"""Benchmark: a steady flow case with Michaelis-Menten uptake checked end to end (issue 16).

Printed: ``check_case`` of the invented hollow fibre of ``tests/unit/schemas/test_flow_case.py``
(a 100 um lumen, a 50 um wall and 300 um of cells with Michaelis-Menten uptake; invented, not
data), and the parts of its flow run: the wall table (nodes and seconds), the five marches of the
studies in r and z, and one trial by the full primary solve (``flow_figures``). Medians of repeated
``time.perf_counter`` timings; nothing is asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import copy

from schemas import validate_case
from schemas.checking import check_case
from tests.benchmarks.timing import median_seconds
from tests.unit.schemas.test_flow_case import FIBRE
from worker.engine.lumen.run import flow_figures, layers_problem, solve_flow
from worker.engine.lumen.wall_table import tabulate

#: The run's table tolerance with the default limits: 0.1 x min(cross_check 1e-4,
#: mass_balance 1e-6) (``lumen.run.solve_flow``).
TABLE_TOLERANCE = 1e-7


def test_bench_michaelis_menten_flow_case():
    problem = validate_case(copy.deepcopy(FIBRE)).problem
    layers = layers_problem(problem)
    run = solve_flow(problem)
    tolerance = TABLE_TOLERANCE
    print(f"\nflow case (Michaelis-Menten fibre): the run's wall table {len(run.table.nodes)} "
          f"nodes; a table to {tolerance:g} alone "
          f"{median_seconds(lambda: tabulate(layers, 0.2, tolerance)):.3f} s")
    print(f"  solve_flow (table + 5 marches, finest {max(run.by_mesh)}): "
          f"{median_seconds(lambda: solve_flow(problem)):.3f} s")
    print("  one trial by the full primary solve (flow_figures; design trials now march in "
          f"batches, test_bench_flow_trials.py): "
          f"{median_seconds(lambda: flow_figures(problem)):.3f} s")
    record = check_case(copy.deepcopy(FIBRE))
    print(f"  check_case: {median_seconds(lambda: check_case(copy.deepcopy(FIBRE))):.3f} s, "
          f"verdict {record['verdict']}")
