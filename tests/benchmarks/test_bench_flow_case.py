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
from unittest import mock

from schemas import validate_case
from schemas.checking import check_case
from tests.benchmarks.test_bench_lumen_fipy import _layers_minimum
from tests.benchmarks.timing import median_seconds
from tests.unit.schemas.test_flow_case import FIBRE
from worker.engine.lumen import run as lumen_run
from worker.engine.lumen import wall_table
from worker.engine.lumen.layer_walls import solve_layers_at
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


def _one_mesh_answer(problem, c_wall):
    """The layers' answer as it was formed before ``layer_accuracy``: one finite-volume solve
    on the default mesh."""
    return wall_table.answer_of(problem, solve_layers_at(problem, c_wall))


def test_bench_michaelis_menten_flow_case_old_and_new_layers():
    """The check with the layers solved the old way (one finite-volume mesh per wall
    concentration, no study of the layers' mesh: before ``lumen.layer_accuracy``) beside the
    check as it is (two meshes, Richardson-extrapolated, and ``convergence.space_layers``),
    measured side by side; each record's body minimum against the layers shot by scipy at that
    record's own outlet wall concentration (``test_bench_lumen_fipy._layers_minimum``)."""
    problem = validate_case(copy.deepcopy(FIBRE)).problem
    layers = layers_problem(problem)

    def check():
        return check_case(copy.deepcopy(FIBRE))

    with mock.patch.object(wall_table, "layer_answer", _one_mesh_answer), \
            mock.patch.object(lumen_run, "layer_answer", _one_mesh_answer), \
            mock.patch.object(lumen_run, "layer_studies", lambda run, layers: []):
        old_record = check()
        old_seconds = median_seconds(check)
    new_record = check()
    new_seconds = median_seconds(check)
    print(f"\nMichaelis-Menten fibre, check_case: layers on one mesh (old) {old_seconds:.3f} s, "
          f"two meshes extrapolated (new) {new_seconds:.3f} s, ratio new / old "
          f"{new_seconds / old_seconds:.2f}")
    for name, record in (("old", old_record), ("new", new_record)):
        low = record["quantities"]["concentration_min"]
        shot = _layers_minimum(layers, record["series"]["axial"]["wall"][-1])
        error = abs(low["value"] - shot)
        space = next((c for c in record["checks"] if c["name"] == "convergence.space_layers"),
                     None)
        print(f"  {name}: body minimum {low['value']:.9g} (band {low['uncertainty']:.2e}), shot "
              f"at its outlet wall {shot:.9g}: error {error:.2e} ({error / shot:.1e} of it, "
              f"{error / low['uncertainty']:.2g} times the band); outlet mixing cup band "
              f"{record['quantities']['outlet_concentration']['uncertainty']:.2e}; "
              f"convergence.space_layers "
              f"{'not run' if space is None else format(space['value'], '.2e')}")
