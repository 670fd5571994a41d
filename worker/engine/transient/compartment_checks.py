"""What a transient record says of its compartment faces (``boundaries.compartment``): the
fluid concentration series and the two checks of the physics of a stirred finite volume.

* ``series.compartment_inner`` / ``series.compartment_outer``: the primary route's fluid
  concentration at the requested times, with the largest difference from another route as its
  uncertainty;
* ``cross_check.limited_volume``: every route's released amount and fluid concentration against
  Crank's limited-volume solution (``limited_volume.crank_case``), where the case is one of
  Crank's (one uniform layer, one compartment without clearance, the other face sealed or the
  centre of a solid body);
* ``compartment.equilibrium``: the method of lines continued long past the duration against
  the exact equilibrium partition of the load (``limited_volume.equilibrium_level``), for a
  closed case (no reaction, no clearance, every other face sealed).
"""

from __future__ import annotations

import math

import numpy as np

from worker.engine.boundaries.compartment import capacity, compartment_sides
from worker.engine.limits import check_limit
from worker.engine.model import Problem
from worker.engine.outcome import Check, Outcome
from worker.engine.transient import method_of_lines
from worker.engine.transient.limited_volume import crank_case, equilibrium_level
from worker.engine.transient.method_of_lines import TransientFVSolution
from worker.engine.transient.scales import worst
from worker.engine.transient.solution import Route

#: Exchange times (:func:`exchange_time`) the method of lines is continued past the duration
#: for ``compartment.equilibrium``.
EQUILIBRIUM_HORIZON = 40.0
#: Integrator tolerance of that continuation (only its end state is used).
CONTINUATION_RTOL = 1e-6

__all__ = ["EQUILIBRIUM_HORIZON", "add_compartment_series", "equilibrium_check",
           "exchange_time", "limited_volume_check"]


def exchange_time(problem: Problem) -> float:
    """An upper estimate of the slowest relaxation time of a case with compartments, s: the
    body's diffusion time (total thickness)^2 / smallest D, times the partition contrast, plus
    the exchange time of the compartments through the body's resistance, capacity times
    resistance in r^n-weighted units, the resistance taken at the smallest compartment face
    (for a donor behind a thin membrane V h / (A D K), the diaphragm-cell time constant)."""
    layers = problem.layers
    contrast = max(ly.partition for ly in layers) / min(ly.partition for ly in layers)
    body = problem.total_thickness**2 / min(ly.diffusivity for ly in layers) * contrast
    edges = problem.edges
    sides = compartment_sides(problem)
    face = min((abs(float(edges[0 if side == "inner" else -1])) for side in sides),
               default=problem.outer)
    resistance = sum(ly.thickness / (ly.partition * ly.diffusivity) for ly in layers) \
        / max(face, 1e-300) ** problem.exponent
    held = 0.0
    for side in sides:
        layer = layers[0] if side == "inner" else layers[-1]
        held += capacity(problem, side) * layer.partition / problem.face_partition(side)
    n = problem.exponent
    held += sum(ly.partition * (edges[j + 1] ** (n + 1) - edges[j] ** (n + 1)) / (n + 1)
                for j, ly in enumerate(layers))
    return float(body + held * resistance)


def add_compartment_series(outcome: Outcome, routes: list[Route], index: np.ndarray,
                           c_unit: str) -> None:
    """``series.compartment_<side>`` from the primary route, each with its uncertainty (the
    largest difference from another route at each requested time; None without one)."""
    primary = routes[0]
    for side, values in primary.compartments.items():
        own = values[index]
        others = [r.compartments[side][index] for r in routes[1:] if side in r.compartments]
        band = np.max([np.abs(own - o) for o in others], axis=0).tolist() if others \
            else [None] * own.size
        outcome.series[f"compartment_{side}"] = {"values": own.tolist(), "unit": c_unit,
                                                 "uncertainty": band}


def limited_volume_check(outcome: Outcome, problem: Problem, routes: list[Route],
                         internal: np.ndarray) -> None:
    """``cross_check.limited_volume``: each route's released amount (relative to the exact
    exchange) and fluid level (relative to its exact change) against Crank's limited-volume
    solution at every internal time, worst route and time named; a note where the case is
    outside Crank's solutions."""
    case, why = crank_case(problem)
    if case is None:
        outcome.warnings.append(f"cross_check.limited_volume: not applicable ({why})")
        return
    limit = check_limit(problem, "cross_check.limited_volume")
    change = abs(case.final_fluid - case.start_fluid)
    fluid_scale = max(change, 1e-12 * max(abs(case.start_fluid), abs(case.final_fluid)),
                      1e-300)
    amount_scale = case.measure * case.capacity * fluid_scale
    exact_fluid = case.fluid(internal)
    exact_released = case.released(internal)
    released_name = f"released_{case.side}"
    found = []
    for route in routes:
        if case.side not in route.compartments:
            continue
        errors = np.maximum(
            np.abs(route.amounts[released_name] - exact_released) / amount_scale,
            np.abs(route.compartments[case.side] - exact_fluid) / fluid_scale)
        errors = np.where(route.usable, errors, np.nan)
        value, at = worst(errors, internal)
        found.append((value, at, route.name))
    if not found:
        return
    value, at, name = max(found, key=lambda f: -math.inf if not math.isfinite(f[0]) else f[0])
    passed = bool(math.isfinite(value) and value <= limit)
    outcome.checks.append(Check(
        "cross_check.limited_volume", value, limit, passed,
        f"released amount and compartment level of every route against Crank's limited-volume "
        f"solution ({case.geometry}, alpha = {case.alpha:.6g}; J. Crank, The Mathematics of "
        f"Diffusion, 2nd ed., 1975, §§4.3.5, 5.3.4, 6.3.4), relative to the exact exchange; "
        f"worst: {name} at t = {at} s"))


def dissolution_time(problem: Problem) -> float:
    """An upper estimate (s) of the time the undissolved solute of any layer takes to dissolve
    into a sink: the plane pseudo-steady emptying time L^2 A / (2 D S) of the layer (T.
    Higuchi, J. Pharm. Sci. 50 (1961) 874), which bounds a curved layer's; 0 without one."""
    times = [ly.thickness ** 2 * ly.initial / (2.0 * ly.diffusivity * ly.solubility)
             for ly in problem.layers if ly.is_loaded_above_solubility
             and ly.solubility is not None]
    return max(times, default=0.0)


def equilibrium_check(outcome: Outcome, problem: Problem, fine: TransientFVSolution,
                      duration: float, c_scale: float) -> None:
    """``compartment.equilibrium``: the fine mesh continued ``EQUILIBRIUM_HORIZON`` exchange
    times past the duration against the exact equilibrium (every cell at K_i u, every
    compartment at u K_layer / K_face), relative to the larger of u's scale and the case's
    concentration scale; a note where the case is not closed."""
    level = equilibrium_level(problem)
    if level is None:
        outcome.warnings.append(
            "compartment.equilibrium: not applicable (a reaction, a clearance or a face passing "
            "solute out of the system: no equilibrium partition of the load)")
        return
    limit = check_limit(problem, "compartment.equilibrium")
    end = duration + EQUILIBRIUM_HORIZON * exchange_time(problem) \
        + 2.0 * dissolution_time(problem)
    late = method_of_lines.solve_transient_fv(
        problem, [end], fine.mesh.spec, end=end,
        initial_state=fine.diagnostics["end_state"], start=duration, rtol=CONTINUATION_RTOL)
    if not late.success:
        outcome.checks.append(Check("compartment.equilibrium", None, limit, False,
                                    f"continuation failed: {late.message}"))
        return
    partitions = np.array([problem.layers[j].partition for j in late.mesh.layer_index])
    scale = max(c_scale, abs(level) * float(partitions.max()))
    errors = [float(np.max(np.abs(late.cells[-1] - partitions * level))) / scale]
    for side, values in late.compartments.items():
        layer = problem.layers[0] if side == "inner" else problem.layers[-1]
        expected = level * layer.partition / problem.face_partition(side)
        errors.append(abs(float(values[-1]) - expected)
                      / (abs(expected) if expected != 0.0 else scale))
    value = max(errors)
    outcome.checks.append(Check(
        "compartment.equilibrium", value, limit, bool(value <= limit),
        f"state at t = {end:.6g} s ({EQUILIBRIUM_HORIZON:g} exchange times past the duration) "
        f"against the exact equilibrium partition of the load (uniform C/K = {level:.9g}; "
        f"conservation of the load between body and compartments): cells relative to the "
        f"concentration scale, compartments relative to their equilibrium level"))


def fed_zone_note(outcome: Outcome, problem: Problem, fine: TransientFVSolution,
                  internal: np.ndarray, index: np.ndarray, amount_scale: float) -> None:
    """Warn where a compartment feeds a zero-order layer through a zone thinner than the fine
    mesh's face cell while the fluid still holds more than the release-fraction limit of the
    amount scale (what an error of order one in its uptake could move), at the first requested
    time it does.

    Behind a face held at C_s = K C_fluid, zero-order uptake k (amount/(m^3 s)) in a layer
    whose own solute has run out takes up what the fluid supplies within a depth
    delta = sqrt(2 D C_s / k) (m): the steady balance D C'' = k with C = C_s at the face and
    C = C' = 0 at delta (a depleting zero-order zone; A.V. Hill, Proc. R. Soc. Lond. B 104
    (1928) 39, the oxygen debt of a consuming tissue). As the fluid is drained, delta shrinks
    to nothing in finite time; once it is thinner than a cell neither route resolves it (the
    face rate of a cell-wide zone is off by a factor of order delta / h either way), so the
    release and face-rate checks at such times may fail. Read on the fine mesh (whose cells
    are the ones that fall short; a Richardson value of the level can be negative there) at
    the requested times where its face flux runs into the body (``flux_<side>`` < 0: the fluid
    feeds it)."""
    widths = np.diff(fine.mesh.faces)
    for side in compartment_sides(problem):
        layer = problem.layers[0 if side == "inner" else -1]
        if layer.reaction.kind != "zero_order" or not layer.reaction.rate > 0.0:
            continue
        fluid = fine.compartments.get(side)
        if fluid is None:
            continue
        level = np.maximum(np.asarray(fluid, dtype=float)[index], 0.0)
        inward = np.asarray(getattr(fine, f"flux_{side}"), dtype=float)[index] < 0.0
        depth = np.sqrt(2.0 * layer.diffusivity * problem.face_partition(side) * level
                        / layer.reaction.rate)
        cell = float(widths[0] if side == "inner" else widths[-1])
        held = problem.measure_factor * capacity(problem, side) * level
        at_stake = held > check_limit(problem, "cross_check.release_fraction") * amount_scale
        thin = inward & at_stake & (depth < cell)
        if not np.any(thin):
            continue
        k = int(np.flatnonzero(thin)[0])
        outcome.warnings.append(
            f"zero-order uptake fed from the {side} compartment: at t = "
            f"{internal[index[k]]:.6g} s the zone the fluid feeds is about {depth[k]:.3g} m "
            f"deep (sqrt(2 D K C / k)), thinner than the fine mesh's face cell ({cell:.3g} m); "
            "no route resolves it there, so the release and face-rate checks at such times "
            "may fail (a layer drained by its compartment after its own load has run out)")

