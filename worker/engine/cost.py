"""The cost of checking a case, estimated before any solve, and the budgets it is held to.

:func:`estimate_cost` is a pure function of the ``Problem`` and the ``DesignRequest``: it reads
the mesh rules of the solvers (``fv_mesh.default_cells_per_layer``, the transient
``solve.mesh_sequence``), never solves. :func:`over_budget` compares the estimate with
:class:`Budgets` and names the case field to change for each overrun, so a case that would
exhaust a worker's memory or run for hours is refused at validation (422) instead.

What is counted (all estimates, deliberately on the safe side):

* ``solve_cells``: unknowns of one primary check: the three finite-volume meshes (coarse,
  medium, fine at ratio 2: 1 + 2 + 4 or 1 + 4 + 16 times the coarse mesh) of all layers.
* ``collocation_entries``: non-zeros of the Jacobian ``scipy.integrate.solve_bvp`` builds for
  a nonlinear steady case (2 unknowns per layer, every layer mapped onto one node set): about
  2 (2L)^2 per node, with the nodes the finest layer asks for (its Thiele length resolved as the
  finite volumes resolve it), at most ``BVP_MAX_NODES``. Measured: a 20-layer
  Michaelis-Menten slab reached 10.4 million entries per array and 1.1 GB resident before its
  first refinement; the same case drove an unlimited service to 11.6 GB.
* ``time_steps``: implicit (BDF) steps of a transient check, ``STEPS_PER_DECADE`` per decade of
  time from the first requested time (or the mesh's diffusion time) to the duration plus the
  continuation to steady state (``STEADY_HORIZON`` relaxation times). A layer loaded above its
  solubility holds loading/solubility times the solute its dissolved capacity holds, and the
  reserve empties about that much more slowly (T. Higuchi, J. Pharm. Sci. 50 (1961) 874: a
  plane sheet of thickness L, loading A, solubility Cs empties in about A L^2 / (2 D Cs)); a
  compartment's fluid adds its volume per face area to the capacity (its fluid-equivalent
  thickness). A check integrated by implicit steps (a kink: zero-order exhaustion, a solubility
  cap) is charged ``IMPLICIT_STEP_FACTOR`` times the steps, and a dissolution front a further
  ``FRONT_STEP_FACTOR`` (the dissolution switches on and off as the front passes each cell);
  both measured on the cases their comments name.
* ``work``: unknown-iterations of the whole run: one check (cells times Newton iterations, or
  unknowns times steps), plus every sweep value (a full check each), the design limit's
  evaluations, the calibration's evaluations (:func:`calibration_evaluations`) and the
  Monte Carlo trials (``max_trials``) times the cost of one trial by the method the trial
  model uses; with ``uncertainty.method`` ``law_of_propagation`` (JCGM 100:2008) instead its
  2k + 1 evaluations for k inputs (:func:`propagation_work`). A case with a dispersed load or
  a compartment has no batched or scaled trial model (``Problem.is_linear`` is False for the
  first; the scaled series takes neither): each trial is a full primary solve. A flow case's
  trials are batched marches of the finest mesh (:func:`flow_trial_work`), with the layers
  solved per trial where a varied field changes them.

The budgets are documented defaults (:data:`DEFAULT_BUDGETS`); a service may scale them
(``FLUXPROOF_COST_BUDGET_SCALE``), never past the worker's memory and time limits it also sets.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from worker.engine.bvp_steady import BVP_MAX_JACOBIAN_ENTRIES, BVP_MAX_NODES
from worker.engine.design.propagation_law import full_check_at_every_point
from worker.engine.design.request import LAW_OF_PROPAGATION, DesignRequest
from worker.engine.design.sampling import default_block_size
from worker.engine.design.targets import COMPARTMENT, FLOW
from worker.engine.fv_mesh import (
    MAX_CELLS_PER_LAYER,
    MIN_CELLS_PER_LAYER,
    RESISTANCE_CELLS,
    THIELE_CELL_LIMIT,
    boundary_concentration_scale,
)
from worker.engine.lumen.run import REFINEMENT, coarse_mesh
from worker.engine.lumen.trials import LUMEN_FIELDS
from worker.engine.model import Boundary, Problem
from worker.engine.transient.method_of_lines import uses_implicit_steps
from worker.engine.transient.solve import STEADY_HORIZON

#: Implicit steps per decade of time of the transient integrators (rtol 1e-6, BDF orders 1-5):
#: a generous count; measured runs take 20-60.
STEPS_PER_DECADE = 80
#: Work of one unknown-step of a transient check relative to one unknown-iteration of a steady
#: solve: each step factorises the sparse Jacobian of three meshes, and the Galerkin, Laplace
#: and series routes follow the same times (measured: 0.39 s for 9.8e4 unknown-steps, the
#: stent-coating demo, against 0.22 s for 3.1e5 unknown-iterations of a Michaelis-Menten slab).
TRANSIENT_STEP_WORK = 5.0
#: Work of one transient Monte Carlo trial by the scaled series (one unreacting body; measured
#: 5 us a trial).
SCALED_SERIES_TRIAL_WORK = 5.0
#: Newton/Picard iterations charged to a nonlinear steady solve per mesh (the solver allows 60
#: Newton iterations plus Picard sweeps and active-set passes; typical cases take 5-20).
NONLINEAR_ITERATIONS = 40
#: Coarse transient mesh: steady mesh rule / 4, at least 10 and, for early resolution, at most
#: 250 cells per layer (``transient.solve``); the three meshes hold 1 + 2 + 4 times it.
TRANSIENT_MESH_FACTOR = 7
#: Three steady meshes hold 1 + 4 + 16 times the coarse mesh's cells.
STEADY_MESH_FACTOR = 21
#: Design-limit evaluations: the scan (25 points) and Brent's method, with a margin.
LIMIT_EVALUATIONS = 80
#: Work of one closed-form Monte Carlo trial, unknown-iterations (measured 10-20 us a trial).
CLOSED_FORM_TRIAL_WORK = 20.0
#: A batched finite-volume trial costs this fraction of a lone check's work (measured 0.33 ms
#: batched against about 30 ms for the whole primary solve of a two-layer Michaelis-Menten slab).
BATCHED_TRIAL_FRACTION = 0.02
def calibration_evaluations(k: int) -> int:
    """Evaluations of the trial model charged to a calibration of ``k`` inputs: the
    least-squares fit (about 20 Jacobian passes of k + 1 evaluations), each profile-likelihood
    end (about 20 evaluations of the profile, each a fit of the other k - 1 inputs of about
    10 k evaluations), and the k + 1 evaluations that carry the fit's covariance to the
    validation points. A generous count."""
    if k <= 0:
        return 0
    inner = 1 if k == 1 else 10 * k
    return 20 * (k + 1) + 2 * k * 20 * inner + (k + 1)


#: Steps charged to a transient check integrated by implicit steps (zero-order exhaustion or a
#: layer that can saturate: ``method_of_lines.uses_implicit_steps``), relative to the BDF count
#: above. Measured 2026-12-05 (steps taken / this module's count without the factor): 2.12 for
#: a 1 mm zero-order gel slab (30 d), 2.14 for a zero-order cylinder (5 d).
IMPLICIT_STEP_FACTOR = 2.5
#: Further steps charged to a check with a dissolution front (the step-size cuts where the front
#: crosses a cell). Measured 2026-12-05 with IMPLICIT_STEP_FACTOR: steps taken / count without
#: either factor 4.7 (1 mm slab at 10× solubility), 4.3 (the demo coating above solubility into
#: a finite medium), 10.7 and 11.4 (spheres of 0.5 and 0.3 mm at 8× solubility); 2.5 × 6 = 15
#: covers them with a margin of about 30 %.
FRONT_STEP_FACTOR = 6.0
#: Further steps charged to a zero-order check with a compartment face (``solve.fv_on_meshes``
#: integrates such a case again, at most ``MAX_TIGHTENING`` = 100 times tighter, where its time
#: error is large; the steps of implicit Euler with step doubling grow about as the square root
#: of the tightening). Measured 2026-12-05, both runs' steps over the first's, on a 0.5 mm
#: zero-order slab with a compartment running out within 3 h: 11.7, 11.1 and 12.0 at the cap
#: (D = 1e-9 m^2/s with 1 and 2 mol/m^3 loaded into 1 mL; D = 1e-10 m^2/s into 0.2 mL), 6.2
#: below it (D = 1e-10 m^2/s, 1 mL); 14 covers them with a margin of about 15 %.
TIGHTENED_STEP_FACTOR = 14.0


@dataclass(frozen=True)
class Budgets:
    """What one run may cost. ``work`` in unknown-iterations (about a microsecond each on the
    shared 2-core reference machine: the default, 1e8, is about 100 s there, a third of the
    workers' default soft time limit), ``collocation_entries`` in Jacobian non-zeros (about
    100 bytes of resident memory each, copies and factorisation included), ``solve_cells`` in
    unknowns of one check."""

    work: float = 1.0e8
    collocation_entries: float = float(BVP_MAX_JACOBIAN_ENTRIES)
    solve_cells: float = 400_000.0

    def scaled(self, factor: float) -> Budgets:
        """Every budget times ``factor`` (> 0)."""
        if not (factor > 0.0 and math.isfinite(factor)):
            raise ValueError(f"budget scale: expected a positive finite number, got {factor!r}")
        return replace(self, work=self.work * factor,
                       collocation_entries=self.collocation_entries * factor,
                       solve_cells=self.solve_cells * factor)


DEFAULT_BUDGETS = Budgets()


@dataclass(frozen=True)
class CostEstimate:
    """The estimated cost of checking one case (see the module docstring for each figure)."""

    solve_cells: int
    collocation_entries: int
    time_steps: int
    check_work: float
    sweep_work: float
    limit_work: float
    trial_work: float
    trials: int
    #: Index of the layer that asks for the most cells (the first layer to change).
    costliest_layer: int
    #: The field (a dispersed layer's ``loading``, a compartment's ``volume``) whose capacity
    #: sets a transient run's continuation to steady state beyond its duration; None otherwise.
    horizon_field: str | None = None
    #: The fewest trials the case's Monte Carlo can stop at (two blocks); 0 without one.
    least_trials: int = 0
    #: The calibration's model evaluations times the trial work; 0 without a calibration.
    calibration_work: float = 0.0
    #: The law of propagation's work (:func:`propagation_work`) when the case asks for it.
    propagation_work: float = 0.0
    #: Its 2k + 1 evaluations for k uncertain inputs (whichever method the case asks for).
    propagation_evaluations: int = 0
    #: What the law of propagation would cost this case (whichever method it asks for): the
    #: alternative a Monte Carlo over budget is told of.
    propagation_alternative: float = 0.0

    @property
    def monte_carlo_work(self) -> float:
        return self.trial_work * self.trials

    @property
    def work(self) -> float:
        return self.check_work + self.sweep_work + self.limit_work + self.monte_carlo_work \
            + self.calibration_work + self.propagation_work


@dataclass(frozen=True)
class Overrun:
    """One budget a case exceeds: the field to change and what to do."""

    path: str
    message: str


def resolution_cells(problem: Problem) -> list[int]:
    """Cells each layer asks for by the mesh rule of ``fv_mesh.default_cells_per_layer``
    before its cap: the resistance share and the reaction length."""
    n = problem.exponent
    edges = problem.edges
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        conductances = np.array([
            layer.diffusivity * layer.partition * (0.5 * (edges[j] + edges[j + 1])) ** n
            for j, layer in enumerate(problem.layers)], dtype=float)
        resistances = np.array([layer.thickness for layer in problem.layers]) / conductances
    unbounded = ~np.isfinite(resistances)
    if unbounded.any():  # a conductance that underflows: those layers share the whole budget
        shares = unbounded / unbounded.sum()
    else:
        shares = resistances / resistances.sum()
    c_scale = boundary_concentration_scale(problem)
    counts = []
    for j, layer in enumerate(problem.layers):
        cells = max(MIN_CELLS_PER_LAYER, math.ceil(RESISTANCE_CELLS * float(shares[j])))
        reaction = layer.reaction
        inverse_length = reaction.law.inverse_length(reaction, layer.diffusivity, c_scale)
        if inverse_length > 0.0:
            wanted = layer.thickness * inverse_length / THIELE_CELL_LIMIT
            cells = max(cells, math.ceil(min(wanted, 1e15)))
        counts.append(cells)
    return counts


def has_dispersed_load(problem: Problem) -> bool:
    """True when some layer starts loaded above its solubility."""
    return any(ly.is_loaded_above_solubility for ly in problem.layers)


def compartment_faces(problem: Problem) -> list[tuple[str, Boundary]]:
    """``(side, boundary)`` of each face whose kind is a compartment."""
    return [(side, b) for side, b in (("inner", problem.inner_boundary),
                                      ("outer", problem.outer_boundary))
            if b.kind == COMPARTMENT]


def _face_area(problem: Problem, side: str) -> float | None:
    """The face's area (m^2) as the compartment sees it: a slab's ``area``, a cylinder's
    2 pi r ``length``, a sphere's 4 pi r^2; None where the case lacks the size."""
    r = problem.inner if side == "inner" else problem.outer
    if problem.geometry == "slab":
        return problem.area
    if problem.geometry == "cylinder":
        return None if problem.length is None else math.tau * r * problem.length
    return 2.0 * math.tau * r * r


def _capacity(problem: Problem) -> float:
    """Fluid-equivalent thickness (m) the run fills or empties: the layers' partition times
    thickness, a dispersed layer's times loading/solubility, plus each compartment's volume per
    face area."""
    capacity = 0.0
    for ly in problem.layers:
        held = ly.partition * ly.thickness
        if ly.is_loaded_above_solubility:
            held *= ly.initial / ly.solubility  # type: ignore[operator]
        capacity += held
    for side, boundary in compartment_faces(problem):
        area = _face_area(problem, side)
        if area is not None and area > 0.0:
            capacity += boundary.volume / area
    return capacity


def relaxation_time(problem: Problem) -> float:
    """Capacity (:func:`_capacity`, m) times the layers' resistance in series
    (sum L / (K D), s/m): the time scale (s) on which the body fills or empties, dispersed
    reserve and compartments included; the estimate follows the run for ``STEADY_HORIZON``
    of them."""
    resistance = sum(ly.thickness / (ly.partition * ly.diffusivity) for ly in problem.layers)
    return _capacity(problem) * resistance


def _horizon_field(problem: Problem) -> str | None:
    """The dispersed loading or compartment volume that holds most of the capacity, where the
    relaxation it sets outlasts the duration (:func:`_transient_steps`)."""
    if STEADY_HORIZON * relaxation_time(problem) <= (problem.regime.duration or 0.0):
        return None
    shares: list[tuple[float, str]] = [
        (ly.partition * ly.thickness * ly.initial / ly.solubility,  # type: ignore[operator]
         f"layers[{j}].loading")
        for j, ly in enumerate(problem.layers) if ly.is_loaded_above_solubility]
    for side, boundary in compartment_faces(problem):
        area = _face_area(problem, side)
        if area is not None and area > 0.0:
            shares.append((boundary.volume / area, f"{side}_boundary.volume"))
    plain = sum(ly.partition * ly.thickness for ly in problem.layers)
    biggest = max(shares, default=None)
    return biggest[1] if biggest is not None and biggest[0] > plain else None


def _capped_cells(wanted: list[int]) -> int:
    """The cells of one mesh with each layer's count capped as ``fv_mesh`` caps it."""
    return sum(min(n, MAX_CELLS_PER_LAYER) for n in wanted)


def _transient_steps(problem: Problem) -> int:
    times = [t for t in problem.regime.times if t > 0.0]
    duration = problem.regime.duration or 0.0
    layer_time = min(ly.thickness ** 2 / ly.diffusivity for ly in problem.layers)
    first = min(times) if times else layer_time
    first = min(first, layer_time)
    end = max(duration, STEADY_HORIZON * relaxation_time(problem))
    decades = max(1.0, math.log10(max(end, first) / first))
    steps = STEPS_PER_DECADE * min(decades, 60.0)
    if uses_implicit_steps(problem):
        steps *= IMPLICIT_STEP_FACTOR
    if has_dispersed_load(problem):
        steps *= FRONT_STEP_FACTOR
    if uses_implicit_steps(problem) and compartment_faces(problem) and not problem.can_saturate:
        steps *= TIGHTENED_STEP_FACTOR
    return math.ceil(steps)


def _transient_cells(problem: Problem, wanted: list[int]) -> int:
    times = [t for t in problem.regime.times if t > 0.0]
    first = min(times) if times else None
    coarse = 0
    for cells, layer in zip(wanted, problem.layers, strict=True):
        n = max(10, math.ceil(min(cells, MAX_CELLS_PER_LAYER) / 4))
        if first is not None:
            early = math.ceil(layer.thickness / (0.35 * math.sqrt(layer.diffusivity * first)))
            n = max(n, min(early, 250))
        coarse += n
    return TRANSIENT_MESH_FACTOR * coarse


#: A lumen with flow (``worker.engine.lumen.run``): steady solves of the layers charged to its
#: wall table (measured: 35-60 for a Michaelis-Menten fibre, first pass and verification), and
#: the marching's work per cell-step of its five meshes (three half and whole steps, a few
#: Newton iterations on the table each). A mesh the study finds too coarse is doubled (up to
#: twice per direction, ``lumen.run.MESH_ADAPTATIONS``: up to 16 times the marching work);
#: charged here: twice the marching work, as drawn cases rarely adapt (a short tube's thin wall
#: layer in r).
FLOW_TABLE_SOLVES = 80
FLOW_CELL_STEP_WORK = 24.0
#: A flow case's design trial (``worker.engine.lumen.trials``): the finest march of every trial
#: at once, charged per cell-step of the finest mesh. Measured 2026-12-05 on the shared 2-core
#: machine (``tests/benchmarks/test_bench_flow_trials.py``, batches of 2000 trials, 40 x 80
#: cell-steps): 0.29 ms a trial for the Michaelis-Menten fibre of
#: ``tests/unit/schemas/test_flow_case.py`` with its flow rate varied (0.09 work a cell-step),
#: 0.46 ms for the same fibre with first-order cells; charged 0.15.
FLOW_TRIAL_CELL_STEP_WORK = 0.15
#: Where a varied field changes the layers, each trial solves them at the nodes of its own wall
#: table that its lumen reaches and once more for its minimum: measured 15-19 solves a trial for
#: the fibre above (vmax varied by 10 % to 30 %), charged ``FLOW_TRIAL_LAYER_SOLVES``. The
#: batched finite volumes (Michaelis-Menten) cost about 0.5 work a cell each on one mesh
#: (measured 0.11 ms for the fibre's 221 cells, 1.7-2.0 ms a trial in all); they now run on
#: two meshes, 2 n0 and 4 n0 cells per layer, Richardson-extrapolated
#: (``lumen.layer_accuracy.accurate_batch``): 10.2 ms a trial in all against 4.3 ms on one
#: mesh (2,000 trials, vmax varied, load average about 5); 4.48 ms a trial at a load average of
#: 1.8, of which 0.44 ms the march: about 1.07 work per cell of the default mesh and solve.
#: Charged ``FLOW_BATCHED_SOLVE_CELL_WORK`` = 1.1 per such cell and solve (the margin is in the
#: 30 solves charged against the 15-19 measured): 7,800 a trial, so the two blocks of 10^4 trials
#: of the fibre with vmax varied (measured 98.7 s in all at that load) exceed the default
#: budget and are refused with the law of propagation as the advice. A closed form (linear kinetics)
#: ``CLOSED_FORM_TRIAL_WORK`` (0.55 ms a trial in all for the fibre with first-order cells).
#: Nonlinear layers with a closed form but no batched route (zero order, a solubility) are
#: solved one at a time (``wall_table.layer_answer``, measured about 1.5 ms each for the fibre
#: with zero-order cells: 1.8 ms a trial with the flow rate varied), charged
#: ``FLOW_LAYER_ANSWER_WORK`` each, and with their layers varied each trial solves about as
#: many as the full check's table (measured 124 ms a trial), charged ``FLOW_TABLE_SOLVES`` of
#: them.
FLOW_TRIAL_LAYER_SOLVES = 30
FLOW_BATCHED_SOLVE_CELL_WORK = 1.1
FLOW_LAYER_ANSWER_WORK = 2000.0


def _flow_cell_steps(problem: Problem) -> tuple[int, int]:
    """Cell-steps of the five meshes of the lumen's studies (the coarse mesh refined twice by
    2 in r and in z, the finest shared), and the values of the finest field."""
    n_r, n_z = coarse_mesh(problem)
    meshes = {(n_r * 2**i, n_z * 4) for i in range(3)} | {(n_r * 4, n_z * 2**i) for i in range(3)}
    return sum(a * b for a, b in meshes), (n_r * 4) * (n_z * 4 + 1)


def _flow_one_solve(problem: Problem, wanted: list[int]) -> float:
    """Work of one steady solve of the layers, as the full check charges it."""
    return float(_capped_cells(wanted)) * (
        1 if problem.is_linear else NONLINEAR_ITERATIONS)


def _flow_check_work(problem: Problem, wanted: list[int]) -> float:
    return (FLOW_TABLE_SOLVES * _flow_one_solve(problem, wanted)
            + FLOW_CELL_STEP_WORK * _flow_cell_steps(problem)[0])


def _varied_fields(design: DesignRequest) -> list:
    """The fields the design runs' trial models vary (uncertainty, limit, calibration)."""
    fields = [s.field for s in design.uncertainty.inputs] if design.uncertainty else []
    if design.limit is not None:
        fields.append(design.limit.field)
    if design.calibration is not None:
        fields.extend(c.field for c in design.calibration.parameters)
    return fields


def flow_trial_work(problem: Problem, design: DesignRequest, wanted: list[int]) -> float:
    """Work of one design trial of a flow case (the constants above): the finest march, plus
    the layers' solves per trial where a varied field changes the layers (their minimum once
    per trial in any nonlinear case)."""
    n_r, n_z = coarse_mesh(problem)
    # the finest mesh of the studies: the coarse mesh refined twice by REFINEMENT each way
    work = FLOW_TRIAL_CELL_STEP_WORK * (n_r * REFINEMENT**2) * (n_z * REFINEMENT**2)
    layers_vary = any((f.part, f.name) not in LUMEN_FIELDS for f in _varied_fields(design))
    cells = float(_capped_cells(wanted))
    if problem.is_linear:
        return work + (3 * CLOSED_FORM_TRIAL_WORK if layers_vary else 0.0)
    if any(ly.reaction.law.exact_coefficients(ly.reaction) is None for ly in problem.layers):
        solves = FLOW_TRIAL_LAYER_SOLVES if layers_vary else 1
        return work + solves * FLOW_BATCHED_SOLVE_CELL_WORK * cells
    return work + (FLOW_TABLE_SOLVES if layers_vary else 1) * FLOW_LAYER_ANSWER_WORK


#: Points the law of propagation checks in full when its figures come from a batched or scaled
#: trial model: the centre and the ± u points of the input contributing most
#: (``DesignRunner.law_of_propagation``).
PROPAGATION_FULL_CHECKS = 3


def propagation_work(problem: Problem, design: DesignRequest, check_work: float,
                     trial_work: float) -> float:
    """Work of the law of propagation (JCGM 100:2008) over the case's k uncertain inputs: 2k + 1
    full checks where the runner checks every point in full
    (:func:`~worker.engine.design.propagation_law.full_check_at_every_point`: a transient case
    without the scaled series, a non-slab steady case whose inner radius varies), else 2k + 1
    trials and ``PROPAGATION_FULL_CHECKS`` full checks."""
    if design.uncertainty is None:
        return 0.0
    evaluations = design.uncertainty.evaluations
    if full_check_at_every_point(problem, [s.field for s in design.uncertainty.inputs]):
        return evaluations * check_work
    return evaluations * trial_work + min(PROPAGATION_FULL_CHECKS, evaluations) * check_work


def estimate_cost(problem: Problem, design: DesignRequest | None = None) -> CostEstimate:
    """The estimated cost of checking ``problem`` with ``design``'s runs (no solve)."""
    design = design or DesignRequest()
    wanted = resolution_cells(problem)
    costliest = max(range(len(wanted)), key=wanted.__getitem__)
    linear = problem.is_linear
    collocation = 0
    flow = problem.inner_boundary.kind == FLOW
    if flow:
        steps = 1
        cells = _capped_cells(wanted) + _flow_cell_steps(problem)[1]
        check_work = _flow_check_work(problem, wanted)
    elif problem.regime.kind == "transient":
        cells = _transient_cells(problem, wanted)
        steps = _transient_steps(problem)
        check_work = float(cells) * steps * TRANSIENT_STEP_WORK
    else:
        steps = 1
        cells = STEADY_MESH_FACTOR * _capped_cells(wanted)
        check_work = float(cells) * (1 if linear else NONLINEAR_ITERATIONS)
        if not linear:
            unknowns = 2 * len(problem.layers)
            collocation = 2 * unknowns ** 2 * min(max(wanted), BVP_MAX_NODES)
            check_work += float(collocation) * NONLINEAR_ITERATIONS
    closed_form = problem.regime.kind == "steady" and all(
        ly.reaction.kind in ("none", "first_order", "zero_order") for ly in problem.layers)
    if flow:
        trial = flow_trial_work(problem, design, wanted)
    elif closed_form:
        trial = CLOSED_FORM_TRIAL_WORK
    elif problem.regime.kind == "steady":
        trial = BATCHED_TRIAL_FRACTION * check_work
    elif (len(problem.layers) == 1 and not problem.layers[0].reaction.reacts
          and problem.layers[0].solubility is None and not compartment_faces(problem)):
        trial = SCALED_SERIES_TRIAL_WORK
    else:
        trial = check_work
    sweep = len(design.sweep.values) * check_work if design.sweep else 0.0
    limit = LIMIT_EVALUATIONS * trial if design.limit else 0.0
    propagation = (design.uncertainty is not None
                   and design.uncertainty.method == LAW_OF_PROPAGATION)
    alternative = propagation_work(problem, design, check_work, trial)
    trials = design.uncertainty.max_trials if design.uncertainty and not propagation else 0
    least = (2 * default_block_size(design.uncertainty.coverage)
             if design.uncertainty and not propagation else 0)
    calibration = (calibration_evaluations(len(design.calibration.parameters)) * trial
                   if design.calibration else 0.0)
    return CostEstimate(solve_cells=cells, collocation_entries=collocation, time_steps=steps,
                        check_work=check_work, sweep_work=sweep, limit_work=limit,
                        trial_work=trial, trials=trials, costliest_layer=costliest,
                        horizon_field=(_horizon_field(problem)
                                       if problem.regime.kind == "transient" else None),
                        least_trials=least, calibration_work=calibration,
                        propagation_work=alternative if propagation else 0.0,
                        propagation_evaluations=(design.uncertainty.evaluations
                                                 if design.uncertainty else 0),
                        propagation_alternative=alternative)


def _times_over(value: float, budget: float) -> str:
    return f"{value:.3g}, {value / budget:.3g} times the budget of {budget:.3g}"


def over_budget(estimate: CostEstimate, budgets: Budgets = DEFAULT_BUDGETS,
                regime: str = "steady") -> list[Overrun]:
    """Every budget ``estimate`` exceeds, each with the field to change; empty when within."""
    found: list[Overrun] = []
    layer = f"layers[{estimate.costliest_layer}]"
    if estimate.collocation_entries > budgets.collocation_entries:
        found.append(Overrun("layers", (
            "the nonlinear reference solve would need about "
            f"{_times_over(estimate.collocation_entries, budgets.collocation_entries)} Jacobian "
            f"entries (memory): use fewer layers, or thicker or less steep reaction layers "
            f"({layer} asks for the finest resolution)")))
    if estimate.solve_cells > budgets.solve_cells:
        found.append(Overrun(layer, (
            f"the three meshes would hold {_times_over(estimate.solve_cells, budgets.solve_cells)}"
            " cells: use fewer or thicker layers, or a less steep reaction")))
    if estimate.check_work > budgets.work:
        path = "regime.times" if regime == "transient" else layer
        advice = ("start the requested times later or shorten regime.duration (the integration "
                  "spans every decade from the first time to steady state)"
                  if regime == "transient" else "use fewer layers or a less steep reaction")
        if regime == "transient" and estimate.horizon_field is not None:
            advice += (f"; the run to steady state is set here by {estimate.horizon_field} "
                       "(a loading far above solubility, or a large compartment, empties "
                       "slowly): a smaller value shortens it")
        found.append(Overrun(path, (
            f"one check would take about {_times_over(estimate.check_work, budgets.work)} "
            f"unknown-iterations: {advice}")))
        return found
    remaining = budgets.work - estimate.check_work
    if estimate.calibration_work > remaining:
        found.append(Overrun("calibration.parameters", (
            f"fitting would take about {_times_over(estimate.calibration_work, remaining)} "
            "unknown-iterations (each evaluation of this case is a full primary solve): fit "
            "fewer inputs or lighten the case")))
        return found
    remaining -= estimate.calibration_work
    if estimate.sweep_work > remaining:
        found.append(Overrun("sweep.values", (
            f"a full check at each sweep value would take about "
            f"{_times_over(estimate.sweep_work, remaining)} unknown-iterations: sweep at most "
            f"{max(0, int(remaining // estimate.check_work))} values")))
        return found
    remaining -= estimate.sweep_work
    if estimate.limit_work > remaining:
        found.append(Overrun("design_limit", (
            f"the design-limit search would take about "
            f"{_times_over(estimate.limit_work, remaining)} unknown-iterations: drop it or "
            "lighten the case")))
        return found
    remaining -= estimate.limit_work
    if estimate.propagation_work > remaining:
        found.append(Overrun("uncertainty.inputs", (
            f"the law of propagation's {estimate.propagation_evaluations} evaluations would "
            f"take about {_times_over(estimate.propagation_work, remaining)} "
            "unknown-iterations: propagate fewer inputs or lighten the case")))
        return found
    if estimate.monte_carlo_work > remaining:
        most = int(remaining // estimate.trial_work) if estimate.trial_work > 0 else 0
        if most >= estimate.least_trials:
            advice = f"ask for at most {most} trials"
        else:
            advice = (f"at most {most} fit, fewer than the {estimate.least_trials} the "
                      f"adaptive Monte Carlo needs (each trial of this case takes about "
                      f"{estimate.trial_work:.3g} unknown-iterations): "
                      "drop the uncertainty block (a sweep or design_limit over the uncertain "
                      "input takes far fewer checks) or lighten the case")
        if 0.0 < estimate.propagation_alternative <= remaining:
            advice += (f"; or set uncertainty.method to \"{LAW_OF_PROPAGATION}\" (JCGM "
                       f"100:2008, first order, the output taken as normal): its "
                       f"{estimate.propagation_evaluations} evaluations take about "
                       f"{estimate.propagation_alternative:.3g} unknown-iterations, within "
                       "the budget")
        found.append(Overrun("uncertainty.max_trials", (
            f"{estimate.trials} trials would take about "
            f"{_times_over(estimate.monte_carlo_work, remaining)} unknown-iterations: "
            f"{advice}")))
    return found
