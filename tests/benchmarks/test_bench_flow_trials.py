"""Benchmark: the design trials of a flow case (``worker.engine.lumen.trials``).

Printed, side by side in one run: the cost per trial of the batched lumen march (2000 trials in
one call) with a field of the lumen varied (the flow rate), with a field of the layers varied
(the cells' vmax: each trial its own wall table) and for linear kinetics (first-order cells:
conductances by the batched closed form), against one trial by the full primary solve
(``lumen.run.flow_figures``, the trial model before); and a whole Monte Carlo of the case as a
user asks it (two blocks of 10^4 trials at least, JCGM 101:2008 §7.9.4, the verification's full
checks and the sensitivity indices included) with each uncertain input. The fibre is the
invented one of ``tests/unit/schemas/test_flow_case.py`` (not data). Medians of repeated
``time.perf_counter`` timings; nothing is asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import copy
import time

import numpy as np

from schemas import validate_case
from schemas.checking import check_case
from tests.benchmarks.timing import median_seconds
from tests.unit.schemas.test_flow_case import FIBRE, uncertain_fibre
from worker.engine.cost import DEFAULT_BUDGETS
from worker.engine.design.targets import Target
from worker.engine.design.trials import TrialModel
from worker.engine.lumen.run import flow_figures

TRIALS = 2000
FIRST_ORDER = {"kind": "first_order", "rate_constant": "0.05 1/s"}


def _fibre(reaction: dict | None = None) -> dict:
    case = copy.deepcopy(FIBRE)
    if reaction is not None:
        case["layers"][1]["reaction"] = reaction
    return case


def test_bench_flow_trial_cost():
    targets = [Target("outlet_concentration"), Target("concentration_min")]
    problem = validate_case(_fibre()).problem
    one = median_seconds(lambda: flow_figures(problem), repeats=3)
    print(f"\nflow trials (Michaelis-Menten fibre): one trial by flow_figures {one * 1e3:.1f} ms")
    for label, case, field in (
            ("flow rate (lumen)", _fibre(), "inner_boundary.flow_rate"),
            ("vmax (layers)", _fibre(), "layers[1].reaction.vmax"),
            ("first-order rate (layers, linear)", _fibre(FIRST_ORDER),
             "layers[1].reaction.rate_constant")):
        varied = validate_case(case).problem
        model = TrialModel(varied, [field], targets)
        model.nominal()  # the nominal solve, once per model
        rng = np.random.default_rng(1)
        x = model.nominal_inputs()[None, :] * (1.0 + 0.1 * rng.standard_normal((TRIALS, 1)))
        seconds = median_seconds(lambda model=model, x=x: model(x), repeats=3) / TRIALS
        print(f"  {label}: {model.method}, {seconds * 1e3:.3f} ms a trial "
              f"({one / seconds:.0f} times faster than flow_figures)")


def test_bench_flow_monte_carlo():
    problem = validate_case(_fibre()).problem
    one = median_seconds(lambda: flow_figures(problem), repeats=3)
    for field in ("inner_boundary.flow_rate", "layers[1].reaction.vmax"):
        case = uncertain_fibre(field)
        start = time.perf_counter()
        # the vmax run's two blocks are charged over the default budget: it runs as a service
        # with its budgets doubled would (as tests/unit/schemas/test_flow_case.py does)
        record = check_case(case, budgets=DEFAULT_BUDGETS.scaled(2.0) if "vmax" in field
                            else DEFAULT_BUDGETS)
        seconds = time.perf_counter() - start
        block = record["uncertainty"]
        print(f"\nflow Monte Carlo, {field} uncertain: {block['trials']} trials, converged "
              f"{block['converged']}, verdict {record['verdict']}: {seconds:.1f} s in all "
              f"(the same trials by flow_figures: about {block['trials'] * one:.0f} s)")
        # correctness costs nothing more here: every trial solved, and the full checks of the
        # verification subset agree with the batched trials and pass
        checks = {c["name"]: c["passed"] for c in record["checks"]}
        assert block["failed_trials"] == 0
        assert checks["uncertainty.subset"] and checks["uncertainty.trial_model"], checks
