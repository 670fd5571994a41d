"""``run_flow``: the steady check of a case whose inner face is a lumen with flow (``flow``).

Primary method: the lumen marched in the axial position (``marching.march``: finite volumes in
the radius, extrapolated implicit Euler along the axis, second order in both) against the
layers' wall law, on three meshes refined in r and three refined in z (the finest shared), each
set a grid study (Celik et al. 2008; ``convergence.grid_study``) of the outlet mixing cup and
wall, the amount through the wall, the body's minimum and the mixing cup at its worst axial
node. The coarse mesh has more axial steps for a long tube (``coarse_mesh``), and a direction
whose study misses its limit has its coarse mesh doubled, at most ``MESH_ADAPTATIONS`` times.
The wall law is exact for linear kinetics (``layer_walls.linear_layer_wall``) and otherwise the
layers' steady solve tabulated once over ``[0, inlet]`` (``wall_table``), verified against
direct solves; each solve is a closed form or finite volumes on two meshes, Richardson-
extrapolated (``layer_accuracy``).

Checks (each a function below, so a test can feed it a wrong figure):

* ``convergence.space_r``, ``convergence.space_z``: the grid bands of those quantities (the
  concentrations' over the inlet concentration), each direction refined alone.
* ``convergence.space_layers`` (layers without a closed form): the layers' radial mesh refined
  by 2 twice at the lowest wall concentration the lumen reaches (where the body's minimum is)
  and the highest (``layer_accuracy.study_layer_mesh``); its bands join those of the outlet
  mixing cup (the wall flux's relative band times the fall along the lumen) and of the body's
  minimum (the minimum's own band, and the fall's band carried by dmin/dc_w).
* ``mass_balance``: in - out at the ends = what crossed the wall (the scheme's own sum), and
  what crossed the wall = what the layers consumed + what left their outer face (the layers'
  balance along the lumen, one quadrature for both).
* ``cross_check.wall_law``: the tabulated wall law against direct solves between its nodes.
* ``cross_check.graetz`` (linear kinetics): the Graetz series with the layers as a Robin wall
  (Graetz 1883; Nusselt 1910; Shah & London 1978, ch. 5), read from the independent reading
  of the case, against the marching outlet values, beyond both routes' bands. Reaction-free
  layers out to a held concentration give the wall by series resistances
  (``graetz.layered_wall_conductance``), code apart from the march's wall.
* ``cross_check.sherwood`` (a long tube, z* >= ``LONG_TUBE_Z_STAR``): the local Sherwood
  number at the outlet against its fully developed value (the Robin series' first term for
  linear kinetics, 48/11 for a uniform wall flux; Shah & London 1978, ch. 5).
* ``cross_check.krogh`` (one zero-order layer, sealed outer face, live everywhere): the linear
  fall of the mixing cup and the Krogh-Erlang minimum at the outlet (Krogh 1919), the closed
  forms' inputs read from the independent reading of the case.

Axial diffusion is neglected; the record states the Peclet number and warns below
``PECLET_WARNING`` (common practice: axial conduction in laminar duct flow is negligible for
Pe above about 100; Shah & London 1978, ch. 5, from memory).

These results support, but do not replace, design verification testing and qualified review;
local regulations and licensed practice govern their use.
"""

from __future__ import annotations

import dataclasses
import math
import time

import numpy as np

from worker.engine.convergence import GridStudy, gci_or_fallback, grid_study
from worker.engine.limits import check_limit
from worker.engine.lumen.graetz import (
    FULLY_DEVELOPED_SH_UNIFORM_FLUX,
    GraetzSeries,
    dimensionless_length,
    graetz_series,
    layered_wall_conductance,
    peclet_number,
    wall_biot_number,
)
from worker.engine.lumen.krogh import krogh_mixing_cup, krogh_tissue_minimum
from worker.engine.lumen.layer_accuracy import (
    LayerStudy,
    flux_band_fraction,
    layer_mesh_check,
    study_layer_mesh,
)
from worker.engine.lumen.layer_walls import linear_layer_wall
from worker.engine.lumen.marching import MarchSolution, Tube, march
from worker.engine.lumen.wall_table import (
    FIRST_PASS_NODES,
    WallTable,
    answer_of,
    layer_answer,
    tabulate,
)
from worker.engine.model import Boundary, Problem
from worker.engine.outcome import Outcome
from worker.engine.steady_check import FALLBACK_SAFETY_FACTOR, FORMAL_ORDER

__all__ = [
    "COARSE_MESH",
    "FlowRun",
    "coarse_mesh",
    "coarse_steps",
    "convergence_checks",
    "flow_figures",
    "graetz_check",
    "krogh_check",
    "layers_problem",
    "mass_balance_check",
    "run_flow",
    "sherwood_band",
    "sherwood_check",
    "solve_flow",
    "table_tolerance",
    "tube_of",
    "wall_law_check",
]

#: Studied quantities that are concentrations (their bands are taken over the inlet's).
CONCENTRATIONS = ("outlet_mixing_cup", "outlet_wall", "concentration_min",
                  "mixing_cup_profile")
#: Coarse mesh (radial cells, axial steps); the study refines each by 2 twice.
COARSE_MESH = (10, 20)
#: Axial steps of the coarse mesh per z*_L^(2/3), and their cap (see ``coarse_mesh``).
AXIAL_PER_Z_STAR = 60.0
MAX_COARSE_STEPS = 400
#: Times the coarse mesh may be doubled in a direction whose study misses its limit, and the
#: radial cells it may reach.
MESH_ADAPTATIONS = 2
MAX_COARSE_CELLS = 40
REFINEMENT = 2
#: Below this Peclet number axial diffusion may matter (common practice, see the docstring).
PECLET_WARNING = 100.0
#: z* at the outlet from which the tube counts as long (the entrance region of a laminar
#: tube ends near z* = 0.03-0.05: Shah & London 1978, ch. 5, from memory; at 0.1 the first
#: omitted Graetz term of the local Sherwood number is below 1e-3 of the first).
LONG_TUBE_Z_STAR = 0.1
#: Graetz series terms, and the truncation tolerance that decides whether they suffice.
SERIES_TERMS = 60
SERIES_TOLERANCE = 1e-10
#: Passes of the wall table's refinement: each verifies it down to ``LOW_MARGIN`` times the
#: lowest wall concentration the lumen reached on the previous table, and the lumen is marched
#: again on the refined law.
TABLE_PASSES = 3
LOW_MARGIN = 0.98
#: Verification points named in the wall-law check's detail.
SHOWN_POINTS = 8
#: Default limits of the lumen's own checks (relative), where the steady family's differs.
FLOW_LIMITS = {
    "cross_check.sherwood": 2e-3,
}


def _limit(problem: Problem, name: str) -> float:
    if name in FLOW_LIMITS and name not in problem.tolerances:
        return FLOW_LIMITS[name]
    return check_limit(problem, name)


def layers_problem(problem: Problem) -> Problem:
    """The layers alone, the lumen wall as a ``concentration`` face (value set per position;
    the flow face's partition, if given, applies at the wall)."""
    face = problem.inner_boundary
    wall = Boundary("concentration", value=0.0, partition=face.partition)
    return dataclasses.replace(problem, inner_boundary=wall)


def tube_of(problem: Problem) -> Tube:
    """The lumen of a flow case: radius ``inner``, the case's ``length`` and the face's flow."""
    face = problem.inner_boundary
    if problem.length is None:
        raise ValueError("length: a flow case needs the length of the lumen")
    return Tube(radius=problem.inner, length=problem.length, flow_rate=face.flow_rate,
                diffusivity=face.diffusivity, inlet=face.inlet)


@dataclasses.dataclass
class FlowRun:
    """The primary solution: the meshes' solutions (``by_mesh``: (n_r, n_z) -> solution), the
    studies in r and z and the tabulated layers (for linear kinetics the marches used the exact
    wall, ``linear_layer_wall``; the table still gives the layers' totals)."""

    problem: Problem
    tube: Tube
    table: WallTable
    by_mesh: dict
    studies: dict
    coarse: tuple[int, int]
    seconds: float

    @property
    def fine(self) -> MarchSolution:
        return self.by_mesh[max(self.by_mesh)]


def _meshes(coarse=COARSE_MESH, ratio=REFINEMENT):
    n_r, n_z = coarse
    top_r, top_z = n_r * ratio**2, n_z * ratio**2
    r_study = [(n_r * ratio**k, top_z) for k in (2, 1, 0)]
    z_study = [(top_r, n_z * ratio**k) for k in (2, 1, 0)]
    return r_study, z_study


def _studied(solution: MarchSolution, table: WallTable, layers: Problem) -> dict[str, float]:
    return {"outlet_mixing_cup": solution.quantity("outlet_mixing_cup"),
            "outlet_wall": solution.quantity("outlet_wall"),
            "through_wall": solution.quantity("through_wall"),
            "concentration_min": _minimum_of(solution, table, layers)[0]}


def coarse_mesh(problem: Problem) -> tuple[int, int]:
    """The coarse mesh (radial cells, axial steps) of a flow case: ``COARSE_MESH``, with more
    axial steps for a long tube, so that the coarse steps near z* = 0.5 stay below about
    0.02 in z* (the first Graetz mode decays as exp(-2 lambda_0^2 z*), 2 lambda_0^2 = 14.6
    for a wall at one concentration: Shah & London 1978, ch. 5): with the nodes graded as
    (k/M)^1.5 that asks M >= ``AXIAL_PER_Z_STAR`` z*_L^(2/3), at most ``MAX_COARSE_STEPS``."""
    tube = tube_of(problem)
    return COARSE_MESH[0], int(coarse_steps(float(tube.z_star(tube.length))))


def coarse_steps(z_star_length):
    """The coarse mesh's axial steps for a tube of dimensionless length ``z_star_length``
    (a float or an array over trials): :func:`coarse_mesh`'s rule."""
    steps = np.ceil(AXIAL_PER_Z_STAR * np.asarray(z_star_length, dtype=float) ** (2.0 / 3.0))
    return np.minimum(np.maximum(COARSE_MESH[1], steps), MAX_COARSE_STEPS).astype(np.int64)


def _profile_study(solutions: list[MarchSolution], coarse_steps: int) -> GridStudy:
    """The mixing cup at the coarse mesh's axial nodes (the finer meshes' nodes include them:
    the grading is the same), studied at each; returns the study of the node whose grid band
    (GCI_fine times the value) is largest."""
    worst: GridStudy | None = None
    worst_band = -1.0
    for k in range(1, coarse_steps + 1):
        values = []
        for solution in solutions:
            stride = (len(solution.position) - 1) // coarse_steps
            values.append(float(solution.mixing_cup[k * stride]))
        study = grid_study(values, ratios=(REFINEMENT, REFINEMENT))
        band = _gci(study) * abs(study.fine)
        if not math.isfinite(band):
            return study
        if band > worst_band:
            worst, worst_band = study, band
    assert worst is not None
    return worst


def table_tolerance(problem: Problem) -> float:
    """The wall table's tolerance (relative, as ``wall_table.tabulate`` takes it): a tenth of
    the tighter of the limits its flux and totals enter, the wall law's and the layers' mass
    balance's."""
    return 0.1 * min(_limit(problem, "cross_check.wall_law"),
                     check_limit(problem, "mass_balance"))


def solve_flow(problem: Problem, coarse: tuple[int, int] | None = None) -> FlowRun:
    """Tabulate the layers, march the lumen on the five meshes of the two studies
    (``coarse``: the coarse mesh, by default :func:`coarse_mesh`)."""
    start = time.perf_counter()
    tube = tube_of(problem)
    coarse = coarse or coarse_mesh(problem)
    layers = layers_problem(problem)
    top = max(tube.inlet, 1e-300)
    tolerance = table_tolerance(problem)
    table = tabulate(layers, top, tolerance, max_nodes=FIRST_PASS_NODES)
    wall = linear_layer_wall(layers) if layers.is_linear else None
    by_mesh: dict = {}

    def solved(meshes):
        for mesh in meshes:
            if mesh not in by_mesh:
                by_mesh[mesh] = march(tube, wall if wall is not None else table.wall(), *mesh)
        return [by_mesh[m] for m in meshes]

    for attempt in range(MESH_ADAPTATIONS + 1):
        r_study, z_study = _meshes(coarse)
        solved(list(dict.fromkeys(r_study + z_study)))
        for _ in range(TABLE_PASSES if wall is None else 0):
            # refine the table where the lumen goes, and march again on the refined law, until
            # the verified range holds every wall concentration the lumen reaches
            low = min(float(np.min(s.wall)) for s in by_mesh.values())
            if table.worst_error <= tolerance or 0.0 < table.low <= low:
                break
            table = tabulate(layers, top, tolerance, low=LOW_MARGIN * low, start=table)
            by_mesh.clear()
            solved(list(dict.fromkeys(r_study + z_study)))
        studies = {}
        for direction, meshes in (("r", r_study), ("z", z_study)):
            solutions = solved(meshes)
            values = [_studied(s, table, layers) for s in solutions]
            studies[direction] = {
                name: grid_study([v[name] for v in values], ratios=(REFINEMENT, REFINEMENT))
                for name in values[0]}
            studies[direction]["mixing_cup_profile"] = _profile_study(solutions, coarse[1])
        limits = {d: check_limit(problem, f"convergence.space_{d}") for d in "rz"}
        short = [d for d in "rz" if _worst_band(studies[d], tube.inlet) > limits[d]]
        if not short or attempt == MESH_ADAPTATIONS:
            break
        # a mesh the study finds too coarse: double the coarse mesh in that direction
        n_r, n_z = coarse
        grown = (min(2 * n_r, MAX_COARSE_CELLS) if "r" in short else n_r,
                 min(2 * n_z, MAX_COARSE_STEPS) if "z" in short else n_z)
        if grown == coarse:
            break
        coarse = grown
    by_mesh = {m: by_mesh[m] for m in dict.fromkeys(r_study + z_study)}
    return FlowRun(problem, tube, table, by_mesh, studies, coarse, time.perf_counter() - start)


def _gci(study: GridStudy) -> float:
    """GCI_fine as a fraction, or the formal-order two-grid fallback (Roache 1994: order 2,
    safety factor 3) where no order could be formed; 0 where the grids agree to round-off."""
    return gci_or_fallback(study, FORMAL_ORDER, FALLBACK_SAFETY_FACTOR)


def _relative_band(name: str, study: GridStudy, inlet: float) -> float:
    """What ``convergence.space_*`` judges of one study: a concentration's grid band over the
    inlet concentration, else the GCI_fine fraction."""
    gci = _gci(study)
    return gci * abs(study.fine) / max(abs(inlet), 1e-300) if name in CONCENTRATIONS else gci


def _worst_band(studies: dict, inlet: float) -> float:
    worst = 0.0
    for name, study in studies.items():
        relative = _relative_band(name, study, inlet)
        worst = max(worst, relative) if math.isfinite(relative) else math.inf
    return worst


def convergence_checks(outcome: Outcome, problem: Problem, studies: dict, meshes,
                       inlet: float) -> dict:
    """``convergence.space_r`` and ``convergence.space_z``: the largest of the grid bands
    (GCI_fine times the value) of the concentrations studied (``CONCENTRATIONS``: the outlet
    mixing cup and wall, the body's minimum, the mixing cup at its worst axial node) over the
    inlet concentration, and the GCI_fine (fraction) of the amount through the wall; returns
    each quantity's grid band (its unit) summed over the directions."""
    bands: dict[str, float] = {}
    for direction, mesh_list in zip(("r", "z"), meshes, strict=True):
        worst, words = 0.0, []
        for name, study in studies[direction].items():
            gci = _gci(study)
            band = gci * abs(study.fine)
            bands[name] = bands.get(name, 0.0) + band
            relative = _relative_band(name, study, inlet)
            worst = max(worst, relative) if math.isfinite(relative) else math.inf
            order = (f"{study.apparent_order:.3g}" if math.isfinite(study.apparent_order)
                     else "not formed")
            words.append(f"{name}: fine {study.fine:.9g}, observed order {order}, GCI_fine "
                         f"{gci:.3g} ({study.convergence})")
        outcome.check_at_most(
            f"convergence.space_{direction}", worst,
            check_limit(problem, f"convergence.space_{direction}"),
            f"meshes (radial cells, axial steps) {', '.join(map(str, mesh_list))}, refined in "
            f"{direction} only: " + "; ".join(words) + "; the concentrations' bands taken over "
            "the inlet concentration (Celik et al. 2008)")
    return bands


def mass_balance_check(outcome: Outcome, problem: Problem, *, inlet_rate: float,
                       outlet_rate: float, through_scheme: float, through_wall_law: float,
                       consumed: float, outer: float) -> None:
    """``mass_balance``: (in - out - through) and (through - consumed - outer), each over the
    throughput (mol/s); ``through_wall_law`` and ``consumed``/``outer`` are the same quadrature
    along the lumen of the wall law and of the layers' own totals."""
    scale = max(abs(inlet_rate - outlet_rate), abs(through_scheme), abs(consumed) + abs(outer),
                1e-300)
    lumen = abs(inlet_rate - outlet_rate - through_scheme) / scale
    layers = abs(through_wall_law - consumed - outer) / scale
    outcome.check_at_most(
        "mass_balance", max(lumen, layers), check_limit(problem, "mass_balance"),
        f"lumen: in {inlet_rate:.9g} - out {outlet_rate:.9g} vs through the wall "
        f"{through_scheme:.9g} {problem.amount_unit}/s (relative {lumen:.3g}); layers: through "
        f"the wall {through_wall_law:.9g} vs consumed {consumed:.9g} + out of the outer face "
        f"{outer:.9g} (relative {layers:.3g})")


def wall_law_check(outcome: Outcome, problem: Problem, table: WallTable, *,
                   closed_form: bool = False) -> None:
    """``cross_check.wall_law``: the tabulated layers against direct solves between nodes
    (``closed_form``: the layers' solves are a closed form, said in the detail)."""
    shown = [f"{c:.4g}" for c, _ in table.verified[:SHOWN_POINTS]]
    more = len(table.verified) - len(shown)
    points = ", ".join(shown) + (f" and {more} more" if more > 0 else "")
    outcome.check_at_most(
        "cross_check.wall_law", table.worst_error, _limit(problem, "cross_check.wall_law"),
        f"monotone cubic table of the layers' wall flux on {len(table.nodes)} wall "
        f"concentrations in [0, {table.top:.6g}] {problem.concentration_unit}, verified over "
        f"[{table.low:.6g}, {table.top:.6g}] (the wall concentrations the lumen reaches) "
        f"against direct steady solves at {points}; largest difference of the wall flux, the "
        "consumption and the outer-face rate, relative to the largest flux (rate through the "
        "wall)" + ("; the layers have a closed form at every wall concentration: their answer "
                   "carries no mesh error and their radial mesh needs no study" if closed_form
                   else ""))


def layer_studies(run: FlowRun, layers: Problem) -> list[LayerStudy]:
    """The studies of the layers' radial mesh (``convergence.space_layers``) at the wall
    concentration of the body's minimum on the finest mesh (:func:`_minimum_of`'s) and at the
    highest the lumen reaches; empty where the layers have a closed form."""
    fine = run.fine
    lowest = float(fine.wall[int(np.argmin(np.asarray(run.table.minimum(fine.wall))))])
    studies = []
    for c_wall in dict.fromkeys((lowest, float(np.max(fine.wall)))):
        study = study_layer_mesh(layers, c_wall, answer_of)
        if study is None:
            return []
        studies.append(study)
    return studies


def _minimum_slope(table: WallTable, c_wall: float) -> float:
    """|d minimum / d c_w| of the table at ``c_wall`` (a central difference)."""
    h = 1e-4 * max(table.top, 1e-300)
    low, high = max(c_wall - h, 0.0), min(c_wall + h, table.top)
    if high <= low:
        return 0.0
    return abs(float(table.minimum(high)) - float(table.minimum(low))) / (high - low)


def _robin_wall(independent: Problem) -> tuple[float, float]:
    """(k_w in m/s, c_out) of the layers seen from the lumen, from the independent reading.
    Reaction-free layers out to a held concentration, both faces at their layers' partitions:
    the series resistances of ``graetz.layered_wall_conductance`` (code the march's wall does
    not use) and c_out the outer value. Otherwise ``linear_layer_wall``'s two closed-form
    solves, which the march's wall shares."""
    inner, outer = independent.inner_boundary, independent.outer_boundary
    if (all(layer.reaction.kind == "none" for layer in independent.layers)
            and outer.kind == "concentration"
            and inner.partition is None and outer.partition is None):
        conductance = layered_wall_conductance(
            independent.inner,
            [(layer.thickness, layer.diffusivity, layer.partition)
             for layer in independent.layers])
        return conductance, float(outer.value)
    wall = linear_layer_wall(layers_problem(independent))
    return wall.conductance, wall.outside


def _series_for(independent: Problem) -> tuple[GraetzSeries, float, float]:
    """The Robin-wall series of the independent reading: (series, conductance, c_out)."""
    conductance, outside = _robin_wall(independent)
    face = independent.inner_boundary
    biot = wall_biot_number(conductance, independent.inner, face.diffusivity)
    series = graetz_series(SERIES_TERMS, biot)
    return series, conductance, outside


def graetz_check(outcome: Outcome, problem: Problem, *, mixing_cup, outlet_wall: float,
                 band: float, series_mixing_cup, series_wall: float, series_band: float,
                 scale: float) -> None:
    """``cross_check.graetz``: the larger of the mixing-cup difference along the lumen (the
    positions where the series is trusted, arrays alike) and the outlet wall difference, over
    ``scale`` (the driving difference c_in - c_out); it fails only beyond the limit plus both
    routes' bands (``band``: the marching's, ``series_band``: the truncation's, both over
    ``scale``)."""
    cup = np.abs(np.atleast_1d(np.asarray(mixing_cup, dtype=float))
                 - np.atleast_1d(np.asarray(series_mixing_cup, dtype=float)))
    k = int(np.argmax(cup))
    value = max(float(cup[k]), abs(outlet_wall - series_wall)) / scale
    limit = check_limit(problem, "cross_check.graetz") + band + series_band
    outcome.check_at_most(
        "cross_check.graetz", value, limit,
        f"mixing cup at {cup.size} positions along the lumen: largest difference "
        f"{float(cup[k]):.3g} {problem.concentration_unit} (marching "
        f"{float(np.atleast_1d(mixing_cup)[k]):.9g}, Graetz series with the layers as a Robin "
        f"wall {float(np.atleast_1d(series_mixing_cup)[k]):.9g}); fluid at the wall at the "
        f"outlet: {outlet_wall:.9g} vs {series_wall:.9g}; relative to the driving difference "
        f"{scale:.6g}; limit includes the grid band {band:.3g} and the series band "
        f"{series_band:.3g} (Graetz 1883; Shah & London 1978)")


def sherwood_check(outcome: Outcome, problem: Problem, *, sherwood: float, expected: float,
                   band: float, source: str) -> None:
    """``cross_check.sherwood``: the outlet's local Sherwood number against its fully
    developed value ``expected`` (relative), beyond the grid band ``band``."""
    value = abs(sherwood - expected) / expected
    outcome.check_at_most(
        "cross_check.sherwood", value, _limit(problem, "cross_check.sherwood") + band,
        f"local Sherwood number at the outlet {sherwood:.6g} vs fully developed {expected:.6g} "
        f"({source}); grid band {band:.3g}")


def krogh_check(outcome: Outcome, problem: Problem, *, mixing_cup, exact_mixing_cup,
                layer_minimum: float, exact_minimum: float, band: float, inlet: float) -> None:
    """``cross_check.krogh``: the mixing cup along the lumen against the exact linear fall
    (arrays alike; relative to the fall at the outlet, the last entries) and the layer's
    outlet minimum against Krogh-Erlang (relative to the inlet)."""
    cups = np.atleast_1d(np.asarray(mixing_cup, dtype=float))
    exact = np.atleast_1d(np.asarray(exact_mixing_cup, dtype=float))
    fall = max(abs(inlet - float(exact[-1])), 1e-300)
    diff = np.abs(cups - exact)
    k = int(np.argmax(diff))
    cup = float(diff[k]) / fall
    low = abs(layer_minimum - exact_minimum) / max(abs(inlet), 1e-300)
    outcome.check_at_most(
        "cross_check.krogh", max(cup, low), check_limit(problem, "cross_check.krogh") + band,
        f"mixing cup at {cups.size} positions against the linear fall: largest difference "
        f"{float(diff[k]):.3g} ({float(cups[k]):.9g} vs {float(exact[k]):.9g}; relative to the "
        f"fall {cup:.3g}); tissue minimum at the outlet {layer_minimum:.9g} vs Krogh-Erlang "
        f"{exact_minimum:.9g} {problem.concentration_unit} (Krogh 1919)")


def _krogh_applies(problem: Problem) -> bool:
    if len(problem.layers) != 1 or problem.layers[0].reaction.kind != "zero_order":
        return False
    outer = problem.outer_boundary
    return bool(outer.condition.is_sealed(outer)) and problem.layers[0].reaction.rate > 0.0


def _trapezoid(y, x) -> float:
    return float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(x)))


def _minimum_of(solution: MarchSolution, table: WallTable, layers: Problem
                ) -> tuple[float, float, float, np.ndarray]:
    """(value, r, z) of the lowest concentration of the fluid and the layers on one mesh, and
    the per-position minimum along the lumen. The layers' minimum at each position comes from
    the table; at the lowest position it is solved again directly."""
    layer_min = np.asarray(table.minimum(solution.wall), dtype=float)
    fluid_min = solution.concentration.min(axis=1)
    along = np.minimum(layer_min, fluid_min)
    k = int(np.argmin(layer_min))
    direct = layer_answer(layers, float(solution.wall[k]))
    i, j = np.unravel_index(int(np.argmin(solution.concentration)),
                            solution.concentration.shape)
    fluid = (float(solution.concentration[i, j]), float(solution.radii[j]),
             float(solution.position[i]))
    layer = (direct.minimum, direct.minimum_radius, float(solution.position[k]))
    along[k] = min(fluid_min[k], direct.minimum)
    best = layer if layer[0] <= fluid[0] else fluid
    return best[0], best[1], best[2], along


def _body_minimum(run: FlowRun, layers: Problem) -> tuple[float, float, float, np.ndarray]:
    """:func:`_minimum_of` on the finest mesh."""
    return _minimum_of(run.fine, run.table, layers)


def _local_sherwood(solution: MarchSolution, tube: Tube) -> tuple[float, float]:
    """(c_m - c_w at the outlet of one mesh's solution, the local Sherwood number
    2 R j / (D (c_m - c_w)) there; NaN where the two are equal)."""
    driving = float(solution.mixing_cup[-1] - solution.wall[-1])
    sherwood = (2.0 * tube.radius * float(solution.wall_flux[-1]) / (tube.diffusivity * driving)
                if driving != 0.0 else math.nan)
    return driving, sherwood


def _outlet_sherwood(run: FlowRun) -> tuple[float, float]:
    """:func:`_local_sherwood` on the finest mesh."""
    return _local_sherwood(run.fine, run.tube)


def sherwood_band(run: FlowRun) -> float:
    """The numerical uncertainty of the outlet's local Sherwood number: its grid band (GCI_fine
    times the value; Celik et al. 2008) on the meshes refined in r and on those refined in z,
    summed as the record's other figures' bands are; NaN where a mesh gives no number."""
    r_study, z_study = _meshes(run.coarse)
    band = 0.0
    for meshes in (r_study, z_study):
        values = [_local_sherwood(run.by_mesh[m], run.tube)[1] for m in meshes]
        if not all(math.isfinite(v) for v in values):
            return math.nan
        study = grid_study(values, ratios=(REFINEMENT, REFINEMENT))
        band += _gci(study) * abs(study.fine)
    return band


def _figures(run: FlowRun, layers: Problem) -> dict[str, float]:
    tube, fine = run.tube, run.fine
    _, sherwood = _outlet_sherwood(run)
    value, r_min, z_min, _ = _body_minimum(run, layers)
    return {"outlet_concentration": float(fine.mixing_cup[-1]), "concentration_min": value,
            "concentration_min_r": r_min, "concentration_min_z": z_min,
            "peclet": peclet_number(tube.radius, tube.flow_rate, tube.diffusivity),
            "graetz": 1.0 / float(tube.z_star(tube.length)), "sherwood_outlet": sherwood}


#: Axial positions of the record's picture of the body (both ends included).
FIELD_POSITIONS = 21


def axial_field(fine: MarchSolution, table: WallTable, unit: str) -> dict:
    """The record's ``axial_field``: concentration over (position along the lumen, radius) at
    ``FIELD_POSITIONS`` axial nodes of the finest march: the fluid at its cell centres (the
    march's own field), then the layers (material side) at the wall table's profile radii,
    interpolated from the table at the fluid's wall concentration there."""
    picks = np.unique(np.linspace(0, fine.position.size - 1, FIELD_POSITIONS)
                      .round().astype(int))
    rows = [np.concatenate((fine.concentration[k], table.profile(float(fine.wall[k]))))
            for k in picks]
    return {"position": fine.position[picks].tolist(),
            "radius": np.concatenate((fine.radii, table.profile_radii)).tolist(),
            "fluid_cells": int(fine.radii.size),
            "concentration": np.array(rows).tolist(),
            "units": {"position": "m", "radius": "m", "concentration": unit}}


def flow_figures(problem: Problem, coarse: tuple[int, int] | None = None) -> dict[str, float]:
    """The record's scalar figures of a steady flow case by the primary solve alone (the
    design trials' model: the same meshes and wall law as :func:`run_flow`, no checks)."""
    return _figures(solve_flow(problem, coarse), layers_problem(problem))


def run_flow(problem: Problem, independent: Problem | None = None,
             coarse: tuple[int, int] | None = None) -> Outcome:
    """Quantities, the ``axial`` series, methods, checks and warnings of a steady flow case.
    ``independent`` (the second reading of the case) feeds the Graetz series."""
    if problem.regime.kind != "steady":
        raise ValueError("regime.kind: a flow boundary is offered for steady cases only; the "
                         "transient lumen is not offered yet")
    if problem.outer_boundary.condition.lumen:
        raise ValueError("outer_boundary.kind: a flow face is offered at the inner face only")
    independent = independent if independent is not None else problem
    run = solve_flow(problem, coarse)
    tube, fine, layers = run.tube, run.fine, layers_problem(problem)
    outcome = Outcome()
    outcome.diagnostics["flow"] = {
        "meshes": [list(m) for m in run.by_mesh], "seconds": run.seconds,
        "wall_table_nodes": len(run.table.nodes),
        "newton_iterations_max": fine.diagnostics["newton_iterations_max"]}
    conc, amount = problem.concentration_unit, problem.amount_unit
    r_study, z_study = _meshes(run.coarse)
    bands = convergence_checks(outcome, problem, run.studies, (r_study, z_study),
                               tube.inlet)

    consumed = _trapezoid(np.asarray(run.table.consumption_per_length(fine.wall)), fine.position)
    outer = _trapezoid(np.asarray(run.table.outer_per_length(fine.wall)), fine.position)
    wall_rate = 2.0 * math.pi * tube.radius * np.array([run.table.flux(c)[0] for c in fine.wall])
    mass_balance_check(outcome, problem, inlet_rate=fine.inlet_rate,
                       outlet_rate=fine.outlet_rate, through_scheme=float(fine.through_wall[-1]),
                       through_wall_law=_trapezoid(wall_rate, fine.position),
                       consumed=consumed, outer=outer)
    studied = layer_studies(run, layers)
    wall_law_check(outcome, problem, run.table, closed_form=not studied)

    z_star = float(tube.z_star(tube.length))
    pe = peclet_number(tube.radius, tube.flow_rate, tube.diffusivity)
    outlet = float(fine.mixing_cup[-1])
    # the layers' mesh: a relative error of the wall flux shifts what crosses the wall, and so
    # the fall along the lumen, by about as much (the wall concentration moves to oppose it)
    layer_fall_band = 0.0
    if studied:
        layer_mesh_check(outcome, problem, studied,
                         flux_scale=max(abs(a.wall_flux) for a in run.table.answers),
                         radius=tube.radius, inlet=tube.inlet)
        layer_fall_band = flux_band_fraction(studied) * abs(tube.inlet - float(fine.mixing_cup[-1]))
    fall_band = bands["outlet_mixing_cup"] + layer_fall_band
    fall_relative = fall_band / max(abs(tube.inlet - outlet), 1e-300)
    driving, sherwood = _outlet_sherwood(run)
    methods = [{"role": "primary", "name": "lumen marching (finite volumes in r, extrapolated "
                "implicit Euler in z) coupled to the layers' steady solve",
                "reference": "Shah & London 1978, ch. 5 (the problem); Celik et al. 2008 "
                             "(grid study)"}]

    if layers.is_linear:
        series, conductance, c_out = _series_for(independent)
        # the series' positions, inlet and length from the second reading too, read here
        # (not through ``tube_of``, the march's reading)
        second = independent.inner_boundary
        if independent.length is None:
            raise ValueError("length: a flow case needs the length of the lumen")
        second_length = float(independent.length)
        if z_star >= series.smallest_z_star(SERIES_TOLERANCE):
            scale = max(abs(second.inlet - c_out), 1e-300)
            z_all = np.asarray(dimensionless_length(fine.position, second.flow_rate,
                                                    second.diffusivity), dtype=float)
            trusted = z_all >= series.smallest_z_star(SERIES_TOLERANCE)
            graetz_check(
                outcome, problem, mixing_cup=fine.mixing_cup[trusted],
                outlet_wall=float(fine.wall[-1]),
                band=max(fall_band, bands["mixing_cup_profile"], bands["outlet_wall"]) / scale,
                series_mixing_cup=c_out + (second.inlet - c_out) * series.mixing_cup(
                    z_all[trusted]),
                series_wall=c_out + (second.inlet - c_out) * float(
                    series.wall(float(dimensionless_length(
                        second_length, second.flow_rate, second.diffusivity)))[0]),
                series_band=SERIES_TOLERANCE, scale=scale)
            methods.append({"role": "independent", "name": "Graetz series, layers as a Robin "
                            "wall (second reading of the case)",
                            "reference": "Graetz 1883; Nusselt 1910; Shah & London 1978"})
        else:
            outcome.warnings.append(
                f"the Graetz series is not compared: z* = {z_star:.3g} at the outlet is below "
                f"where {SERIES_TERMS} terms are trusted")
        if z_star >= LONG_TUBE_Z_STAR:
            sherwood_check(outcome, problem, sherwood=sherwood,
                           expected=series.fully_developed_sherwood(),
                           band=fall_band / max(abs(driving), 1e-300),
                           source=f"Robin wall, Bi = {series.biot:.4g}, first Graetz term")
    elif _krogh_applies(problem):
        # the closed forms' inputs from the second reading
        layer, second = independent.layers[0], independent.inner_boundary
        k_wall = independent.face_partition("inner")
        minimum = krogh_tissue_minimum(independent.inner, independent.outer, layer.diffusivity,
                                       layer.reaction.rate, k_wall * float(fine.wall[-1]))
        if minimum > 0.0:
            exact = krogh_mixing_cup(fine.position, second.inlet, second.flow_rate,
                                     independent.inner, independent.outer, layer.reaction.rate)
            krogh_check(outcome, problem, mixing_cup=fine.mixing_cup, exact_mixing_cup=exact,
                        layer_minimum=layer_answer(layers, float(fine.wall[-1])).minimum,
                        exact_minimum=minimum, band=fall_relative, inlet=tube.inlet)
            methods.append({"role": "independent", "name": "Krogh cylinder (linear fall, "
                            "Krogh-Erlang profile)", "reference": "Krogh 1919"})
            if z_star >= LONG_TUBE_Z_STAR:
                sherwood_check(outcome, problem, sherwood=sherwood,
                               expected=FULLY_DEVELOPED_SH_UNIFORM_FLUX,
                               band=fall_band / max(abs(driving), 1e-300),
                               source="uniform wall flux, 48/11")
    outcome.methods = methods

    value, r_min, z_min, along = _body_minimum(run, layers)
    outcome.add_quantity("outlet_concentration", outlet, conc, uncertainty=fall_band)
    minimum_band = bands["concentration_min"]
    if studied:
        low_study = studied[0]
        in_layers = r_min >= tube.radius
        minimum_band += (low_study.band("minimum") if in_layers else 0.0) + layer_fall_band * (
            _minimum_slope(run.table, low_study.c_wall) if in_layers else 1.0)
    outcome.add_quantity("concentration_min", value, conc, uncertainty=minimum_band)
    outcome.quantities["concentration_min_position"] = {"value": [r_min, z_min], "unit": "m",
                                                        "r": r_min, "z": z_min}
    outcome.add_quantity("peclet", pe, "1")
    outcome.add_quantity("graetz", 1.0 / z_star, "1")
    outcome.add_quantity("sherwood_outlet", sherwood, "1", uncertainty=sherwood_band(run))
    outcome.series["axial"] = {
        "position": fine.position.tolist(), "mixing_cup": fine.mixing_cup.tolist(),
        "wall": fine.wall.tolist(), "wall_flux": fine.wall_flux.tolist(),
        "concentration_min": along.tolist(),
        "units": {"position": "m", "mixing_cup": conc, "wall": conc,
                  "wall_flux": f"{amount}/(m^2*s)", "concentration_min": conc}}
    outcome.series["axial_field"] = axial_field(fine, run.table, conc)
    if pe < PECLET_WARNING:
        outcome.warnings.append(
            f"Peclet number {pe:.3g} is below {PECLET_WARNING:g}: axial diffusion, neglected "
            "here, may matter (common practice)")
    if value < 0.0:
        outcome.warnings.append(f"the lowest concentration {value:.4g} {conc} is negative")
    return outcome
