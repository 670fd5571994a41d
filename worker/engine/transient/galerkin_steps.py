"""Time stepping of the Galerkin system (``galerkin._System``): extrapolated implicit Euler with
exact complementarity for the switching terms, error control and steps that land on the
requested times.

One step of size H is taken as implicit Euler with 1, 2, 3 and 4 equal substeps
(``SEQUENCE``); the four end states are combined by the Aitken-Neville table of the harmonic
sequence (E. Hairer, G. Wanner, *Solving Ordinary Differential Equations II*, 2nd ed.,
Springer, 1996, section IV.9, the extrapolated linearly implicit / implicit Euler methods;
P. Deuflhard, Numer. Math. 41 (1983) 399): the diagonal entry T44 is fourth order, T44 - T43
its error estimate, and the step size follows the standard controller
``H_new = H min(4, max(0.2, 0.9 err^(-1/4)))`` with a weighted
root-mean-square norm (where a layer can saturate, after a second rejection from the same time
with the lower order the two attempts show: ``_shrink``). A step in which a node's undissolved
solute would run out ends just short of that instant (``event_spans`` of the system). The
stability function of the table's diagonal entries of implicit Euler tends to 0 along the
negative real axis, where the spectrum of the lumped P1 system lies (a symmetric stiffness
against a positive diagonal mass), so stiff modes are damped. The sequences of one step are
stepped together (``_euler_together``): their r-th substeps are one system of copies of the
meshes side by side, each copy with its own substep size.

Every substep is one implicit Euler system on the r^n-weighted nodal balance

    m_i (u_i - u_i^0) + (s_i - s_i^0) + tau [(A u)_i + F_i(u) + R_i - B_i(u)] = 0,

with ``m`` the lumped mass, ``A`` the stiffness, ``F`` the Gauss-point reaction load,
``B`` the face inflow (Robin or imposed flux; ``m`` includes a compartment's capacity at its
face node and ``F`` its clearance) and two switching terms solved exactly as
complementarity conditions by the primal-dual active-set method (M. Hintermueller, K. Ito,
K. Kunisch, SIAM J. Optim. 13 (2002) 865, a semismooth Newton method, finite for M-matrices):

* nodal zero-order consumption ``R_i``: ``R_i = q_i`` where u_i > 0, ``0 <= R_i <= q_i`` where
  u_i = 0 (the node has run out and consumes what reaches it);
* undissolved solute ``s_i >= 0`` (a layer with a solubility): ``u_i <= U_i`` (U the saturation
  potential S/K of the node), ``s_i (U_i - u_i) = 0``: where solid remains the dissolved
  solute is saturated, and solid dissolves only as fast as diffusion carries solute away.

The smooth remainder (Michaelis-Menten, first order, the Gauss-point zero-order switch next to
a held face) is solved by Newton's method with the exact tridiagonal Jacobian
(``scipy.linalg.solve_banded``). The released and consumed amounts of each substep are the
consistent ones (held face: the residual of its node), so the nodal balance closes to round-off
at every substep, and the extrapolated amounts, being linear combinations of balanced states,
close as well. After extrapolation each node's content ``m_i u_i + s_i`` is split again into
dissolved and undissolved (a projection that keeps the content, so the balance stays closed).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg.lapack import dgtsv

__all__ = ["StepHistory", "integrate"]

#: Substep counts of the extrapolation table (the harmonic sequence).
SEQUENCE = (1, 2, 3, 4)
#: Order of the error estimate's lower entry plus one: the exponent of the step controller.
ORDER = len(SEQUENCE)
#: Step controller: safety factor and bounds on the change of step size.
SAFETY = 0.9
GROW = 4.0
SHRINK = 0.2
#: Largest number of active-set sweeps and Newton iterations of one substep.
MAX_SWEEPS = 60
MAX_NEWTON = 25
#: The nodal error tolerance, as a fraction of the concentration scale, of a node where a
#: switching term changes within the step (and of its neighbours): there any one-step scheme is
#: only first order, the error is local and passes once the switch has happened, and the amounts
#: it moves stay under the amounts' own tolerance.
SWITCH_TOLERANCE = 1e-3
#: Largest number of steps before the integration gives up.
MAX_STEPS = 200_000
#: Lowest observed order the controller assumes after a second rejection from the same time
#: (see ``_shrink``).
LOWEST_ORDER = 0.5


@dataclass
class StepHistory:
    """Accepted step ends: ``ts`` (s), ``states`` (one row per t: u, s, amounts), the number
    of steps, rejected steps, implicit Euler substeps and linear solves."""

    ts: list[float] = field(default_factory=list)
    states: list[np.ndarray] = field(default_factory=list)
    rejected: int = 0
    substeps: int = 0
    solves: int = 0
    success: bool = True
    message: str = "the integration reached the end"


class SubstepFailure(RuntimeError):
    """An implicit Euler substep whose active set or Newton iteration did not settle."""


def _solve_substep(system, u0: np.ndarray, s0: np.ndarray, tau: float | np.ndarray,
                   slopes: tuple[np.ndarray, np.ndarray], tally: StepHistory,
                   flow0: np.ndarray | None = None,
                   bands: tuple[np.ndarray, np.ndarray] | None = None):
    """One linearly implicit Euler substep of size tau from (u0, s0): the smooth balance
    linearised about u0 with the step's Jacobian ``slopes`` (diagonal, coupling of node k with
    k + 1), the switching terms exact. Returns (u, s, inflow_inner, inflow_outer,
    consumption), the last three per mesh as rates (r^n-weighted). ``tau`` may be one size per
    node (meshes that are copies stepped with different sizes); ``flow0`` the balance at u0
    where it is known; ``bands`` the substep matrix's diagonal ``m + tau diag`` and coupling
    ``tau off`` where they are known."""
    m = system.lumped
    q = system.nodal_zero
    limit = system.saturation_potential
    free = system.free
    zero_nodes = system.zero_nodes
    # the switching terms a mesh has at all (the sets of the others stay empty)
    any_zero = system.any_zero
    any_limited = system.any_limited
    diag, off = slopes
    if flow0 is None:
        flow0, _, _ = system.balance(u0, tau, slopes=False)
    if bands is None:
        main = m + tau * diag
        coupling = (tau[:-1] if isinstance(tau, np.ndarray) else tau) * off
    else:
        main, coupling = bands
    nothing = system.nothing
    held = system.held
    # active sets guessed from an explicit predictor (the sweeps then correct the guess)
    dead = zero_nodes & (u0 - tau * (flow0 + q) / m <= 0.0) & free if any_zero else nothing
    idle = nothing
    saturated = system.limited & (s0 - tau * flow0 > 0.0) if any_limited else nothing
    target = np.where(free, u0, system.held_value) if any_zero else system.fixed_target
    needed = solid = None
    for sweep in range(MAX_SWEEPS):
        if any_zero:
            fixed = held | dead | saturated
            target = np.where(dead, 0.0, np.where(saturated, limit, target))
            rate = np.where(dead | idle, 0.0, q)
        else:
            fixed = held | saturated
            rate = q
            if sweep > 0 and any_limited:
                # (the first sweep's fixed nodes are held or saturated: ``fixed_target``)
                target = np.where(saturated, limit, target)
        # unknown: the change u - u0; a fixed node's row is the identity
        upper = np.where(fixed[:-1], 0.0, coupling)
        lower = np.where(fixed[1:], 0.0, coupling)
        rhs = np.where(fixed, target - u0, s0 - tau * (flow0 + rate))
        # every operand is this sweep's own array: solved in place
        _, _, _, change, info = dgtsv(lower, np.where(fixed, 1.0, main), upper, rhs, True,
                                      True, True, True)
        tally.solves += 1
        if info != 0:
            raise SubstepFailure(f"singular substep matrix (LAPACK dgtsv info {info})")
        u = u0 + change
        # the linearised balance at u
        flow = flow0 + diag * change
        flow[:-1] += off * change[1:]
        flow[1:] += off * change[:-1]
        moved = False
        if any_zero:
            needed = (m * (u0 - u) + s0) / tau - flow
            to_dead = zero_nodes & ~fixed & ~idle & (u < 0.0)
            back = dead & (needed > q)
            to_idle = dead & (needed < 0.0)
            idle_back = idle & (u > 0.0)
            moved = bool(to_dead.any() or back.any() or to_idle.any() or idle_back.any())
        if any_limited:
            solid = s0 - m * change - tau * (flow + rate)
            # (u above a finite limit: a limited node, never a held one, whose limit is inf)
            to_saturated = (u > limit) & ~fixed
            dissolved = saturated & (solid < 0.0)
            moved = moved or bool(to_saturated.any() or dissolved.any())
        if not moved:
            break
        if any_zero:
            dead = (dead & ~back & ~to_idle) | to_dead | idle_back
            idle = (idle & ~idle_back) | to_idle
        if any_limited:
            saturated = (saturated & ~dissolved) | to_saturated
        target = u
    else:
        raise SubstepFailure("the active sets of the switching terms did not settle")
    s = np.where(saturated, solid, 0.0) if solid is not None else np.zeros(u0.size)
    if needed is not None:
        rate = np.where(dead, needed, rate)
    inflow_inner, inflow_outer, consumption = system.substep_amounts(u, flow, rate, u0,
                                                                         tau)
    return u, s, inflow_inner, inflow_outer, consumption


def _euler(system, y0: np.ndarray, h: float, n: int, slopes, tally: StepHistory) -> np.ndarray:
    size = system.size
    u, s = y0[:size], y0[size:2 * size]
    amounts = y0[2 * size:].reshape(system.count, 3).copy()
    tau = h / n
    for _ in range(n):
        u, s, inner, outer, consumed = _solve_substep(system, u, s, tau, slopes, tally)
        amounts[:, 0] -= tau * inner
        amounts[:, 1] -= tau * outer
        amounts[:, 2] += tau * consumed
        tally.substeps += 1
    return np.concatenate((u, s, amounts.ravel()))


def _patterns(system, order: list[int]) -> dict[int, tuple[np.ndarray, np.ndarray]]:
    """Per number of copies: each copy's number of substeps per step, repeated per node and
    per mesh (cached on the system)."""
    cached = getattr(system, "_substep_patterns", None)
    if cached is None:
        cached = {}
        for copies in range(1, len(order) + 1):
            counts = np.array(order[:copies], dtype=float)
            cached[copies] = (np.repeat(counts, system.size), np.repeat(counts, system.count))
        system._substep_patterns = cached
    return cached


def _shared_mass(system, copies: int) -> bool:
    """Whether the lumped mass of fewer copies of the meshes is the leading part of that of
    ``copies`` copies, to the bit (then the substep matrices of every round are the leading
    parts of the first round's; checked once per system)."""
    cached = getattr(system, "_mass_shared", None)
    if cached is None:
        full = system.replica(copies).lumped
        cached = all(np.array_equal(system.replica(k).lumped, full[:k * system.size])
                     for k in range(1, copies))
        system._mass_shared = cached
    return cached


def _euler_together(system, y0: np.ndarray, h: float, slopes, tally: StepHistory,
                    flow: np.ndarray | None = None) -> dict[int, np.ndarray]:
    """The end states of implicit Euler over h with each of ``SEQUENCE`` substeps, the
    sequences stepped together: in round r every sequence with at least r substeps takes its
    r-th, all of them one substep of ``system.replica`` (copies of the meshes side by side,
    most substeps first, so the sequences still running are always the leading copies). Each
    copy's substep is the one :func:`_euler` takes (the copies do not couple; the active-set
    sweeps run until every copy's sets settle, a further sweep of a settled copy repeating its
    solution). ``flow``: the balance at y0 where it is known (the first substeps start
    there)."""
    size, count = system.size, system.count
    order = sorted(SEQUENCE, reverse=True)
    copies = len(order)
    u = np.concatenate([y0[:size]] * copies)
    s = np.concatenate([y0[size:2 * size]] * copies)
    amounts = np.concatenate([y0[2 * size:].reshape(count, 3)] * copies)
    diag, off = slopes
    diag_all = np.concatenate([diag] * copies)
    off_all = np.concatenate([off, [0.0]] * copies)
    ends: dict[int, np.ndarray] = {}
    patterns = _patterns(system, order)
    # each copy's substep size, the same in every round: the first round's arrays, of which
    # a later round (fewer copies) takes the leading part
    per_node_all, per_mesh_count_all = patterns[copies]
    tau_all = h / per_node_all
    per_mesh_all = h / per_mesh_count_all
    shared = None
    if _shared_mass(system, copies):
        shared = (system.replica(copies).lumped + tau_all * diag_all,
                  tau_all[:-1] * off_all[:-1])
    for r in range(1, order[0] + 1):
        copies = sum(1 for n in order if n >= r)
        tau = tau_all[:copies * size]
        tiled = (diag_all[:copies * size], off_all[:copies * size - 1])
        bands = None if shared is None else (shared[0][:copies * size],
                                             shared[1][:copies * size - 1])
        start = np.concatenate([flow] * copies) if r == 1 and flow is not None else None
        u, s, inner, outer, consumed = _solve_substep(
            system.replica(copies), u[:copies * size], s[:copies * size], tau, tiled, tally,
            start, bands)
        amounts = amounts[:copies * count]
        per_mesh = per_mesh_all[:copies * count]
        amounts[:, 0] -= per_mesh * inner
        amounts[:, 1] -= per_mesh * outer
        amounts[:, 2] += per_mesh * consumed
        tally.substeps += copies
        for i in range(copies):
            if order[i] == r:
                ends[r] = np.concatenate((u[i * size:(i + 1) * size],
                                          s[i * size:(i + 1) * size],
                                          amounts[i * count:(i + 1) * count].ravel()))
    return ends


def _extrapolate(system, y0: np.ndarray, h: float, tally: StepHistory, linear=None):
    """The table's last diagonal entry (T44) and its error estimate (T44 - T43) of one step of
    size h; ``linear``: the balance at y0 with its Jacobian,
    ``system.balance(u0, 1.0, slopes=True)``, where it is known."""
    flow, diag, off = linear if linear is not None else system.balance(
        y0[:system.size], 1.0, slopes=True)
    slopes = (diag, off)
    ends = _euler_together(system, y0, h, slopes, tally, flow) if hasattr(system, "replica") \
        else {n: _euler(system, y0, h, n, slopes, tally) for n in SEQUENCE}
    table: list[list[np.ndarray]] = []
    for j, n in enumerate(SEQUENCE):
        row = [ends[n]]
        for k in range(1, j + 1):
            ratio = SEQUENCE[j] / SEQUENCE[j - k]
            row.append(row[k - 1] + (row[k - 1] - table[j - 1][k - 1]) / (ratio - 1.0))
        table.append(row)
    best = table[-1][-1]
    return best, best - table[-1][-2]


def _shrink(error: float, h: float, before: tuple[float, float, float] | None) -> float:
    """Factor of the step size after a rejected step of size h with error ``error`` (in the
    tolerance norm). The controller assumes the error scales as h^ORDER; where a step is
    rejected again from the same time (``before``: the earlier attempt's t, h, error), the
    order the two attempts show, log(e1/e2) / log(h1/h2), is used instead when it is lower
    (at least ``LOWEST_ORDER``): right after a node switches, the error is a fast local
    transient that shrinks much more slowly than h^ORDER, and the standard factor would take
    many rejections to get there."""
    if not math.isfinite(error):
        return SHRINK
    order = float(ORDER)
    if before is not None:
        _, h_before, error_before = before
        if h_before > h and error_before > error:
            observed = math.log(error_before / error) / math.log(h_before / h)
            order = min(order, max(LOWEST_ORDER, observed))
        elif error_before <= error:
            order = LOWEST_ORDER
    return max(SHRINK, SAFETY * error ** (-1.0 / order))


def integrate(system, y0: np.ndarray, times: np.ndarray, end: float, rtol: float,
              atol: np.ndarray, first_step: float | None = None) -> StepHistory:
    """Integrate from t = 0 to ``end``, landing on every time of ``times`` (and on ``end``);
    the error of each accepted step is at most 1 in the weighted RMS norm with ``rtol`` and
    ``atol`` (per component of the state)."""
    history = StepHistory()
    history.ts.append(0.0)
    history.states.append(y0.copy())
    targets = np.unique(np.concatenate((times[times > 0.0], [end])))
    targets = targets[targets > 0.0]
    if targets.size == 0:
        return history
    t, y = 0.0, y0.copy()
    h = first_step if first_step is not None else 1e-6 * float(targets[0])
    target_index = 0
    steps = 0
    known = -1
    retried: tuple[float, float, float] | None = None  # (t, h, error) of the last rejection
    while target_index < targets.size:
        target = float(targets[target_index])
        landing = t + h >= target * (1.0 - 1e-12)
        h_try = target - t if landing else h
        if not landing and t + 2.0 * h_try > target:
            h_try = 0.5 * (target - t)  # two even steps instead of one long and one sliver
        if known != len(history.ts):
            # what depends on the state alone, once per accepted step (a rejected step
            # retries from the same state)
            linear = system.balance(y[:system.size], 1.0, slopes=True)
            spans = system.event_spans(y, t, history, linear[0])
            known = len(history.ts)
        h_try = system.limit_to_events(spans, t, h_try)
        landing = t + h_try >= target * (1.0 - 1e-12)
        try:
            candidate, estimate = _extrapolate(system, y, h_try, history, linear)
            scale = atol + rtol * np.maximum(np.abs(y), np.abs(candidate))
            switching = system.switching_nodes(y, candidate)
            if switching.any():
                size = system.size
                scale[:size][switching] = np.maximum(scale[:size][switching],
                                                     SWITCH_TOLERANCE * system.u_scale)
                solid = scale[size:2 * size]
                solid[switching] = np.maximum(
                    solid[switching], SWITCH_TOLERANCE * system.solid_scale[switching])
            error = math.sqrt(float(np.mean((estimate / scale) ** 2)))
        except (SubstepFailure, np.linalg.LinAlgError, FloatingPointError):
            error = math.inf
        steps += 1
        if steps > MAX_STEPS or h_try < 1e-14 * max(target, 1.0):
            history.success = False
            history.message = (f"the step size fell below the round-off of t = {t:.6g} s"
                               if steps <= MAX_STEPS else "too many steps")
            return history
        if not math.isfinite(error) or error > 1.0:
            history.rejected += 1
            h = h_try * _shrink(error, h_try, retried if retried is not None and
                                retried[0] == t else None)
            # measured: it saves steps where dissolution fronts pass nodes, but not where
            # zero-order consumption runs out (there it took more steps), so only the former
            retried = (t, h_try, error) if system.can_saturate else None
            continue
        y = system.project(candidate)
        t = target if landing else t + h_try
        history.ts.append(t)
        history.states.append(y.copy())
        factor = GROW if error == 0.0 else min(GROW, max(SHRINK, SAFETY * error ** (-1.0 / ORDER)))
        h = max(h_try * factor, h if landing else 0.0) if landing else h_try * factor
        if landing:
            target_index += 1
    return history
