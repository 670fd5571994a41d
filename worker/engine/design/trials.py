"""The trial model: a case's primary figures for many values of some of its inputs at once.

``TrialModel(problem, fields, targets)`` is a callable ``x (n, k) -> y (n, m)``: row i of ``x``
holds the SI values of the ``k`` fields (``worker.engine.design.paths``) in trial i, row i of
``y`` the ``m`` targets (``worker.engine.design.targets``) of that trial, SI. A trial whose
inputs leave their physical domain or whose solve fails gets NaN; one bad trial never raises.
Monte Carlo propagation (JCGM 101:2008) calls it with thousands of trials, design limits and
sweeps with a few.

It gives the primary figures of the full check (``worker.engine.run.run_problem``) without the
routes that check them. Methods, by case:

* steady, every layer without reaction, first order or zero order (closed form): the exact
  basis superposition of ``worker.engine.exact_steady`` for all trials at once. Each layer's
  basis (``basis_functions.LayerBasis`` with parameters batched over trials, trials grouped by
  the branch of the closed form) is evaluated at the edges; the face and interface rows
  (``exact_steady.system_rows``, the boundary kinds' own rows) fill an (n, s, s) stack of
  equilibrated systems solved by ``numpy.linalg.solve``. Fluxes from the edge forms; the
  consumption of a layer is ``a^n J(a) - b^n J(b)`` (the layer's own balance, exact for the
  closed form; the full check integrates it by quadrature, the same to round-off); the true
  extremes per layer start, as ``worker.engine.extremes`` does, from the record's profile
  points (41 per layer) and refine the sampled extreme by bisection on dC/dr between its
  neighbours (the stationary point of the closed form). A trial in which a zero-order layer
  would fall below zero (a depleted zone) is solved again alone, as below.
* steady otherwise (Michaelis-Menten; zero order with a depleted zone in a layered body): the
  finite volumes of every trial at once (``worker.engine.fv_trials.solve_trials``: each trial's
  own three meshes, Newton and the active set per trial, one stacked tridiagonal solve per
  iteration, Richardson extrapolation as the full check), in chunks of ``FV_CHUNK_CELLS``
  fine-grid cells; a trial that does not converge there, and a single zero-order layer with a
  depleted zone (the exact depletion solution), trial by trial through
  ``steady_check.primary_figures``.
* transient: ``transient_trials`` (the series of a unit body rescaled for all trials where
  that is exact, else the series or the full transient check trial by trial).
* a lumen with flow: ``lumen.trials`` (every trial's finest march at once, on the mesh the full
  check's studies end on, with the wall law shared by all trials where the varied fields are
  the lumen's, else each trial's own: see ``_FlowTrials``); a trial the batch leaves unsolved,
  or every trial where the nominal case does not solve, by ``lumen.run.flow_figures`` alone.

Cost measured on the shared 2-core machine (``tests/benchmarks/test_bench_trials.py``,
``test_bench_design.py``): about 10-20 us per trial batched (closed form), 5 us per trial
(scaled series), about 0.33 ms per trial for the two-layer Michaelis-Menten slab by the batched
finite volumes (1 ms trial by trial), 0.67 ms for the islet capsule with a depleted core
(5.4 ms trial by trial), about 0.15 s per trial for the full transient check; for the
Michaelis-Menten hollow fibre of the flow tests 0.3-1 ms a trial with the flow rate varied and
2-5 ms with the cells' vmax varied (0.2-0.6 s by ``flow_figures``; ``test_bench_flow_trials.py``).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from worker.engine.basis_functions import LayerBasis
from worker.engine.convergence import REFINEMENT_RATIO
from worker.engine.design.paths import (
    FieldRef,
    field_domain,
    replaced,
    resolve,
    value_of,
    with_values,
)
from worker.engine.design.targets import Target, check_target
from worker.engine.design.transient_trials import scaled_series_applies, transient_targets
from worker.engine.exact_steady import EdgeForms, system_rows, unknown_columns
from worker.engine.fv_trials import (
    TrialFigures,
    cells_per_layer_trials,
    solve_trials,
)
from worker.engine.lumen.layer_accuracy import accurate_batch
from worker.engine.lumen.layer_walls import linear_layer_wall
from worker.engine.lumen.run import (
    MAX_COARSE_CELLS,
    MAX_COARSE_STEPS,
    FlowRun,
    coarse_mesh,
    flow_figures,
    layers_problem,
    solve_flow,
    table_tolerance,
)
from worker.engine.lumen.trials import (
    LUMEN_FIELDS,
    NODE_MARGIN,
    ConductanceWalls,
    TableWalls,
    TubeTrials,
    fine_meshes,
    flow_trial_figures,
)
from worker.engine.lumen.wall_table import layer_answer, tabulate
from worker.engine.model import Problem
from worker.engine.steady_check import PROFILE_POINTS_PER_LAYER, primary_figures

__all__ = ["TrialModel"]

#: Fine-grid cells of the trials solved together by the batched finite volumes: a chunk's
#: arrays stay a few megabytes, whatever the number of trials.
FV_CHUNK_CELLS = 2**16
#: Halvings of the bracket of a sampled extreme (a fortieth of the layer): far below round-off.
BISECTION_STEPS = 60


class TrialModel:
    """``model(x) -> y``: the targets' primary values for trials of the fields' values.

    Parameters
    ----------
    problem : Problem
        The case (SI) whose other inputs stay nominal.
    fields : sequence of FieldRef or str
        The inputs varied, in the columns of ``x`` (paths are resolved against ``problem``).
    targets : sequence of Target
        The figures returned, in the columns of ``y``.
    """

    def __init__(self, problem: Problem, fields: Sequence[FieldRef | str],
                 targets: Sequence[Target]):
        self.problem = problem
        self.fields = tuple(resolve(problem, f) for f in fields)
        self.targets = tuple(check_target(problem, t) for t in targets)
        self._domains = [field_domain(problem, f) for f in self.fields]
        self._nominal_x = np.array([value_of(problem, f) for f in self.fields], dtype=float)
        self._batched = _closed_form_batch_applies(problem, self.fields)
        self._finite_volumes = _finite_volume_batch_applies(problem, self.fields)
        self._flow: _FlowTrials | None = None

    @property
    def method(self) -> str:
        """How the trials are solved: ``batched closed form``, ``batched finite volumes``,
        ``scaled series`` (all trials at once) or ``trial by trial``."""
        if self._batched:
            return "batched closed form"
        if self._finite_volumes:
            return "batched finite volumes"
        if self.problem.inner_boundary.condition.lumen:
            return "batched lumen march"
        if self.problem.regime.kind == "transient" and scaled_series_applies(self.problem,
                                                                             self.fields):
            return "scaled series"
        return "trial by trial"

    def nominal_inputs(self) -> np.ndarray:
        """The fields' values in the case itself (SI), shape (k,)."""
        return self._nominal_x.copy()

    def nominal(self) -> np.ndarray:
        """The targets at the case's own values, shape (m,)."""
        return self(self._nominal_x[None, :])[0]

    def __call__(self, x: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        if x.ndim != 2 or x.shape[1] != len(self.fields):
            raise ValueError(f"x: expected shape (n, {len(self.fields)}), got {x.shape}")
        out = np.full((x.shape[0], len(self.targets)), np.nan)
        valid = np.all(np.isfinite(x), axis=1)
        for j, (lower, open_) in enumerate(self._domains):
            column = x[:, j]
            with np.errstate(invalid="ignore"):
                valid &= column > lower if open_ else column >= lower
        rows = np.flatnonzero(valid)
        if rows.size == 0:
            return out
        if self._batched:
            values, again = _steady_closed_form(self.problem, self.fields, x[rows],
                                                self.targets)
            out[rows] = values
            rows = rows[again]
            if rows.size and len(self.problem.layers) > 1 and self._finite_volumes:
                # a layered body's depleted zone: no closed form, the finite volumes
                out[rows] = _steady_finite_volumes(self.problem, self.fields, x[rows],
                                                   self.targets)
                return out
        elif self._finite_volumes:
            out[rows] = _steady_finite_volumes(self.problem, self.fields, x[rows],
                                               self.targets)
            return out
        elif self.problem.inner_boundary.condition.lumen:
            try:
                if self._flow is None:
                    self._flow = _FlowTrials(self.problem, self.fields)
                out[rows] = self._flow(x[rows], self.targets)
                return out
            except (ValueError, ArithmeticError, np.linalg.LinAlgError):
                pass  # the nominal case or the batch does not solve: trial by trial
            for i in rows:
                out[i] = _flow_one(with_values(self.problem, dict(zip(self.fields, x[i],
                                                                       strict=True))),
                                   self.targets)
            return out
        elif self.problem.regime.kind == "transient":
            out[rows] = transient_targets(self.problem, self.fields, x[rows], self.targets)
            return out
        for i in rows:
            out[i] = _steady_one(with_values(self.problem, dict(zip(self.fields, x[i],
                                                                     strict=True))),
                                 self.targets)
        return out


def _closed_form_batch_applies(problem: Problem, fields: Sequence[FieldRef]) -> bool:
    """Steady, every layer with a closed form, and the body's structure the same in every
    trial (a solid body's inner radius is not varied)."""
    if problem.regime.kind != "steady" or problem.inner_boundary.condition.lumen:
        return False
    if any(ly.reaction.law.exact_coefficients(ly.reaction) is None for ly in problem.layers):
        return False
    return not (problem.geometry != "slab" and any(f.path == "inner" for f in fields))


def _finite_volume_batch_applies(problem: Problem, fields: Sequence[FieldRef]) -> bool:
    """Steady, and the body's structure the same in every trial (as for the closed form)."""
    if problem.regime.kind != "steady" or problem.inner_boundary.condition.lumen:
        return False
    return not (problem.geometry != "slab" and any(f.path == "inner" for f in fields))


# -- steady finite volumes, batched ---------------------------------------------------------

def _steady_finite_volumes(problem: Problem, fields: Sequence[FieldRef], x: np.ndarray,
                           targets: Sequence[Target]) -> np.ndarray:
    """Targets of every trial by ``fv_trials.solve_trials``, the trials in chunks of about
    ``FV_CHUNK_CELLS`` fine-grid cells; a trial it leaves unsolved is solved alone
    (``_steady_one``)."""
    n = x.shape[0]
    out = np.full((n, len(targets)), np.nan)
    unsolved = np.ones(n, dtype=bool)
    try:
        with np.errstate(all="ignore"):
            base = cells_per_layer_trials(replaced(problem, _columns(fields, x)), n)
    except (ValueError, ArithmeticError, np.linalg.LinAlgError):
        base = None
    if base is not None:
        fine_cells = np.cumsum(base.sum(axis=1) * REFINEMENT_RATIO**2)
        chunk = fine_cells // FV_CHUNK_CELLS
        for label in np.unique(chunk):
            rows = np.flatnonzero(chunk == label)
            view = replaced(problem, _columns(fields, x[rows]))
            try:
                figures = solve_trials(view, rows.size)
            except (ValueError, ArithmeticError, np.linalg.LinAlgError):
                continue
            out[rows] = _finite_volume_targets(problem, view, figures, targets)
            unsolved[rows] = ~figures.solved
    for i in np.flatnonzero(unsolved):
        out[i] = _steady_one(with_values(problem, dict(zip(fields, x[i], strict=True))),
                             targets)
    return out


def _columns(fields: Sequence[FieldRef], x: np.ndarray) -> dict[FieldRef, np.ndarray]:
    return {f: x[:, j] for j, f in enumerate(fields)}


def _finite_volume_targets(problem: Problem, view: Problem, figures: TrialFigures,
                           targets: Sequence[Target]) -> np.ndarray:
    n = figures.solved.size
    inner = np.broadcast_to(np.asarray(view.inner, dtype=float), (n,)).copy()
    total = sum((np.asarray(ly.thickness, dtype=float) for ly in view.layers),
                np.zeros(n))
    values: dict[str, np.ndarray] = {
        "flux_inner": figures.flux_inner, "flux_outer": figures.flux_outer,
        "surface_inner": figures.surface_inner, "surface_outer": figures.surface_outer,
        "concentration_min": figures.layer_min.min(axis=1),
        "concentration_max": figures.layer_max.max(axis=1),
        "depletion_front": figures.depletion_front}
    values.update(_biots(view, total, (view.layers[0].diffusivity,
                                       view.layers[-1].diffusivity)))
    values.update(_totals(problem, view, inner, inner + total, figures.flux_inner,
                          figures.flux_outer, figures.consumption))
    out = np.full((n, len(targets)), np.nan)
    for j, target in enumerate(targets):
        if target.layer is not None:
            per_layer = figures.layer_min if target.quantity == "concentration_min" \
                else figures.layer_max
            out[:, j] = per_layer[:, target.layer]
        else:
            out[:, j] = values.get(target.quantity, np.nan)
    out[~figures.solved] = np.nan
    return out


# -- one trial ------------------------------------------------------------------------------

def _steady_one(problem: Problem, targets: Sequence[Target]) -> np.ndarray:
    """The targets of one steady trial by ``steady_check.primary_figures``; NaN on failure."""
    try:
        figures = primary_figures(problem)
    except (ValueError, ArithmeticError, np.linalg.LinAlgError):
        return np.full(len(targets), np.nan)
    row = np.full(len(targets), np.nan)
    for j, target in enumerate(targets):
        if target.layer is not None:
            per_layer = (figures.layer_min if target.quantity == "concentration_min"
                         else figures.layer_max)
            row[j] = per_layer[target.layer] if per_layer else math.nan
        else:
            row[j] = figures.scalars.get(target.quantity, math.nan)
    return row


def _flow_one(problem: Problem, targets: Sequence[Target]) -> np.ndarray:
    """The targets of one trial of a lumen with flow by ``lumen.run.flow_figures`` (the same
    primary solve as the full check, without its checks); NaN on failure."""
    try:
        figures = flow_figures(problem)
    except (ValueError, ArithmeticError, np.linalg.LinAlgError):
        return np.full(len(targets), np.nan)
    return np.array([figures.get(t.quantity, math.nan) for t in targets], dtype=float)


# -- steady closed form, batched ------------------------------------------------------------

class _Batch:
    """A problem's numeric fields as arrays over n trials (scalars broadcast)."""

    def __init__(self, problem: Problem, fields: Sequence[FieldRef], x: np.ndarray):
        n = x.shape[0]
        self.n = n
        self.problem = problem
        view = replaced(problem, {f: x[:, j] for j, f in enumerate(fields)})
        self.view = view

        def full(value: Any) -> np.ndarray:
            return np.broadcast_to(np.asarray(value, dtype=float), (n,)).copy()

        self.full = full
        self.exponent = problem.exponent
        self.thickness = [full(ly.thickness) for ly in view.layers]
        self.diffusivity = [full(ly.diffusivity) for ly in view.layers]
        self.partition = [full(ly.partition) for ly in view.layers]
        self.rate_constant, self.zero_order = [], []
        for ly in view.layers:
            k, q = ly.reaction.law.exact_coefficients(ly.reaction) or (0.0, 0.0)
            self.rate_constant.append(full(k))
            self.zero_order.append(full(q))
        edges = [full(view.inner)]
        for t in self.thickness:
            edges.append(edges[-1] + t)
        self.edges = edges
        self.face_partition = (full(view.face_partition("inner")),
                               full(view.face_partition("outer")))

    def evaluate(self, layer: int, r: np.ndarray, rows: np.ndarray | None = None):
        """``LayerBasis.evaluate`` of ``layer`` at positions r (shape (len(rows), p)) for the
        trials ``rows`` (default all), each branch group of trials as one batched basis."""
        rows = np.arange(self.n) if rows is None else rows
        a, b = self.edges[layer][rows], self.edges[layer + 1][rows]
        d, k = self.diffusivity[layer][rows], self.rate_constant[layer][rows]
        q = self.zero_order[layer][rows]
        reacting, nodal, zero = LayerBasis.branch(k, d, b - a, q)
        out = [np.empty(r.shape) for _ in range(6)]
        key = reacting.astype(int) * 4 + nodal.astype(int) * 2 + zero.astype(int)
        for value in np.unique(key):
            group = np.flatnonzero(key == value)
            # parameters batched over the group's trials (LayerBasis takes arrays, see there)
            batched: dict[str, Any] = {
                "inner_edge": a[group, None], "outer_edge": b[group, None],
                "diffusivity": d[group, None], "rate_constant": k[group, None],
                "zero_order_rate": q[group, None]}
            basis = LayerBasis(exponent=self.exponent,
                               solid=(layer == 0 and self.problem.solid_centre), **batched)
            for field, values in zip(out, basis.evaluate(r[group]), strict=True):
                field[group] = values
        return out


def _apply(form, unknowns: np.ndarray) -> np.ndarray:
    terms, constant = form
    total = np.asarray(constant, dtype=float)
    for col, c in terms.items():
        total = total + c * unknowns[:, col]
    return total


def _solve_stack(matrix: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Unknowns of every trial's system; a singular or non-finite trial gets NaN."""
    finite = np.all(np.isfinite(matrix), axis=(1, 2)) & np.all(np.isfinite(rhs), axis=1)
    out = np.full(rhs.shape, np.nan)
    try:
        out[finite] = np.linalg.solve(matrix[finite], rhs[finite][..., None])[..., 0]
    except np.linalg.LinAlgError:
        for i in np.flatnonzero(finite):
            try:
                out[i] = np.linalg.solve(matrix[i], rhs[i])
            except np.linalg.LinAlgError:
                continue
    return out


class _LayerSolution:
    """C and dC/dr of one layer of every trial from its unknowns."""

    def __init__(self, batch: _Batch, layer: int, c1: np.ndarray, c2: np.ndarray):
        self.batch, self.layer, self.c1, self.c2 = batch, layer, c1, c2
        self.partition = batch.partition[layer]

    def at(self, r: np.ndarray, rows: np.ndarray | None = None):
        rows = np.arange(self.batch.n) if rows is None else rows
        g1, g2, part, dg1, dg2, dpart = self.batch.evaluate(self.layer, r, rows)
        k = self.partition[rows, None]
        c1, c2 = self.c1[rows, None], self.c2[rows, None]
        return k * (c1 * g1 + c2 * g2) + part, k * (c1 * dg1 + c2 * dg2) + dpart


def _layer_extremes(solution: _LayerSolution, a: np.ndarray, b: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray]:
    """True minimum and maximum of C in one layer for every trial: the record's profile
    points, then bisection on dC/dr between the neighbours of the sampled extreme."""
    steps = np.linspace(0.0, 1.0, PROFILE_POINTS_PER_LAYER)
    r = a[:, None] + (b - a)[:, None] * steps[None, :]
    r[:, -1] = b
    c, dc = solution.at(r)
    found = []
    for sign in (1.0, -1.0):
        j = np.argmin(sign * c, axis=1)
        rows = np.arange(c.shape[0])
        best = c[rows, j]
        lo = r[rows, np.maximum(j - 1, 0)]
        hi = r[rows, np.minimum(j + 1, r.shape[1] - 1)]
        slope_lo = sign * dc[rows, np.maximum(j - 1, 0)]
        slope_hi = sign * dc[rows, np.minimum(j + 1, r.shape[1] - 1)]
        # a stationary point of the signed profile lies between the neighbours
        search = np.flatnonzero((slope_lo < 0.0) & (slope_hi > 0.0))
        if search.size:
            low, high = lo[search].copy(), hi[search].copy()
            for _ in range(BISECTION_STEPS):
                middle = 0.5 * (low + high)
                _, slope = solution.at(middle[:, None], search)
                rising = sign * slope[:, 0] > 0.0
                high = np.where(rising, middle, high)
                low = np.where(rising, low, middle)
            value, _ = solution.at((0.5 * (low + high))[:, None], search)
            refined = value[:, 0]
            better = sign * refined < sign * best[search]
            best[search[better]] = refined[better]
        found.append(best)
    return found[0], found[1]


def _totals(problem: Problem, view: Problem, inner: np.ndarray, outer: np.ndarray,
            flux_inner, flux_outer, consumption) -> dict[str, np.ndarray]:
    """The record's rates and totals (``steady_check._totals``) for every trial; ``view`` the
    case with the varied fields as arrays, ``inner``/``outer`` the trials' face positions."""
    n = inner.size

    def full(value: Any) -> np.ndarray:
        return np.broadcast_to(np.asarray(value, dtype=float), (n,)).copy()

    out: dict[str, np.ndarray] = {}
    if problem.geometry == "cylinder":
        out["rate_per_length_inner"] = 2 * math.pi * inner * flux_inner
        out["rate_per_length_outer"] = 2 * math.pi * outer * flux_outer
        out["consumption_per_length"] = 2 * math.pi * consumption
        size = view.length
        a_in, a_out = 2 * math.pi * inner, 2 * math.pi * outer
    elif problem.geometry == "slab":
        out["consumption_per_area"] = consumption
        size = view.area
        a_in = a_out = np.ones(n)
    else:
        size = 1.0
        a_in, a_out = 4 * math.pi * inner**2, 4 * math.pi * outer**2
    if size is not None:
        extent = full(size)
        out["rate_inner"] = extent * a_in * flux_inner
        out["rate_outer"] = extent * a_out * flux_outer
        out["consumption"] = extent * problem.measure_factor * consumption
    return out


def _biots(view: Problem, total: np.ndarray, diffusivity: tuple[Any, Any]
           ) -> dict[str, np.ndarray]:
    """Biot numbers of the faces with a film (``steady_check._biot``) for every trial."""
    out = {}
    for side, boundary, d in (("inner", view.inner_boundary, diffusivity[0]),
                              ("outer", view.outer_boundary, diffusivity[1])):
        h = boundary.condition.film_coefficient(boundary)
        if h is not None:
            out[f"biot_{side}"] = np.broadcast_to(
                np.asarray(h * total / (view.face_partition(side) * d), dtype=float),
                total.shape).copy()
    return out


def _steady_closed_form(problem: Problem, fields: Sequence[FieldRef], x: np.ndarray,
                        targets: Sequence[Target]) -> tuple[np.ndarray, np.ndarray]:
    """Targets of every trial by the batched closed form, and the trials (a boolean mask) to
    solve again alone: a zero-order layer falls below zero (a depleted zone)."""
    with np.errstate(all="ignore"):
        return _closed_form(problem, fields, x, targets)


def _closed_form(problem: Problem, fields: Sequence[FieldRef], x: np.ndarray,
                 targets: Sequence[Target]) -> tuple[np.ndarray, np.ndarray]:
    batch = _Batch(problem, fields, x)
    count = len(problem.layers)
    columns, size = unknown_columns(problem.solid_centre, count)
    forms = []
    for i in range(count):
        edges = np.stack([batch.edges[i], batch.edges[i + 1]], axis=1)
        values = batch.evaluate(i, edges)
        at_edges = [tuple(v[:, e] for v in values) for e in (0, 1)]
        forms.append(EdgeForms(at_edges, batch.diffusivity[i], batch.partition[i], columns[i]))
    rows = system_rows(problem, forms, batch.partition, batch.face_partition,
                       (batch.view.inner_boundary, batch.view.outer_boundary))
    matrix = np.zeros((batch.n, size, size))
    rhs = np.zeros((batch.n, size))
    for j, (coefficients, value) in enumerate(rows):
        scale = np.max(np.abs(np.stack([batch.full(c) for c in coefficients.values()])),
                       axis=0)
        for col, c in coefficients.items():
            matrix[:, j, col] = c / scale
        rhs[:, j] = value / scale
    unknowns = _solve_stack(matrix, rhs)

    n = problem.exponent
    figures: dict[str, np.ndarray] = {
        "flux_inner": batch.full(_apply(forms[0].flux[0], unknowns)),
        "flux_outer": batch.full(_apply(forms[-1].flux[1], unknowns)),
        "surface_inner": batch.full(batch.partition[0] * _apply(forms[0].u[0], unknowns)),
        "surface_outer": batch.full(batch.partition[-1] * _apply(forms[-1].u[1], unknowns)),
    }
    consumption = np.zeros(batch.n)
    lows, highs = [], []
    depleted = np.zeros(batch.n, dtype=bool)
    for i, (col_a, col_b) in enumerate(columns):
        c1 = np.zeros(batch.n) if col_a is None else unknowns[:, col_a]
        solution = _LayerSolution(batch, i, c1, unknowns[:, col_b])
        a, b = batch.edges[i], batch.edges[i + 1]
        low, high = _layer_extremes(solution, a, b)
        lows.append(low)
        highs.append(high)
        q = batch.zero_order[i]
        if np.any(q != 0.0):
            depleted |= (q > 0.0) & (low < 0.0)
            consumption += q * (b ** (n + 1) - a ** (n + 1)) / (n + 1)
        if np.any(batch.rate_constant[i] > 0.0):
            j_in, j_out = _apply(forms[i].flux[0], unknowns), _apply(forms[i].flux[1], unknowns)
            consumption += a**n * j_in - b**n * j_out
    figures["concentration_min"] = np.min(lows, axis=0)
    figures["concentration_max"] = np.max(highs, axis=0)
    figures["depletion_front"] = np.full(batch.n, np.nan)
    total = batch.edges[-1] - batch.edges[0]
    figures.update(_biots(batch.view, total, (batch.diffusivity[0], batch.diffusivity[-1])))
    figures.update(_totals(problem, batch.view, batch.edges[0], batch.edges[-1],
                           figures["flux_inner"], figures["flux_outer"], consumption))
    out = np.full((batch.n, len(targets)), np.nan)
    for j, target in enumerate(targets):
        if target.layer is not None:
            per_layer = lows if target.quantity == "concentration_min" else highs
            out[:, j] = per_layer[target.layer]
        else:
            out[:, j] = figures.get(target.quantity, np.nan)
    failed = ~np.all(np.isfinite(unknowns), axis=1)
    out[failed] = np.nan
    return out, depleted & ~failed


# -- a lumen with flow, batched -------------------------------------------------------------

#: The lumen wall's value in the layers' problem (``lumen.run.layers_problem``).
_WALL_VALUE = FieldRef("inner_boundary", "value")


def _doublings(nominal: tuple[int, int], adapted: tuple[int, int]) -> tuple[int, int]:
    """How often the study of the nominal case doubled its coarse mesh in r and in z."""
    counts = []
    for start, end, cap in zip(nominal, adapted, (MAX_COARSE_CELLS, MAX_COARSE_STEPS),
                               strict=True):
        count, value = 0, start
        while value < end:
            value, count = min(2 * value, cap), count + 1
        counts.append(count)
    return counts[0], counts[1]


class _FlowTrials:
    """The figures of a flow case's trials by ``lumen.trials`` (its docstring): the nominal
    case solved once (``lumen.run.solve_flow``) for its mesh adaptation and wall table; the
    wall law of the trials from the layers: one shared law where no varied field touches
    them (the nominal table, or one tabulated as the full check tabulates over [0, a larger
    inlet]; a linear body's exact conductance), else per trial (the conductances by the
    batched closed form; tables at the nominal table's nodes by the batched finite volumes on
    two meshes, Richardson-extrapolated, ``lumen.layer_accuracy.accurate_batch``, the route
    of ``wall_table.layer_answer`` for every trial at once; layers with a closed form but
    nonlinear kinetics, zero order or a solubility, trial by trial through
    ``wall_table.layer_answer``)."""

    def __init__(self, problem: Problem, fields: Sequence[FieldRef]):
        self.problem, self.fields = problem, tuple(fields)
        self.layer_columns = [j for j, f in enumerate(fields)
                              if (f.part, f.name) not in LUMEN_FIELDS]
        self.layers = layers_problem(problem)
        self.linear = self.layers.is_linear
        self.finite_volumes = any(ly.reaction.law.exact_coefficients(ly.reaction) is None
                                  for ly in problem.layers)
        self.run: FlowRun = solve_flow(problem)
        self.doublings = _doublings(coarse_mesh(problem), self.run.coarse)
        self.inlet = float(self.run.tube.inlet)
        self._tables: dict[int, TableWalls] = {}

    # -- the layers of the trials --------------------------------------------------------

    def _solve_layers(self, x: np.ndarray):
        """The :data:`lumen.trials.LayerSolver` of these trials."""
        def solve(rows: np.ndarray, c_wall: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            q = c_wall.shape[1]
            if self.linear:
                return self._closed_form_layers(x, rows, c_wall)
            if not self.finite_volumes:
                return self._layers_one_by_one(x, rows, c_wall)
            flux, low = np.full(rows.size * q, np.nan), np.full(rows.size * q, np.nan)
            columns = {self.fields[j]: np.repeat(x[rows, j], q) for j in self.layer_columns}
            values = c_wall.ravel()

            def view(part: np.ndarray) -> Problem:
                varied = replaced(self.problem, {f: v[part] for f, v in columns.items()})
                return replaced(layers_problem(varied), {_WALL_VALUE: values[part]})

            # a wall value the lumen could not give (NaN) is not solved: NaN stays
            finite = np.flatnonzero(np.isfinite(values))
            try:
                with np.errstate(all="ignore"):
                    # the finer of accurate_batch's meshes: about twice the default
                    cells = 2 * cells_per_layer_trials(view(finite), finite.size).sum(axis=1)
            except (ValueError, ArithmeticError):
                return flux.reshape(rows.size, q), low.reshape(rows.size, q)
            chunk = np.cumsum(cells) // FV_CHUNK_CELLS
            for label in np.unique(chunk):
                part = finite[chunk == label]
                try:
                    flux[part], low[part] = accurate_batch(view(part), part.size)
                except (ValueError, ArithmeticError, np.linalg.LinAlgError):
                    continue
            return flux.reshape(rows.size, q), low.reshape(rows.size, q)
        return solve

    def _closed_form_layers(self, x: np.ndarray, rows: np.ndarray, c_wall: np.ndarray):
        q = c_wall.shape[1]
        layer_fields = [self.fields[j] for j in self.layer_columns] + [_WALL_VALUE]
        columns = np.column_stack([np.repeat(x[rows, j], q) for j in self.layer_columns]
                                  + [c_wall.ravel()])
        values, _ = _steady_closed_form(
            self.layers, layer_fields, columns,
            [Target("flux_inner"), Target("concentration_min")])
        return values[:, 0].reshape(rows.size, q), values[:, 1].reshape(rows.size, q)

    def _layers_one_by_one(self, x: np.ndarray, rows: np.ndarray, c_wall: np.ndarray):
        flux, low = np.full(c_wall.shape, np.nan), np.full(c_wall.shape, np.nan)
        for i, row in enumerate(rows):
            values = {self.fields[j]: float(x[row, j]) for j in self.layer_columns}
            layers = layers_problem(with_values(self.problem, values))
            for k, c in enumerate(c_wall[i]):
                try:
                    answer = layer_answer(layers, float(c))
                except (ValueError, ArithmeticError, np.linalg.LinAlgError):
                    continue
                flux[i, k], low[i, k] = answer.wall_flux, answer.minimum
        return flux, low

    # -- the wall laws -------------------------------------------------------------------

    def _shared_table(self, bucket: int) -> TableWalls:
        """One table for every trial whose inlet is at most 2^bucket times the nominal one:
        the nominal case's own (bucket 0), else the layers tabulated over [0, 2^bucket times
        the inlet] as the full check tabulates them."""
        if bucket not in self._tables:
            table = self.run.table
            if bucket > 0:
                top = self.inlet * 2.0**bucket
                table = tabulate(self.layers, top, table_tolerance(self.problem))
            flux = np.array([[a.wall_flux] for a in table.answers])
            minimum = np.array([[a.minimum] for a in table.answers])
            self._tables[bucket] = TableWalls(table.nodes / table.top, np.array([table.top]),
                                              flux, minimum)
        return self._tables[bucket]

    def __call__(self, x: np.ndarray, targets: Sequence[Target]) -> np.ndarray:
        n = x.shape[0]
        view = replaced(self.problem, _columns(self.fields, x))

        def full(value: Any) -> np.ndarray:
            return np.broadcast_to(np.asarray(value, dtype=float), (n,)).copy()

        face = view.inner_boundary
        tube = TubeTrials(full(view.inner), full(view.length), full(face.flow_rate),
                          full(face.diffusivity), full(face.inlet))
        with np.errstate(all="ignore"):
            meshes = fine_meshes(tube, self.doublings)
        layers = self._solve_layers(x)
        shared = not self.layer_columns
        figures: dict[str, np.ndarray] = {}
        if self.linear:
            if shared:
                wall = linear_layer_wall(self.layers)
                walls = ConductanceWalls(np.asarray(wall.conductance),
                                         np.asarray(wall.outside))
            else:
                at = np.column_stack([np.zeros(n), np.ones(n)])
                j, _ = layers(np.arange(n), at)
                conductance = j[:, 1] - j[:, 0]
                walls = ConductanceWalls(conductance, -j[:, 0] / conductance)
            figures = flow_trial_figures(tube, meshes, layers, walls=walls)
        elif shared:
            with np.errstate(divide="ignore", invalid="ignore"):
                ratio = np.log2(tube.inlet / self.inlet)
            buckets = np.where(ratio > 1e-12, np.ceil(ratio - 1e-12), 0.0)
            buckets = np.where(np.isfinite(buckets), buckets, 0.0).astype(int)
            figures = {}
            for bucket in np.unique(buckets):
                rows = np.flatnonzero(buckets == bucket)
                try:
                    shared_table = self._shared_table(int(bucket))
                except (ValueError, ArithmeticError, np.linalg.LinAlgError):
                    continue  # those trials are solved alone below
                law = shared_table.take(np.zeros(rows.size, dtype=np.intp))

                def solver(local: np.ndarray, c_wall: np.ndarray, rows=rows):
                    return layers(rows[local], c_wall)
                found = flow_trial_figures(tube.take(rows), meshes[rows], solver, walls=law)
                for name, values in found.items():
                    figures.setdefault(name, np.full(n, np.nan))[rows] = values
        else:
            nominal = self.run.table
            nodes = nominal.nodes / nominal.top
            lowest = float(np.min(self.run.fine.wall)) / self.inlet
            first = int(np.searchsorted(nodes, lowest, side="right")) - 1 - NODE_MARGIN
            figures = flow_trial_figures(tube, meshes, layers, nodes=nodes, first_node=first)
        out = np.full((n, len(targets)), np.nan)
        for j, target in enumerate(targets):
            out[:, j] = figures.get(target.quantity, np.nan)
        # a trial the batch leaves unsolved (its wall iteration or its layers did not
        # settle): alone
        unsolved = figures.get("outlet_concentration", np.full(n, np.nan))
        for i in np.flatnonzero(~np.isfinite(unsolved)):
            out[i] = _flow_one(with_values(self.problem, dict(zip(self.fields, x[i],
                                                                   strict=True))), targets)
        return out
