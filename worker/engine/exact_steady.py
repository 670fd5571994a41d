"""Exact steady solutions of layered diffusion-reaction problems by basis superposition.

Each layer obeys ``(1/r^n) d/dr(r^n D dC/dr) = R(C)``; for no reaction, first order
(``R = k C``) and zero order without a depleted zone (``R = Q``) its solution is a combination of
two closed-form basis functions plus a particular solution (see ``basis_functions``). Writing every
layer as ``C = K (c1 g1 + c2 g2) + P`` with dimensionless ``g1``, ``g2`` that stay of order one,
the unknowns are the coefficients (c1, c2) of each layer (concentration units, in the layer's
``C/K`` scale) and ONE linear system holds: a boundary row at each face, and at each interface
one row for continuity of ``C/K`` and one for continuity of the flux. The rows are equilibrated
(each divided by its largest coefficient) before LAPACK ``dgesv`` (LU with partial pivoting, as
``numpy.linalg.solve``) solves them; the relative residual (checked against ``RESIDUAL_LIMIT``)
is recorded in ``diagnostics``.

Zero-order layers are first solved as if they never ran out; if the concentration falls below
zero anywhere in one of them a depleted zone exists and the problem is handed to
``depletion_exact`` (single-layer bodies only; otherwise no closed form is offered here and
``solve_exact`` returns None). Michaelis-Menten layers have no closed form: ``solve_exact``
returns None (see ``mm_bracket`` for comparison bounds).

The consumption ``∫ R(C) r^n dr`` is integrated from the closed-form concentration (graded
Gauss-Legendre for first-order layers, exactly for zero order), NOT from the face fluxes, so that
the mass balance ``r_in^n J_in - r_out^n J_out = consumption`` remains an independent check.

References
----------
J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford, 1975, ch. 4-6, 12, 14.
R.B. Bird, W.E. Stewart, E.N. Lightfoot, *Transport Phenomena*, 2nd ed., Wiley, 2002, §10.6, §18.
H.S. Carslaw, J.C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford, 1959.

Results support, and do not replace, design verification testing and qualified review.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np
from scipy.linalg.lapack import dgesv

from worker.engine.basis_functions import LayerBasis
from worker.engine.boundaries import BOUNDARIES, SYMMETRY
from worker.engine.depletion_exact import solve_depleted
from worker.engine.failed_solution import failed_steady_solution
from worker.engine.graded_quadrature import graded_gauss_rule
from worker.engine.layered_profile import LayeredProfile
from worker.engine.model import (
    GEOMETRY_EXPONENT,
    Boundary,
    Problem,
    SteadySolution,
)
from worker.engine.reaction_measures import (  # noqa: F401  (re-exported helpers)
    effectiveness_factor,
    thiele_modulus,
)
from worker.engine.reactions import REACTIONS

METHOD = "exact-basis-superposition"
REFERENCE = (
    "J. Crank, The Mathematics of Diffusion, 2nd ed., Oxford, 1975, ch. 4-6, 12, 14; "
    "R.B. Bird, W.E. Stewart, E.N. Lightfoot, Transport Phenomena, 2nd ed., Wiley, 2002, "
    "§10.6, §18; H.S. Carslaw, J.C. Jaeger, Conduction of Heat in Solids, 2nd ed., Oxford, 1959"
)
# Relative residual of the equilibrated system above which the solution is reported as failed.
RESIDUAL_LIMIT = 1e-10
_TINY = np.finfo(float).tiny


def _fail(path: str, expected: str, got) -> None:
    raise ValueError(f"{path}: expected {expected}, got {got!r}")


def _positive(value) -> bool:
    return isinstance(value, (int, float)) and math.isfinite(value) and value > 0.0


def _non_negative(value) -> bool:
    return isinstance(value, (int, float)) and math.isfinite(value) and value >= 0.0


def validate_problem(problem: Problem) -> None:
    """Raise ``ValueError`` naming the first field that a steady closed form cannot accept."""
    # (each message is formatted only when its check fails)
    if problem.geometry not in GEOMETRY_EXPONENT:
        _fail("geometry", "slab, cylinder or sphere", problem.geometry)
    if not math.isfinite(problem.inner):
        _fail("inner", "a finite position in m", problem.inner)
    if problem.geometry != "slab" and not problem.inner >= 0.0:
        _fail("inner", "a radius >= 0 m", problem.inner)
    if not len(problem.layers) > 0:
        _fail("layers", "at least one layer", problem.layers)
    for i, layer in enumerate(problem.layers):
        if not _positive(layer.thickness):
            _fail(f"layers[{i}].thickness", "a positive length in m", layer.thickness)
        if not _positive(layer.diffusivity):
            _fail(f"layers[{i}].diffusivity", "a positive value in m^2/s", layer.diffusivity)
        if not _positive(layer.partition):
            _fail(f"layers[{i}].partition", "a positive number", layer.partition)
        reaction = layer.reaction
        if reaction.kind not in REACTIONS:
            _fail(f"layers[{i}].reaction.kind", " | ".join(REACTIONS), reaction.kind)
        for name in ("rate", "rate_constant", "vmax", "km"):
            value = getattr(reaction, name)
            if not _non_negative(value):
                _fail(f"layers[{i}].reaction.{name}", "a finite value >= 0", value)
        for parameter in reaction.law.parameters:
            value = getattr(reaction, parameter.name)
            if parameter.sign == "positive" and not _positive(value):
                _fail(f"layers[{i}].reaction.{parameter.name}", "a positive value", value)
    for side, boundary in (("inner", problem.inner_boundary), ("outer", problem.outer_boundary)):
        if boundary.kind not in BOUNDARIES:
            _fail(f"{side}_boundary.kind", " | ".join(BOUNDARIES), boundary.kind)
        for name in ("value", "bulk"):
            value = getattr(boundary, name)
            if not math.isfinite(value):
                _fail(f"{side}_boundary.{name}", "a finite number", value)
        if not _non_negative(boundary.coefficient):
            _fail(f"{side}_boundary.coefficient", "a finite value >= 0 in m/s",
                  boundary.coefficient)
        if boundary.partition is not None and not _positive(boundary.partition):
            _fail(f"{side}_boundary.partition", "a positive number", boundary.partition)
    if problem.solid_centre and problem.inner_boundary.kind != SYMMETRY.name:
        _fail("inner_boundary.kind", "symmetry at the centre of a solid cylinder or sphere",
              problem.inner_boundary.kind)


def layer_bases(problem: Problem) -> list[LayerBasis]:
    """Closed-form basis of every layer (zero order taken as never depleted)."""
    edges = problem.edges
    bases = []
    for i, layer in enumerate(problem.layers):
        # A kind without a closed form (Michaelis-Menten) never reaches the linear solve.
        rate_constant, zero_order_rate = layer.reaction.law.exact_coefficients(
            layer.reaction) or (0.0, 0.0)
        bases.append(LayerBasis(
            exponent=problem.exponent,
            inner_edge=float(edges[i]),
            outer_edge=float(edges[i + 1]),
            diffusivity=layer.diffusivity,
            rate_constant=rate_constant,
            zero_order_rate=zero_order_rate,
            solid=(i == 0 and problem.solid_centre),
        ))
    return bases


def _is_well_posed(problem: Problem) -> bool:
    """A steady level is fixed by a concentration face, a live film, or first-order uptake."""
    for boundary in (problem.inner_boundary, problem.outer_boundary):
        if boundary.condition.fixes_level(boundary):
            return True
    return any(ly.reaction.law.fixes_level(ly.reaction) for ly in problem.layers)


class EdgeForms:
    """C/K and J at both edges of one layer as linear forms in the layer's unknowns.

    With unknown columns (col1, col2) and C = K (c1 g1 + c2 g2) + P, each form is
    ``(coefficients by column, constant)``; ``u`` is C/K, ``flux`` is J = -D dC/dr.
    ``at_edges`` holds, per edge (inner, outer), ``(g1, g2, P, g1', g2', P')`` of the layer's
    basis there: floats, or arrays over trials (``worker.engine.design.trials`` solves many
    trials at once with the same forms and rows).
    """

    def __init__(self, at_edges, diffusivity, partition, columns: tuple[int | None, int]):
        d = diffusivity
        self.u: list[tuple[dict[int, Any], Any]] = []
        self.flux: list[tuple[dict[int, Any], Any]] = []
        for g1, g2, part, dg1, dg2, dpart in at_edges:
            u_terms = {columns[1]: g2}
            flux_terms = {columns[1]: -d * partition * dg2}
            if columns[0] is not None:
                u_terms[columns[0]] = g1
                flux_terms[columns[0]] = -d * partition * dg1
            self.u.append((u_terms, part / partition))
            self.flux.append((flux_terms, -d * dpart))


def _edge_forms(basis: LayerBasis, partition: float, columns: tuple[int | None, int],
                evaluated: tuple[np.ndarray, ...] | None = None) -> EdgeForms:
    """``EdgeForms`` of one layer in floats. ``evaluated``, if given, is ``basis.evaluate(r)``
    at positions r that start with the two edges (so one evaluation serves the edges and, say,
    quadrature nodes); else each edge is evaluated alone (scalar arithmetic, the same
    values)."""
    at_edges: tuple[tuple[float, ...], ...]
    if evaluated is None:
        at_edges = (basis.edge_values(basis.inner_edge), basis.edge_values(basis.outer_edge))
    else:
        at_edges = tuple(tuple(float(field[e]) for field in evaluated) for e in (0, 1))
    return EdgeForms(at_edges, basis.diffusivity, partition, columns)


def combine(*forms: tuple[dict[int, Any], Any], signs: tuple[Any, ...]):
    """The linear form sum(sign * form): coefficients by column and constant (floats, or
    arrays over trials)."""
    coefficients: dict[int, Any] = {}
    constant: Any = 0.0
    for (terms, value), sign in zip(forms, signs, strict=True):
        for col, c in terms.items():
            coefficients[col] = coefficients.get(col, 0.0) + sign * c
        constant += sign * value
    return coefficients, constant


def face_row(boundary: Boundary, side: str, forms: EdgeForms, partition, face_partition):
    """Row (coefficients by column, right-hand side) of the condition of ``boundary`` at the
    ``side`` face; ``partition`` is the face layer's K, ``face_partition`` the face's (floats,
    or arrays over trials)."""
    e = 0 if side == "inner" else 1
    u_form, flux_form = forms.u[e], forms.flux[e]
    # Flux into the body: +J at the inner face, -J at the outer face.
    inward = 1.0 if side == "inner" else -1.0
    return boundary.condition.exact_row(
        boundary, u_form, flux_form, inward, partition, face_partition, combine
    )


def unknown_columns(solid_centre: bool, count: int) -> tuple[list[tuple[int | None, int]], int]:
    """The unknowns' columns of each of ``count`` layers (the centre layer of a solid body
    has one unknown, the others two) and their number."""
    columns: list[tuple[int | None, int]] = []
    n = 0
    for i in range(count):
        if i == 0 and solid_centre:
            columns.append((None, n))
            n += 1
        else:
            columns.append((n, n + 1))
            n += 2
    return columns, n


def system_rows(problem: Problem, forms: list[EdgeForms], partitions, face_partitions,
                boundaries: tuple[Boundary, Boundary] | None = None):
    """Rows ``(coefficients by column, right-hand side)`` of the closed-form system in order:
    the inner face (none at a solid centre), per interface continuity of C/K then of J, the
    outer face. ``partitions`` per layer and ``face_partitions`` (inner, outer) are floats or
    arrays over trials; ``boundaries`` (default the problem's) may carry arrays too."""
    inner, outer = boundaries or (problem.inner_boundary, problem.outer_boundary)
    rows = []
    if not problem.solid_centre:
        rows.append(face_row(inner, "inner", forms[0], partitions[0], face_partitions[0]))
    for left, right in zip(forms[:-1], forms[1:], strict=True):
        for name in ("u", "flux"):
            terms, constant = combine(getattr(left, name)[1], getattr(right, name)[0],
                                      signs=(1.0, -1.0))
            rows.append((terms, -constant))
    rows.append(face_row(outer, "outer", forms[-1], partitions[-1], face_partitions[1]))
    return rows


def _assemble(problem: Problem, bases: list[LayerBasis],
              evaluated: list[tuple[np.ndarray, ...] | None] | None = None):
    """Equilibrated matrix, right-hand side and the unknown columns of each layer.

    ``evaluated``: per layer, its basis evaluated at positions starting with its two edges
    (see ``_edge_forms``), or None to evaluate at the edges here."""
    columns, count = unknown_columns(bases[0].solid, len(bases))
    partitions = [ly.partition for ly in problem.layers]
    if evaluated is None:
        evaluated = [None] * len(bases)
    forms = [_edge_forms(b, k, c, e)
             for b, k, c, e in zip(bases, partitions, columns, evaluated, strict=True)]
    rows = system_rows(problem, forms, partitions,
                       (problem.face_partition("inner"), problem.face_partition("outer")))
    matrix = np.zeros((count, count))
    rhs = np.zeros(count)
    for j, (coefficients, value) in enumerate(rows):
        scale = max(abs(c) for c in coefficients.values())
        for col, c in coefficients.items():
            matrix[j, col] = c / scale
        rhs[j] = value / scale
    return matrix, rhs, columns, forms


def _apply(form: tuple[dict[int, float], float], unknowns) -> float:
    terms, constant = form
    return float(sum(c * unknowns[col] for col, c in terms.items()) + constant)


def _layer_piece(basis: LayerBasis, partition: float, c1: float, c2: float):
    def piece(r: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return basis.combination(r, c1, c2, partition)
    return piece


def _consumption_rule(problem: Problem, index: int, basis: LayerBasis):
    """Quadrature (nodes, weights) of the consumption integral of one layer, or None where that
    integral is closed-form or zero (see ``_layer_consumption``)."""
    reaction = problem.layers[index].reaction
    rate_constant, _ = reaction.law.exact_coefficients(reaction) or (0.0, 0.0)
    if rate_constant > 0.0:
        return graded_gauss_rule(basis.inner_edge, basis.outer_edge, 1.0 / basis.decay_constant)
    return None


def _layer_consumption(problem: Problem, index: int, basis: LayerBasis, rule,
                       values_at_nodes: np.ndarray | None) -> float:
    """∫ R(C) r^n dr over one layer from the closed-form C (never from the fluxes).

    ``rule`` is ``_consumption_rule`` of the layer and ``values_at_nodes`` the closed-form C at
    its nodes (zero order is integrated exactly, first order by the graded rule)."""
    reaction = problem.layers[index].reaction
    rate_constant, zero_order_rate = reaction.law.exact_coefficients(reaction) or (0.0, 0.0)
    a, b, n = basis.inner_edge, basis.outer_edge, basis.exponent
    if zero_order_rate != 0.0:
        return zero_order_rate * (b ** (n + 1) - a ** (n + 1)) / (n + 1)
    if rule is not None:
        nodes, weights = rule
        return float(rate_constant * (weights * values_at_nodes * nodes**n).sum())
    return 0.0


def _failed(message: str, diagnostics: dict | None = None) -> SteadySolution:
    return failed_steady_solution(METHOD, REFERENCE, message, diagnostics)


def solve_linear(problem: Problem, *, consumption: bool = True,
                 sample_at: Sequence[np.ndarray] | None = None
                 ) -> tuple[SteadySolution, list[float]]:
    """Solve with every zero-order layer taken as never depleted.

    Returns the solution and, per layer, the minimum concentration of each zero-order layer
    (``inf`` for the others), which tells whether that assumption holds. With
    ``consumption=False`` the consumption integral is skipped (NaN), for callers that need only
    the profile and the face fluxes. ``sample_at``: see ``solve_exact``.
    """
    bases = layer_bases(problem)
    want_consumption = consumption
    # One evaluation of each basis serves its edge forms, its consumption quadrature and (for
    # layers evaluated on arrays anyway: the reacting ones) the positions the caller will sample.
    rules = [_consumption_rule(problem, i, basis) if want_consumption else None
             for i, basis in enumerate(bases)]
    samples = [None if sample_at is None or rule is None else _inside(basis, sample_at[i])
               for i, (basis, rule) in enumerate(zip(bases, rules, strict=True))]
    # Per layer: its evaluation at (edges, quadrature nodes, samples), or None when only the
    # edges are wanted; then present exactly when the layer has a rule or samples.
    evaluated: list[Any] = []
    for basis, rule, sample in zip(bases, rules, samples, strict=True):
        parts: list[Any] = [(basis.inner_edge, basis.outer_edge)]
        parts += [] if rule is None else [rule[0]]
        parts += [] if sample is None else [sample]
        evaluated.append(None if len(parts) == 1 else basis.evaluate(np.concatenate(parts)))
    solved = _solve_system(problem, bases, evaluated)
    if isinstance(solved, str):
        return _failed(solved), []
    values, columns, forms, residual = solved
    diagnostics = {"relative_residual": residual, "unknowns": len(values)}
    pieces, minima = [], []
    total_consumption = 0.0 if want_consumption else math.nan
    presampled = {}
    for i, (basis, (col_a, col_b)) in enumerate(zip(bases, columns, strict=True)):
        partition = problem.layers[i].partition
        c1 = 0.0 if col_a is None else values[col_a]
        c2 = values[col_b]
        piece = _layer_piece(basis, partition, c1, c2)
        pieces.append(piece)
        rule = rules[i]
        nodes = 0 if rule is None else rule[0].size
        if want_consumption:
            at_nodes = None
            if rule is not None:  # C at the quadrature nodes, as ``piece`` would give it
                g1, g2, part = (v[2 : 2 + nodes] for v in evaluated[i][:3])
                at_nodes = partition * (c1 * g1 + c2 * g2) + part
            total_consumption += _layer_consumption(problem, i, basis, rules[i], at_nodes)
        if samples[i] is not None:  # C and dC/dr at the sample positions, as ``piece`` gives
            g1, g2, part, dg1, dg2, dpart = (v[2 + nodes :] for v in evaluated[i])
            presampled[i] = (samples[i], partition * (c1 * g1 + c2 * g2) + part,
                             partition * (c1 * dg1 + c2 * dg2) + dpart)
        minima.append(_zero_order_minimum(problem, i, basis, piece))
    profile = LayeredProfile(problem.edges, [ly.diffusivity for ly in problem.layers], pieces,
                             presampled)
    success = residual <= RESIDUAL_LIMIT and (
        math.isfinite(total_consumption) or not want_consumption
    )
    message = ("closed form by basis superposition" if success else
               f"relative residual {residual:.3g} exceeds {RESIDUAL_LIMIT:g}")
    solution = SteadySolution(
        method=METHOD, reference=REFERENCE, success=success, message=message,
        concentration_at=profile.concentration_at, flux_at=profile.flux_at,
        profile_at=profile.profile_at,
        flux_inner=_apply(forms[0].flux[0], values),
        flux_outer=_apply(forms[-1].flux[1], values),
        consumption=float(total_consumption), diagnostics=diagnostics)
    return solution, minima


def _solve_system(problem: Problem, bases: list[LayerBasis], evaluated):
    """Assemble and solve the closed-form system (``evaluated``: see ``_assemble``).

    Returns (unknowns as floats, columns, edge forms, relative residual), or the failure
    message of a singular system.
    """
    matrix, rhs, columns, forms = _assemble(problem, bases, evaluated)
    # LAPACK dgesv (LU with partial pivoting), the routine numpy.linalg.solve calls, without
    # the wrapper checks that dominate its cost on these few unknowns
    _, _, unknowns, info = dgesv(matrix, rhs)
    if info > 0:
        return f"the closed-form system is singular (zero pivot in row {info})"
    return unknowns.tolist(), columns, forms, _relative_residual(matrix, rhs, unknowns)


def _relative_residual(matrix: np.ndarray, rhs: np.ndarray, unknowns: np.ndarray) -> float:
    """max|A x - b| / (max|A| max|x| + max|b|), in plain floats (a few unknowns); NaN when
    anything is not finite."""
    rows, b, x = matrix.tolist(), rhs.tolist(), unknowns.tolist()
    errors = [abs(sum(a * v for a, v in zip(row, x, strict=True)) - bi)
              for row, bi in zip(rows, b, strict=True)]
    scale = (max(abs(a) for row in rows for a in row) * max(map(abs, x)) + max(map(abs, b))
             + _TINY)
    if not (all(map(math.isfinite, errors)) and math.isfinite(scale)):
        return math.nan
    return max(errors) / scale


def linear_face_fluxes(problem: Problem) -> tuple[bool, float, float]:
    """(success, flux_inner, flux_outer) of ``solve_linear`` without its profile and
    consumption, for callers that need only the face fluxes (amount/(m^2 s), outward)."""
    bases = layer_bases(problem)
    solved = _solve_system(problem, bases, [None] * len(bases))
    if isinstance(solved, str):
        return False, math.nan, math.nan
    values, _, forms, residual = solved
    return (residual <= RESIDUAL_LIMIT, _apply(forms[0].flux[0], values),
            _apply(forms[-1].flux[1], values))


def _inside(basis: LayerBasis, positions: np.ndarray | None) -> np.ndarray | None:
    """A private copy of the positions when they are finite and lie within the layer's closed
    interval (there the profile evaluates them unclipped), else None."""
    if positions is None:
        return None
    positions = np.array(positions, dtype=float)
    if positions.ndim != 1 or not positions.size:
        return None
    low, high = float(positions.min()), float(positions.max())
    return positions if basis.inner_edge <= low and high <= basis.outer_edge else None


def _zero_order_minimum(problem: Problem, index: int, basis: LayerBasis, piece) -> float:
    """Smallest C in a zero-order layer: at an edge or where the flux vanishes inside it.

    In a layer of constant consumption Q, r^n J(r) = a^n J(a) - Q (r^(n+1) - a^(n+1))/(n+1),
    so J = 0 at most once, at r0^(n+1) = a^(n+1) + (n+1) a^n J(a)/Q; C is smallest there.
    """
    reaction = problem.layers[index].reaction
    _, zero_order_rate = reaction.law.exact_coefficients(reaction) or (0.0, 0.0)
    if zero_order_rate == 0.0:
        return math.inf
    a, b, n = basis.inner_edge, basis.outer_edge, basis.exponent
    values, gradients = piece(np.array([a, b]))
    candidates = [float(values[0]), float(values[1])]
    flux_a = -basis.diffusivity * float(gradients[0])
    stationary = a ** (n + 1) + (n + 1) * a**n * flux_a / zero_order_rate
    if stationary > 0.0:
        r0 = stationary ** (1.0 / (n + 1))
        if a < r0 < b:
            candidates.append(float(piece(np.array([r0]))[0][0]))
    return min(candidates)


def solve_exact(problem: Problem, *, sample_at: Sequence[np.ndarray] | None = None
                ) -> SteadySolution | None:
    """Closed-form steady solution of a layered problem, or None where none is offered.

    Parameters
    ----------
    problem : Problem
        The normalised case (SI units).
    sample_at : sequence of ndarray, optional
        Positions (m), one array per layer, at which the caller will read the profile with
        ``profile_at(sample_at[i], layer=i)``: the closed form is then evaluated there in the
        same call as the layer's edges, with the same values as a later evaluation.

    Returns
    -------
    SteadySolution or None
        None for Michaelis-Menten layers and for zero-order depletion outside the
        configurations of ``depletion_exact`` (a multi-layer body, for instance). A problem whose
        level is not fixed (only flux or symmetry faces and no first-order uptake) is returned
        with ``success = False``.

    Raises
    ------
    ValueError
        When a field is out of range; the message names the field.

    Notes
    -----
    Covered: slab, cylinder, sphere (hollow or solid), any number of layers, each with no
    reaction, first order, or zero order that does not run out; concentration, flux,
    mass-transfer or symmetry conditions at either face; partition jumps at interfaces and faces.
    Basis functions: Crank 1975 ch. 4-6, 12, 14; Bird, Stewart & Lightfoot 2002 §10.6, §18;
    Carslaw & Jaeger 1959.
    """
    validate_problem(problem)
    if any(ly.reaction.law.exact_coefficients(ly.reaction) is None for ly in problem.layers):
        return None
    if not _is_well_posed(problem):
        return _failed("the steady level is undetermined: no concentration face, no "
                       "mass-transfer film and no first-order uptake")
    solution, minima = solve_linear(problem, sample_at=sample_at)
    if not solution.success or min(minima, default=math.inf) >= 0.0:
        return solution
    return solve_depleted(problem)
