"""The solves of a transient case: the method of lines on three meshes, the exact series on a
scan of times, their grid-extrapolated values, the continuation towards the steady state and
the steady reference it is compared with."""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from worker.engine import convergence
from worker.engine.boundaries.compartment import compartment_sides
from worker.engine.exact_steady import solve_exact
from worker.engine.fv_grading import GradedCells
from worker.engine.fv_mesh import default_cells_per_layer
from worker.engine.fv_steady import solve_fv
from worker.engine.limits import check_limit
from worker.engine.model import Problem, Regime, SteadySolution
from worker.engine.transient import exact_series, method_of_lines
from worker.engine.transient.early_mesh import graded_coarse
from worker.engine.transient.exact_series import TransientSeriesSolution
from worker.engine.transient.method_of_lines import TransientFVSolution
from worker.engine.transient.scales import (
    CROSS_CHECK_FLOOR,
    amount_scale,
    capacity_resistance_time,
    face_rate_scale,
    face_weights,
)
from worker.engine.transient.solution import AMOUNTS

#: Cells per layer of the coarse mesh: the steady mesh rule divided by this (fine = steady mesh).
COARSE_DIVISOR = 4
#: Fewest cells per layer of the coarse mesh.
MIN_COARSE_CELLS = 10
#: Early-time resolution: a coarse cell is at most this fraction of the diffusion length
#: sqrt(D t) of its layer at the first positive requested time ...
EARLY_RESOLUTION = 0.35
#: ... up to this many coarse cells per layer (fine mesh: four times as many).
MAX_COARSE_CELLS = 250
#: Capacity-resistance times integrated past the duration for ``steady_limit``.
STEADY_HORIZON = 40.0
#: Integrator tolerance of that continuation: only its end state is used, and the decaying
#: error of the path does not reach it.
CONTINUATION_RTOL = 1e-4
#: A kinked case whose time error exceeds this fraction of what the record resolves
#: (:func:`time_error`) is integrated again with a tighter tolerance (``fv_on_meshes``) ...
TIME_TARGET = 0.25
#: ... by the ratio of that error to the target times this factor: the error is estimated on
#: the coarse mesh, and the fine mesh's time error was measured up to about twice the coarse
#: mesh's (a zero-order slab exchanging with a compartment: 1.2e-8 on 50 cells, 2.1e-8 on 200
#: cells of 7.5e-5 mol/m^2 released) ...
TIME_SAFETY = 2.0
#: ... and by at most this factor.
MAX_TIGHTENING = 100.0
#: Scan points (log-spaced over the duration) used to bracket t50/t90 in the series.
EVENT_SCAN_POINTS = 400

__all__ = [
    "COARSE_DIVISOR",
    "STEADY_HORIZON",
    "extrapolated",
    "fv_on_meshes",
    "late_state",
    "mesh_sequence",
    "numerical_time_lag",
    "requested_times",
    "series_on_scan",
    "steady_reference",
    "time_error",
]


def requested_times(problem: Problem) -> tuple[np.ndarray, float]:
    """The requested times (sorted, unique) and the duration, s; ValueError naming the field
    when the regime is not a transient one with times within a positive finite duration."""
    regime = problem.regime
    if regime.kind != "transient":
        raise ValueError(f"regime.kind: expected 'transient', got {regime.kind!r}")
    times = np.asarray(regime.times, dtype=float)
    duration = regime.duration
    if times.size == 0:
        raise ValueError("regime.times: expected at least one time")
    if duration is None or not (duration > 0.0 and math.isfinite(duration)):
        raise ValueError(f"regime.duration: expected a positive finite time, got {duration!r}")
    if np.any(times < 0.0) or np.any(times > duration * (1 + 1e-12)):
        raise ValueError(f"regime.times: expected times within [0, duration = {duration} s]")
    return np.unique(times), float(duration)


def mesh_sequence(problem: Problem, first_time: float | None
                  ) -> list[tuple[int, ...]] | list[GradedCells]:
    """Coarse, medium and fine cells per layer (ratio 2). The coarse mesh is the steady mesh
    rule divided by ``COARSE_DIVISOR``, refined where needed so that the diffusion length at the
    first requested time spans several coarse cells (``EARLY_RESOLUTION``), up to
    ``MAX_COARSE_CELLS``. Where that cap leaves a layer at an exchanging face too coarse for the
    first time (``early_mesh``), the coarse mesh's cells there are graded towards the face
    (``fv_grading.GradedCells``) and the medium and fine meshes cut each of its cells in two
    and four along the same map; every other case gets its uniform meshes."""
    base = default_cells_per_layer(problem)
    cells_per_layer = []
    for n, layer in zip(base, problem.layers, strict=True):
        cells = max(MIN_COARSE_CELLS, math.ceil(n / COARSE_DIVISOR))
        if first_time is not None and first_time > 0.0:
            length = math.sqrt(layer.diffusivity * first_time)
            early = math.ceil(layer.thickness / (EARLY_RESOLUTION * length))
            cells = max(cells, min(early, MAX_COARSE_CELLS))
        cells_per_layer.append(cells)
    coarse = tuple(cells_per_layer)
    graded = graded_coarse(problem, first_time, coarse, EARLY_RESOLUTION)
    if graded is not None:
        return [graded, graded.refined(2), graded.refined(4)]
    return [coarse, tuple(2 * n for n in coarse), tuple(4 * n for n in coarse)]


def fv_on_meshes(problem: Problem, times: np.ndarray, end: float) -> list[TransientFVSolution]:
    """Coarse, medium and fine solutions, integrated together (shared steps).

    A kinked case (implicit steps) with a compartment face and without a reachable
    solubility is integrated once more, with the tolerance tightened in
    proportion (the Richardson-combined amounts' global error scales about linearly with it)
    and by at most ``MAX_TIGHTENING``, where its time error (:func:`time_error`: the coarse
    mesh's amounts with every accepted step halved, the time check's own estimate) exceeds
    ``TIME_TARGET`` of what the record resolves: the ``convergence.time`` limit, and the
    release and face-flux cross-checks' limits on those figures measured as the cross-checks
    measure them. The step control bounds each step's error in a root-mean-square norm over all
    states, which lets the few amount states (the released amounts, a compartment's level)
    exceed their own tolerance several times over; where the release through a compartment
    face shrinks back towards zero as the body consumes what the fluid held, the error
    accumulated on the way is large against what the release comparison resolves there. The
    first run's error and the tolerance used go to the coarse solution's diagnostics
    (``time_tightening``)."""
    positive = times[times > 0.0]
    first = float(positive.min()) if positive.size else None
    meshes = mesh_sequence(problem, first)
    fvs = method_of_lines.solve_transient_fv_meshes(problem, meshes, times, end=end)
    if problem.can_saturate or not compartment_sides(problem):
        # only a compartment's slow exchange is followed with long steps over the whole
        # duration; and where a dissolution front moves, its cell crossings dominate the time
        # study and a tighter tolerance does not shrink it (measured on the coating demo case:
        # 3.2e-7 of the amount scale at the default tolerance, 6.1e-5 at a 26 times tighter one)
        return fvs
    error = time_error(problem, fvs[0])
    if error is None or not error > TIME_TARGET:
        return fvs
    factor = min(TIME_SAFETY * error / TIME_TARGET, MAX_TIGHTENING)
    rtol = method_of_lines.RTOL / factor
    again = method_of_lines.solve_transient_fv_meshes(problem, meshes, times, end=end,
                                                      rtol=rtol)
    if not all(f.success for f in again):
        return fvs
    again[0].diagnostics["time_tightening"] = {
        "first_error": error, "target": TIME_TARGET, "rtol": rtol,
        "implicit_rtol": method_of_lines.implicit_rtol(rtol),
        "first_steps": fvs[0].diagnostics["steps"]}
    return again


def time_error(problem: Problem, coarse: TransientFVSolution) -> float | None:
    """The time error of an implicit-step solution as a fraction of what the record resolves:
    the larger of (a) the largest change of the amounts (remaining, released at either face,
    consumed) when every accepted step is halved, relative to the amount scale (the larger of
    the initial load and the throughput), over the ``convergence.time`` limit, and (b) the
    change of the released amount (both faces) relative to the larger of itself and
    ``CROSS_CHECK_FLOOR`` of the amount scale, over the ``cross_check.release_fraction``
    limit, and (c) the change of each face's r^n-weighted flux relative to the larger of
    itself and ``CROSS_CHECK_FLOOR`` of the largest face rate (at least the rate that moves
    the amount scale over the duration), over that face's ``cross_check.flux_*`` limit, as
    ``compare`` weighs the face rates. None where the solution was not integrated by implicit
    steps or the replay did not converge. The replay is kept on the solution
    (``method_of_lines.time_refinement``): the time check reads it again."""
    if coarse.history is None or not coarse.success:
        return None
    halved = method_of_lines.time_refinement(problem, coarse, 2)
    if halved is None:
        return None
    names = ("remaining", "released_inner", "released_outer", "consumed")
    scale = amount_scale(coarse.initial_load, coarse.released_inner, coarse.released_outer,
                         coarse.consumed)
    if not scale > 0.0:
        return None
    change = max(float(np.max(np.abs(np.asarray(getattr(coarse, n)) - halved[n])))
                 for n in names) / scale
    released = np.asarray(coarse.released_inner) + np.asarray(coarse.released_outer)
    moved = np.abs(released - (halved["released_inner"] + halved["released_outer"]))
    resolved = float(np.max(moved / np.maximum(np.abs(released), CROSS_CHECK_FLOOR * scale)))
    # the face rates as ``compare`` weighs them: r^n-weighted, against the larger of each
    # rate and the floor of the largest rate (at least the rate that moves the amount scale
    # over the duration)
    positive = np.asarray(coarse.times) > 0.0
    weights = face_weights(problem)
    rates = {side: weight * np.asarray(getattr(coarse, f"flux_{side}"))[positive]
             for side, weight in weights.items()}
    duration = float(coarse.end) if coarse.end > 0.0 else 1.0
    rate_scale = face_rate_scale(rates.values(), scale, problem, duration)
    flux = 0.0
    for side, weight in weights.items():
        shifted = np.abs(rates[side] - weight * np.asarray(halved[f"flux_{side}"])[positive])
        flux = max(flux, float(np.max(shifted / np.maximum(
            np.abs(rates[side]), CROSS_CHECK_FLOOR * rate_scale), initial=0.0))
            / check_limit(problem, f"cross_check.flux_{side}"))
    return max(change / check_limit(problem, "convergence.time"),
               resolved / check_limit(problem, "cross_check.release_fraction"), flux)


def series_on_scan(problem: Problem, times: np.ndarray, end: float
                   ) -> tuple[TransientSeriesSolution | None, np.ndarray | None]:
    """Series at the requested times plus a log-spaced scan (for t50/t90), or (None, None)."""
    if exact_series.series_unsupported_reason(problem) is not None:
        return None, None
    positive = times[times > 0.0]
    low = min(positive.min() if positive.size else end, end) * 0.5
    scan = np.geomspace(max(low, end * 1e-7), end, EVENT_SCAN_POINTS)
    solution = exact_series.solve_transient_exact(problem, np.union1d(times, scan))
    return solution, scan


def extrapolated(fvs: list[TransientFVSolution], times: np.ndarray) -> dict[str, np.ndarray]:
    """Per time, the Richardson-extrapolated value of each of :data:`AMOUNTS` (the fine value
    where the three meshes do not converge monotonically); ``fvs`` is coarse, medium, fine."""
    return _extrapolate(fvs, times, {name: [getattr(f, name) for f in reversed(fvs)]
                                     for name in AMOUNTS})


def extrapolated_compartments(fvs: list[TransientFVSolution], times: np.ndarray
                              ) -> dict[str, np.ndarray]:
    """As :func:`extrapolated`, the fluid concentration of each compartment face."""
    return _extrapolate(fvs, times, {side: [f.compartments[side] for f in reversed(fvs)]
                                     for side in fvs[-1].compartments})


def _extrapolate(fvs: list[TransientFVSolution], times: np.ndarray,
                 named: dict[str, list[np.ndarray]]) -> dict[str, np.ndarray]:
    cells = [sum(f.diagnostics["cells_per_layer"]) for f in reversed(fvs)]  # fine first
    out = {}
    for name, series in named.items():  # each: fine, medium, coarse
        values = np.array(series[0], dtype=float)
        for k in range(times.size):
            triple = [float(s[k]) for s in series]
            if not all(math.isfinite(v) for v in triple):
                continue
            study = convergence.grid_study(triple, cells)
            values[k] = study.best_estimate
        out[name] = values
    return out


def late_state(problem: Problem, fine: TransientFVSolution,
               duration: float) -> TransientFVSolution:
    """FV state integrated ``STEADY_HORIZON`` relaxation times past the duration (cached on
    ``fine``: the time lag and the steady limit both read it)."""
    cached = getattr(fine, "_late", None)
    if cached is not None:
        return cached
    horizon = STEADY_HORIZON * capacity_resistance_time(problem)
    end = duration + horizon
    y_end = fine.diagnostics["end_state"]
    late = method_of_lines.solve_transient_fv(
        problem, [duration + 0.5 * horizon, end], fine.mesh.spec, end=end,
        initial_state=y_end, start=duration, rtol=CONTINUATION_RTOL)
    setattr(fine, "_late", late)  # noqa: B010 - a cache the solution type does not declare
    return late


def numerical_time_lag(problem: Problem, fine: TransientFVSolution,
                       duration: float) -> float | None:
    """Intercept t - Q(t)/J_ss of the late-time cumulative outer release (method of lines)."""
    late = late_state(problem, fine, duration)
    if not late.success:
        return None
    measure = problem.measure_factor
    weight = problem.outer ** problem.exponent
    rate = measure * weight * late.flux_outer[-1]
    if rate <= 0.0:
        return None
    return float(late.times[-1] - late.released_outer[-1] / rate)


def steady_reference(problem: Problem) -> SteadySolution:
    """The steady engine's solution of ``problem``: exact where it exists, else finite volumes."""
    steady_problem = dataclasses.replace(problem, regime=Regime("steady"))
    reference: SteadySolution | None
    try:
        reference = solve_exact(steady_problem)
    except (ValueError, ArithmeticError):
        reference = None
    if reference is None or not reference.success:
        reference = solve_fv(steady_problem)
    return reference
