"""Answering a case's design request: input uncertainty, a design limit, a sweep.

* Uncertainty: Monte Carlo (JCGM 101:2008, adaptive, :mod:`~worker.engine.design.monte_carlo`)
  on the fast primary solve (:class:`~worker.engine.design.trials.TrialModel`), sensitivity
  (:mod:`~worker.engine.design.sensitivity`), then a *verification subset* — the worst trial
  for each requirement, the median trial and a few random ones — checked in full, each by
  every route of the calculation, to show that the trials' figures are right and that their
  numerical uncertainty is small against the spread the inputs cause.
* Design limit: the value of one input at which a requirement's margin is zero, every other
  input nominal (:func:`~worker.engine.design.limit_search.find_limit`), and the full check
  there.
* Sweep: the full check at each value of one input.

A full check is ``check(problem, independent)`` → :class:`~worker.engine.outcome.Outcome`
(``worker.engine.run.run_problem``): the same input field replaced in both readings of the
case. The input checks of the case (units, interpretation) are not repeated for a varied value,
which the engine sets, not the document.
"""

from __future__ import annotations

import math
import secrets
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from worker.engine.design.agreement import (
    AGREEMENT_FLOOR,
    model_disagreement,
    subset_record,
)
from worker.engine.design.limit_search import find_limit
from worker.engine.design.monte_carlo import (
    BlockResult,
    Bound,
    MonteCarloAccumulator,
    MonteCarloResult,
    compute_block,
)
from worker.engine.design.paths import FieldRef, value_of, with_values
from worker.engine.design.propagation_law import (
    design_points,
    full_check_at_every_point,
    input_estimate,
    propagate,
)
from worker.engine.design.propagation_record import (
    PointCheck,
    propagation_block,
    verification_block,
)
from worker.engine.design.request import (
    LAW_OF_PROPAGATION,
    MONTE_CARLO,
    DesignRequest,
    UncertaintyRequest,
)
from worker.engine.design.requirements import Requirement, design_block, read_figure
from worker.engine.design.sampling import InputDistribution, UncertaintySpec
from worker.engine.design.sensitivity import sensitivity
from worker.engine.design.targets import FLOW, Target, target_dimension
from worker.engine.design.trials import TrialModel
from worker.engine.model import Problem
from worker.engine.outcome import Outcome
from worker.engine.units import si_unit

__all__ = ["BlockScheduler", "DesignRunner", "FullCheck", "sequential_blocks"]

#: A full check of a problem and its independent reading.
FullCheck = Callable[[Problem, Problem | None], Outcome]
#: Runs Monte Carlo blocks until the accumulator is done: ``scheduler(compute, accumulator)``,
#: ``compute(index)`` the block in this process. A scheduler may instead have other processes
#: compute blocks (:meth:`DesignRunner.block` on the same case and seed gives the same block),
#: but it adds them to the accumulator in block order.
BlockScheduler = Callable[[Callable[[int], BlockResult], MonteCarloAccumulator], None]


def sequential_blocks(compute: Callable[[int], BlockResult],
                      accumulator: MonteCarloAccumulator) -> None:
    """The default scheduler: one block after another, in this process."""
    while not accumulator.done:
        accumulator.add(compute(accumulator.blocks))

#: Random trials added to the verification subset (besides the worst and the median ones).
RANDOM_CHECKS = 2
#: Bins of the histogram a record keeps of each figure (from the bounded trial sample).
HISTOGRAM_BINS = 30
#: Base points of the Sobol' indices (power of 2) by how the trial model solves: the batched
#: closed form costs microseconds a trial, batched finite volumes about a third of a
#: millisecond, the batched lumen march of a flow case 0.3-2 ms, a trial by trial solve
#: milliseconds or more.
SOBOL_POINTS = {"batched closed form": 1024, "batched finite volumes": 256,
                "batched lumen march": 256}
SOBOL_POINTS_ONE_BY_ONE = 64


@dataclass(frozen=True)
class _Scheme:
    """The figures the design runs follow: targets (model columns) and requirements."""

    targets: tuple[Target, ...]
    requirements: tuple[Requirement, ...]

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(t.key for t in self.targets)


def _target_of(requirement: Requirement) -> Target:
    return Target(requirement.quantity, requirement.layer, requirement.at,
                  layer_name=requirement.layer_name)


def _default_targets(problem: Problem) -> list[Target]:
    """The headline figures a design run follows when no requirement names one."""
    if problem.inner_boundary.kind == FLOW:
        return [Target("concentration_min"), Target("outlet_concentration")]
    if problem.regime.kind == "transient":
        loaded = any(layer.initial > 0.0 for layer in problem.layers)
        return [Target("release_fraction_final")] if loaded else [
            Target("remaining", at=problem.regime.duration)]
    return [Target("concentration_min"),
            Target("flux_outer" if problem.outer_boundary.kind != "symmetry" else "flux_inner")]


def _scheme(problem: Problem, requirements: Sequence[Requirement],
            followed: Sequence[Target] = ()) -> _Scheme:
    """The figures of the requirements (the headline figures when there are none), then the
    ``followed`` ones (validation points)."""
    first = [_target_of(r) for r in requirements] or _default_targets(problem)
    targets: list[Target] = []
    for target in first + list(followed):
        if target not in targets:
            targets.append(target)
    return _Scheme(tuple(targets), tuple(requirements))


def _bounds(scheme: _Scheme) -> list[Bound]:
    return [Bound(scheme.targets.index(_target_of(r)), r.low, r.high, r.id)
            for r in scheme.requirements]


def _distribution(spec) -> InputDistribution:
    floor, open_ = spec.domain
    return InputDistribution(
        field=spec.field.path, kind=spec.distribution, nominal=spec.nominal, sd=spec.sd,
        relative_sd=spec.relative_sd, low=spec.low, mode=spec.mode, high=spec.high,
        domain=floor if math.isfinite(floor) else None, domain_open=open_)


def uncertainty_spec(request: UncertaintyRequest, seed: int) -> UncertaintySpec:
    """The Monte Carlo specification of a case's uncertainty block."""
    return UncertaintySpec(
        inputs=tuple(_distribution(s) for s in request.inputs), seed=seed,
        max_trials=request.max_trials, correlations=request.correlations,
        coverage=request.coverage, significant_digits=request.significant_digits)


def _histogram(values: np.ndarray) -> dict | None:
    finite = values[np.isfinite(values)]
    if finite.size < 2:
        return None
    counts, edges = np.histogram(finite, bins=HISTOGRAM_BINS)
    return {"edges": edges.tolist(), "counts": counts.tolist(), "trials": int(finite.size)}


def _finite(value) -> float | None:
    return float(value) if value is not None and math.isfinite(float(value)) else None


class DesignRunner:
    """Runs the design parts a case asks for.

    Parameters
    ----------
    problem, independent : Problem
        The case as the primary and as the independent methods read it.
    request : DesignRequest
        What the case asks.
    check : FullCheck
        The full, cross-checked check of a problem (``run_problem``).
    """

    def __init__(self, problem: Problem, independent: Problem | None, request: DesignRequest,
                 check: FullCheck):
        self.problem = problem
        self.independent = independent
        self.request = request
        self.check = check
        self.scheme = _scheme(problem, request.requirements, request.validation_targets)

    # -- shared --------------------------------------------------------------------------

    def _checked(self, values: dict[FieldRef, float]) -> Outcome:
        """The full check with ``values`` set in both readings of the case."""
        independent = None if self.independent is None else with_values(self.independent,
                                                                         values)
        return self.check(with_values(self.problem, values), independent)

    def _design_of(self, outcome: Outcome, problem: Problem) -> dict:
        return design_block(self.request.requirements, outcome.quantities, outcome.series,
                            problem.regime.duration)

    def _verdict(self, outcome: Outcome) -> str:
        return "pass" if outcome.checks and all(c.passed for c in outcome.checks) else "fail"

    def _figure(self, outcome: Outcome, target: Target) -> tuple[float | None, float | None]:
        reading = read_figure(target, outcome.quantities, outcome.series,
                              self.problem.regime.duration)
        return reading.value, reading.uncertainty

    # -- uncertainty ---------------------------------------------------------------------

    def _monte_carlo(self, seed: int) -> tuple[UncertaintySpec, TrialModel, list[Bound]]:
        request = self.request.uncertainty
        if request is None:
            raise ValueError("the case states no uncertainty")
        spec = uncertainty_spec(request, seed)
        model = TrialModel(self.problem, [s.field for s in request.inputs], self.scheme.targets)
        return spec, model, _bounds(self.scheme)

    def block(self, seed: int, index: int) -> BlockResult:
        """Monte Carlo block ``index`` of the case's uncertainty with ``seed``: a pure function
        of the case, the seed and the index, wherever it runs."""
        spec, model, bounds = self._monte_carlo(seed)
        return compute_block(spec, model, bounds, index, len(self.scheme.names))

    def uncertainty(self, *, seed: int | None = None,
                    scheduler: BlockScheduler = sequential_blocks,
                    on_progress: Callable[[int, int], None] | None = None) -> dict:
        """The record's ``uncertainty`` block. ``seed``: the case's, else this one, else one
        drawn now (recorded either way)."""
        request = self.request.uncertainty
        if request is None:
            raise ValueError("the case states no uncertainty")
        if request.method == LAW_OF_PROPAGATION:
            return self.law_of_propagation()
        if request.seed is not None:
            seed = request.seed
        elif seed is None:
            seed = secrets.randbits(62)
        spec, model, bounds = self._monte_carlo(seed)
        names = self.scheme.names
        accumulator = MonteCarloAccumulator(spec, names, tuple(bounds))

        def compute(index: int) -> BlockResult:
            block = compute_block(spec, model, accumulator.requirements, index, len(names))
            if on_progress is not None:
                on_progress((index + 1) * spec.trials_per_block, index + 1)
            return block

        scheduler(compute, accumulator)
        result = accumulator.result()
        points = SOBOL_POINTS.get(model.method, SOBOL_POINTS_ONE_BY_ONE)
        indices = sensitivity(spec, model, names, base_points=points)
        verification = self._verify(result, list(model.fields), model)
        sample_outputs = np.array([[np.nan if v is None else v for v in t.outputs]
                                   for t in result.sample], dtype=float).reshape(-1, len(names))
        quantities = {}
        for j, (name, summary) in enumerate(result.quantities.items()):
            entry: dict = {"mean": summary.mean,
                           "standard_uncertainty": summary.standard_uncertainty,
                           "interval": list(summary.interval), "coverage": summary.coverage,
                           "median": summary.median, "unit": self._unit(self.scheme.targets[j]),
                           "numerical_tolerance": summary.numerical_tolerance}
            histogram = _histogram(sample_outputs[:, j])
            if histogram is not None:
                entry["histogram"] = histogram
            quantities[name] = entry
        requirements = {
            r.id: {"probability_met": r.probability_met, "standard_error": r.standard_error,
                   "zero_event_bound": r.zero_event_bound, "quantity": names[r.output_index],
                   "low": r.low, "high": r.high,
                   "successful_trials": r.successful_trials}
            for r in result.requirements}
        return {
            "propagation": MONTE_CARLO, "reference": "JCGM 101:2008 (GUM Supplement 1)",
            "trials": result.trials, "failed_trials": result.failed_trials, "seed": result.seed,
            "sampler": result.sampler, "converged": result.converged,
            "stop_reason": result.stop_reason, "blocks": result.blocks,
            "block_size": result.block_size, "coverage": result.coverage,
            "significant_digits": result.significant_digits,
            "method": f"Monte Carlo (JCGM 101:2008, adaptive §7.9) on the primary solve "
                      f"({model.method}); correlations by Gaussian copula",
            "inputs": [{"field": s.field.path, "distribution": s.distribution,
                        "truncated": s.field.path in result.truncated_inputs}
                       for s in request.inputs],
            "quantities": quantities,
            "requirements": requirements,
            "sensitivity": indices.indices,
            "sensitivity_method": {
                "elasticity": f"central differences at the case's values (relative step "
                              f"{indices.relative_step:g})",
                "indices": f"Saltelli (2010) first-order and Jansen (1999) total estimators, "
                           f"{indices.base_points} scrambled Sobol' base points, "
                           f"{indices.evaluations} evaluations",
                "independent_inputs_assumed": indices.independent_inputs_assumed},
            "verification": verification,
        }

    def law_of_propagation(self) -> dict:
        """The record's ``uncertainty`` block by the law of propagation (JCGM 100:2008,
        :mod:`~worker.engine.design.propagation_law`): the 2k + 1 points x, x ± u_i e_i.

        Where the trial model solves trial by trial (a transient case with a compartment or a
        dispersed load, a layered transient), every point is a full check
        and its figures are read from it; otherwise the trial model gives the figures at once
        and the centre and the ± u points of the input contributing most are checked in full,
        the trial model compared with them."""
        request = self.request.uncertainty
        if request is None:
            raise ValueError("the case states no uncertainty")
        estimates = [input_estimate(spec) for spec in request.inputs]
        fields = [spec.field for spec in request.inputs]
        points = design_points(estimates)
        k = len(fields)
        labels = ["centre"] + [f"{f.path} + u" for f in fields] + [f"{f.path} − u"
                                                                    for f in fields]
        model = TrialModel(self.problem, fields, self.scheme.targets)
        every_point = full_check_at_every_point(self.problem, fields)
        fast = None if every_point else model(points)
        checked: list[int] = list(range(len(points))) if every_point else [0]
        if fast is not None:
            first = propagate(estimates, fast, request.correlations, request.coverage,
                              request.significant_digits)
            scores = np.nan_to_num(np.abs(first.contributions), nan=0.0).max(axis=1)
            dominant = int(np.argmax(scores))
            checked += [1 + dominant, 1 + k + dominant]
        rows: list[PointCheck] = []
        values = np.full((len(points), len(self.scheme.targets)), np.nan) if fast is None \
            else fast.copy()
        for index in checked:
            inputs = dict(zip(fields, (float(v) for v in points[index]), strict=True))
            outcome = self._checked(inputs)
            figures = [self._figure(outcome, target) for target in self.scheme.targets]
            full = np.array([np.nan if v is None else v for v, _ in figures], dtype=float)
            if fast is None:
                values[index] = full
            rows.append(PointCheck(
                label=labels[index], inputs={f.path: v for f, v in inputs.items()},
                verdict=self._verdict(outcome), full=tuple(v for v, _ in figures),
                bands=tuple(b for _, b in figures),
                fast=None if fast is None else tuple(float(v) for v in fast[index])))
        result = propagate(estimates, values, request.correlations, request.coverage,
                           request.significant_digits)
        verification = verification_block(rows, self.scheme.names, result.combined,
                                          compared=fast is not None)
        units = {t.key: self._unit(t) for t in self.scheme.targets}
        how = ("the full check at every point" if every_point
               else f"the primary solve ({model.method}); the centre and the ± u points of "
                    "the input contributing most checked in full")
        return propagation_block(result, request, self.scheme.names, units,
                                 self.scheme.requirements, _bounds(self.scheme), how,
                                 verification)

    def _unit(self, target: Target) -> str:
        """The SI unit of a target's values (that of the case's basis)."""
        kind = target_dimension(self.problem, target)
        return "1" if kind == "dimensionless" else si_unit(kind, self.problem.basis)

    def _subset(self, result: MonteCarloResult) -> list[tuple[str, tuple[float, ...]]]:
        chosen: list[tuple[str, tuple[float, ...]]] = []
        for summary in result.requirements:
            if summary.worst is not None:
                chosen.append((f"worst for {summary.id}", summary.worst.inputs))
        if result.median_trial is not None:
            chosen.append(("median", result.median_trial.inputs))
        picked = 0
        for trial in result.sample:
            if picked == RANDOM_CHECKS:
                break
            if all(trial.inputs != inputs for _, inputs in chosen):
                chosen.append((f"random trial {trial.index}", trial.inputs))
                picked += 1
        return chosen

    def _verify(self, result: MonteCarloResult, fields: list[FieldRef],
                model: TrialModel) -> dict:
        """Full checks of the verification subset: their verdicts, the numerical uncertainty
        of each figure against its spread, and the trial model against the full check."""
        rows = []
        worst_ratio = 0.0
        worst_model, worst_where = 0.0, ""
        largest: dict[str, float] = {}
        for label, inputs in self._subset(result):
            values = dict(zip(fields, inputs, strict=True))
            outcome = self._checked(values)
            fast = model(np.asarray([inputs], dtype=float))[0]
            row = {"trial": label, "inputs": {f.path: v for f, v in values.items()},
                   "verdict": self._verdict(outcome)}
            for j, target in enumerate(self.scheme.targets):
                value, band = self._figure(outcome, target)
                spread = result.quantities[target.key].standard_uncertainty
                if band is not None:
                    largest[target.key] = max(largest.get(target.key, 0.0), band)
                    if spread:
                        worst_ratio = max(worst_ratio, band / spread)
                ratio = model_disagreement(float(fast[j]), value, band)
                if ratio > worst_model:
                    worst_model, worst_where = ratio, f"{target.key} in the {label}"
            rows.append(row)
        return subset_record(
            failed=[str(r["trial"]) for r in rows if r["verdict"] != "pass"],
            checked=len(rows),
            subset_detail=f"{len(rows)} trials checked in full (worst for each requirement, "
                          "median, random)",
            largest=largest, worst_ratio=worst_ratio, spread_name="standard uncertainty",
            worst_model=worst_model,
            model_detail="the Monte Carlo trials' fast primary solve against the full check "
                         "at the same inputs, relative to the figure's numerical uncertainty "
                         f"(at least {AGREEMENT_FLOOR:g} of the value); worst "
                         f"{worst_where or 'none'}",
            trials=rows)

    # -- design limit --------------------------------------------------------------------

    def limit(self) -> dict:
        """The record's ``design_limit`` block."""
        request = self.request.limit
        if request is None:
            raise ValueError("the case states no design limit")
        requirement = next(r for r in self.request.requirements if r.id == request.requirement)
        model = TrialModel(self.problem, [request.field], [_target_of(requirement)])

        def margin(value: float) -> float:
            figure = float(model(np.array([[value]]))[0, 0])
            return requirement.margin(figure) if math.isfinite(figure) else math.nan

        found = find_limit(margin, request.low, request.high,
                           nominal=value_of(self.problem, request.field))
        block: dict = {"vary": request.field.path, "value": found.value, "unit": request.unit,
                       "requirement": requirement.id, "met_side": found.met_side,
                       "bracket": list(found.bracket), "range": [request.low, request.high],
                       "reason": found.reason, "evaluations": found.evaluations,
                       "verdict": None}
        if found.other_brackets:
            block["other_brackets"] = [list(b) for b in found.other_brackets]
        if found.value is not None:
            outcome = self._checked({request.field: found.value})
            judged = self._design_of(outcome, self.problem)
            entry = next(j for j in judged["requirements"] if j["id"] == requirement.id)
            block["verdict"] = self._verdict(outcome)
            fast = float(model(np.array([[found.value]]))[0, 0])
            ratio = model_disagreement(fast, entry["value"], entry["numerical_uncertainty"])
            block["checks"] = [{
                "name": "design_limit.trial_model", "value": ratio, "limit": 1.0,
                "passed": ratio <= 1.0,
                "detail": f"{requirement.quantity} at the limit by the fast primary solve "
                          f"({fast:.9g}) against the full check ({entry['value']}), relative "
                          f"to its numerical uncertainty (at least {AGREEMENT_FLOOR:g} of the "
                          "value)"}]
            block["check"] = {"margin": entry["margin"], "value": entry["value"],
                              "numerical_uncertainty": entry["numerical_uncertainty"],
                              "status": entry["status"],
                              "failed_checks": [c.name for c in outcome.checks
                                                if not c.passed]}
        return block

    # -- sweep ---------------------------------------------------------------------------

    def sweep(self) -> dict:
        """The record's ``sweep`` block: the full check at each value."""
        request = self.request.sweep
        if request is None:
            raise ValueError("the case states no sweep")
        names = self.scheme.names
        quantities: dict[str, list[float | None]] = {name: [] for name in names}
        uncertainties: dict[str, list[float | None]] = {name: [] for name in names}
        statuses: dict[str, list[str]] = {r.id: [] for r in self.request.requirements}
        verdicts: list[str] = []
        for value in request.values:
            outcome = self._checked({request.field: value})
            verdicts.append(self._verdict(outcome))
            for target in self.scheme.targets:
                figure, band = self._figure(outcome, target)
                quantities[target.key].append(_finite(figure))
                uncertainties[target.key].append(_finite(band))
            judged = self._design_of(outcome, self.problem)
            for entry in judged["requirements"]:
                statuses[entry["id"]].append(entry["status"])
        return {"vary": request.field.path, "unit": request.unit,
                "values": list(request.values), "quantities": quantities,
                "uncertainties": uncertainties, "requirements": statuses,
                "verdicts": verdicts,
                "units": {t.key: self._unit(t) for t in self.scheme.targets}}


def run_design(problem: Problem, independent: Problem | None, request: DesignRequest,
               check: FullCheck, *, seed: int | None = None,
               scheduler: BlockScheduler = sequential_blocks,
               on_progress: Callable[[int, int], None] | None = None) -> dict:
    """The record blocks the request asks for: ``uncertainty``, ``design_limit``, ``sweep``."""
    runner = DesignRunner(problem, independent, request, check)
    parts: list[tuple[str, Callable[[], dict]]] = []
    if request.uncertainty is not None:
        parts.append(("uncertainty", lambda: runner.uncertainty(
            seed=seed, scheduler=scheduler, on_progress=on_progress)))
    if request.limit is not None:
        parts.append(("design_limit", runner.limit))
    if request.sweep is not None:
        parts.append(("sweep", runner.sweep))
    blocks: dict = {}
    for name, run in parts:
        try:
            blocks[name] = run()
        except (ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
            # Recorded in the block, never silently dropped: the record says what failed.
            error = f"{type(exc).__name__}: {exc}"
            blocks[name] = {"error": error, "reason": f"not computed: {error}"}
    return blocks

