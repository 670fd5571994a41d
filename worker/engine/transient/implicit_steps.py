"""Implicit Euler steps with a semismooth Newton solve, step-doubling error control and a
Richardson-extrapolated result: the integrator of method-of-lines systems whose right-hand side
has kinks (zero-order consumption that stops where the solute is used up, a dissolved part
capped at the solubility).

The system is ``m(y)' = f(y)``: ``f`` is the system's right-hand side (``system(t, y)``) with
its (generalised) Jacobian ``system.jacobian(t, y)``; ``m`` is the conserved content of each
state, ``system.content(y)`` with diagonal slope ``system.content_slope(y)`` (identity when the
system does not define them). Both may be piecewise linear. One implicit Euler step of length h
solves

    G(y) = m(y) - m(y_old) - h f(t + h, y) = 0

by Newton's method with a generalised Jacobian dm/dy - h df/dy, the semismooth Newton method of
Qi & Sun: for a piecewise-linear G it stops as soon as the pieces in use no longer change (an
active-set iteration), and it converges quadratically where G is smooth. The step conserves
every linear invariant of m exactly (mass balance) and keeps the monotonicity of the finite
volumes (no overshoot at a kink, no negative concentration).

Error control and order: each step is taken once with h and twice with h/2; the difference
estimates the local error (step doubling), the step is accepted when its weighted RMS norm is
at most 1 (where the system gives ``switched_states``, the weight of a state whose piece
changes within the step, and of its neighbours, is at least ``SWITCH_TOLERANCE`` of its
concentration scale, as in the Galerkin route's steps) and the next step scaled by the usual
square-root rule, rounded down to the first step times a power of two (so that a linear system
reuses its factorisations). Accepted steps land on every requested time. The integration
continues from the half-step solution (``fine``); beside it the solution with the whole steps
(``coarse``) is carried along its own path on the same steps, and the reported amounts are
their Richardson combination 2 fine - coarse, which removes the O(h) term of the global
error where the solution is smooth in time (a linear combination: the mass balance of both
paths carries over). ``path`` runs
implicit Euler on the accepted steps cut into 2^k parts: the pair with the steps halved and
quartered gives the time error and the observed order in time; ``paths`` steps those paths
together on copies of the system (each path's states as it has them alone).

Where the system declares a chain of states among which its Jacobian is tridiagonal (the cells
of the finite volumes, a compartment's level at either end) and the remaining states (the
cumulative amounts) are depended on by none, each Newton correction is one tridiagonal solve
(LAPACK ``dgtsv``) and a substitution (``_ChainSolver``); otherwise a sparse LU.

References
----------
E. Hairer, G. Wanner, *Solving Ordinary Differential Equations II*, 2nd ed., Springer, 1996,
sections IV.3 (implicit Euler, L-stability) and IV.9 (extrapolation of the implicit Euler
method); section II.4 of volume I (step-size control by step doubling).
L. Qi, J. Sun, "A nonsmooth version of Newton's method", Math. Program. 58 (1993) 353-367.
M. Hintermueller, K. Ito, K. Kunisch, "The primal-dual active set strategy as a semismooth
Newton method", SIAM J. Optim. 13 (2002) 865-888.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import sparse
from scipy.linalg.lapack import dgtsv
from scipy.sparse.linalg import splu

#: Newton iterations allowed per implicit step before the step is halved.
MAX_NEWTON = 30
#: Newton stops when the weighted RMS norm of the residual is at most this (in units of the
#: error tolerance of the states).
NEWTON_TOLERANCE = 1e-3
#: Bounds of the factor by which the step changes after a step, and the safety factor.
GROWTH_MAX, GROWTH_MIN, SAFETY = 4.0, 0.2, 0.9
#: Most accepted steps per integration before it is given up as failed.
MAX_STEPS = 200_000
#: The error weight of a state whose piece changes within the step and of its neighbours
#: (``system.switched_states``), as a fraction of the system's concentration scale
#: (``system.switch_scale``): there the step-doubling estimate of a one-step scheme is only
#: first order and hardly shrinks with the step (a cell's content crossing its solubility was
#: measured at an estimate of 1.0-1.3 times its tolerance from a step of 817 s down to 129 s),
#: while the error is local and passes once the switch has happened; the cumulative amounts
#: keep their own tolerance. The value of ``galerkin_steps.SWITCH_TOLERANCE``, for the same
#: reason. On the dispersed-drug bench case (``tests/benchmarks/test_bench_nonsmooth.py``) it
#: took 869 steps instead of 1300 and 159 rejections instead of 446, the amounts' change under
#: halved steps (``convergence.time``) 7.2e-7 of the amount scale instead of 5.3e-7.
SWITCH_TOLERANCE = 1e-3

__all__ = ["ImplicitResult", "integrate", "path", "paths"]


@dataclass
class ImplicitResult:
    """Accepted step times ``ts`` and the states at them (columns): ``fine`` (half steps, the
    path the integration follows) and ``coarse`` (whole steps, its own path);
    ``success``/``message``; the counts of steps, solves and factorisations."""

    ts: np.ndarray
    fine: np.ndarray
    coarse: np.ndarray
    success: bool
    message: str
    counts: dict[str, int] = field(default_factory=dict)


def _content(system: Any, y: np.ndarray) -> np.ndarray:
    content = getattr(system, "content", None)
    return y if content is None else content(y)


def _content_slope(system: Any, y: np.ndarray) -> np.ndarray:
    slope = getattr(system, "content_slope", None)
    return np.ones_like(y) if slope is None else slope(y)


class _StepSolver:
    """Implicit Euler steps of one system, with its factorisations cached by step length and
    Jacobian values (a linear system is factorised once per step length).

    A system with ``jacobian_pattern()`` and ``jacobian_values(t, y)`` (a fixed sparsity
    pattern and its entries) is assembled without rebuilding sparse matrices; otherwise
    ``jacobian(t, y)`` is called."""

    def __init__(self, system: Any, atol: np.ndarray, rtol: float):
        self.system = system
        self.atol = atol
        self.rtol = rtol
        self.cache: dict[float, tuple[np.ndarray, Any]] = {}
        self.counts = {"rhs_evaluations": 0, "jacobian_evaluations": 0, "lu_decompositions": 0,
                       "newton_iterations": 0}
        self.fast = hasattr(system, "jacobian_pattern") and hasattr(system, "jacobian_values")
        if self.fast:
            pattern = sparse.csc_matrix(system.jacobian_pattern())
            size = pattern.shape[0]
            ones = sparse.csc_matrix((np.ones(pattern.nnz), pattern.indices, pattern.indptr),
                                     shape=pattern.shape)
            union = (ones + sparse.identity(size, format="csc")).tocsc()
            union.sort_indices()
            self.union = union
            # where the pattern's entries and the diagonal sit in the union's data
            columns = np.repeat(np.arange(size), np.diff(pattern.indptr))
            self.entry_at = self._positions(union, pattern.indices, columns)
            self.diagonal_at = self._positions(union, np.arange(size), np.arange(size))

    @staticmethod
    def _positions(matrix, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        out = np.empty(rows.size, dtype=np.int64)
        for k, (row, col) in enumerate(zip(rows, cols, strict=True)):
            start, stop = matrix.indptr[col], matrix.indptr[col + 1]
            out[k] = start + int(np.searchsorted(matrix.indices[start:stop], row))
        return out

    def _factor(self, t: float, y: np.ndarray, h: float):
        slope = _content_slope(self.system, y)
        self.counts["jacobian_evaluations"] += 1
        if self.fast:
            values = self.system.jacobian_values(t, y)
            key_data = np.concatenate((values, slope))
        else:
            jac = sparse.csc_matrix(self.system.jacobian(t, y))
            key_data = np.concatenate((jac.data, slope, jac.indices.astype(float)))
        cached = self.cache.get(h)
        if cached is not None and cached[0].shape == key_data.shape and \
                np.array_equal(cached[0], key_data):
            return cached[1]
        if self.fast:
            data = np.zeros(self.union.nnz)
            data[self.entry_at] = -h * values
            data[self.diagonal_at] += slope
            matrix = sparse.csc_matrix((data, self.union.indices, self.union.indptr),
                                       shape=self.union.shape)
        else:
            matrix = (sparse.diags(slope, format="csc") - h * jac).tocsc()
        lu = splu(matrix, permc_spec="NATURAL", diag_pivot_thresh=0.0)
        self.counts["lu_decompositions"] += 1
        if len(self.cache) > 16:
            self.cache.clear()
        self.cache[h] = (key_data, lu)
        return lu

    def _start(self, y_old: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The old contents, the first Newton iterate (a copy of ``y_old``) and the weights
        of the residual norm (atol + rtol |old contents|)."""
        m_old = _content(self.system, y_old)
        return m_old, y_old.copy(), self.atol + self.rtol * np.abs(m_old)

    def step(self, t: float, y_old: np.ndarray, h: float) -> np.ndarray | None:
        """The implicit Euler step from (t, y_old) to t + h, or None when Newton fails."""
        m_old, y, weight = self._start(y_old)
        t_new = t + h
        for _ in range(MAX_NEWTON):
            residual = _content(self.system, y) - m_old - h * self.system(t_new, y)
            self.counts["rhs_evaluations"] += 1
            if not np.all(np.isfinite(residual)):
                return None
            if np.sqrt(np.mean((residual / weight) ** 2)) <= NEWTON_TOLERANCE:
                return y
            lu = self._factor(t_new, y, h)
            self.counts["newton_iterations"] += 1
            y = y - lu.solve(residual)
        return None


class _ChainSolver(_StepSolver):
    """Implicit Euler steps of a system whose Jacobian is tridiagonal among the states of
    ``system.chain_order()`` and whose remaining states (the cumulative amounts) no state
    depends on: each Newton correction solves the tridiagonal block (LAPACK ``dgtsv``) and
    then the remaining rows by substitution. The same Newton iterates as the sparse LU of the
    whole matrix, without building or factorising it."""

    def __init__(self, system: Any, atol: np.ndarray, rtol: float):
        self.system = system
        self.atol = atol
        self.rtol = rtol
        self.counts = {"rhs_evaluations": 0, "jacobian_evaluations": 0, "lu_decompositions": 0,
                       "newton_iterations": 0}
        pattern = sparse.csc_matrix(system.jacobian_pattern())
        size = pattern.shape[0]
        chain = np.asarray(system.chain_order(), dtype=np.int64)
        place = np.full(size, -1, dtype=np.int64)
        place[chain] = np.arange(chain.size)
        rows = pattern.indices.astype(np.int64)
        cols = np.repeat(np.arange(size), np.diff(pattern.indptr))
        if np.any(place[cols] < 0):
            raise ValueError("a state outside the chain is depended on")
        in_chain = place[rows] >= 0
        offset = place[rows[in_chain]] - place[cols[in_chain]]
        if np.any(np.abs(offset) > 1):
            raise ValueError("the chain's Jacobian is not tridiagonal")
        at = np.flatnonzero(in_chain)
        self.chain = chain
        self.tail = np.flatnonzero(place < 0)
        count = chain.size
        # data positions of each tridiagonal entry (nnz: structurally zero, the zero appended
        # to the values)
        nnz = pattern.nnz
        self.diag_at = np.full(count, nnz, dtype=np.int64)
        self.lower_at = np.full(max(count - 1, 0), nnz, dtype=np.int64)
        self.upper_at = np.full(max(count - 1, 0), nnz, dtype=np.int64)
        positions = place[cols[at]]
        self.diag_at[positions[offset == 0]] = at[offset == 0]
        self.lower_at[positions[offset == 1]] = at[offset == 1]  # row k + 1, column k
        self.upper_at[positions[offset == -1] - 1] = at[offset == -1]  # row k, column k + 1
        # the remaining rows' entries: data position, row (in the tail) and chain column
        tail_place = np.full(size, -1, dtype=np.int64)
        tail_place[self.tail] = np.arange(self.tail.size)
        off_chain = np.flatnonzero(~in_chain)
        self.tail_at = off_chain
        self.tail_row = tail_place[rows[off_chain]]
        self.tail_col = place[cols[off_chain]]
        self.terms = getattr(system, "newton_terms", None)
        # the Jacobian's values with a zero appended (the structurally zero entries' value)
        self.padded = np.zeros(nnz + 1)
        self.pieces: Any = getattr(system, "pieces", None) \
            if getattr(system, "piecewise_linear", False) else None

    def _evaluate(self, t: float, y: np.ndarray, jacobian: bool
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray | None, np.ndarray | None]:
        """Content, right-hand side and, with ``jacobian`` (or where the system gives them
        together), the Jacobian's values and the content's slope at y."""
        if self.terms is not None:
            return self.terms(t, y)
        content, f = _content(self.system, y), self.system(t, y)
        if not jacobian:
            return content, f, None, None
        return content, f, self.system.jacobian_values(t, y), _content_slope(self.system, y)

    def _correction(self, t: float, y: np.ndarray, h: float | np.ndarray,
                    residual: np.ndarray, values: np.ndarray | None = None,
                    slope: np.ndarray | None = None) -> np.ndarray | None:
        """The Newton correction; ``h`` one step for every state or one per state (then each
        row of the Newton matrix takes its own state's)."""
        if values is None or slope is None:
            _, _, values, slope = self._evaluate(t, y, True)
            assert values is not None and slope is not None
        self.counts["jacobian_evaluations"] += 1
        self.counts["lu_decompositions"] += 1
        chain, tail = self.chain, self.tail
        padded = self.padded
        padded[:-1] = values
        h_tail: float | np.ndarray
        if isinstance(h, np.ndarray):
            h_chain, h_tail = h[chain], h[tail]
            main = slope[chain] - h_chain * padded[self.diag_at]
            lower = -h_chain[1:] * padded[self.lower_at]  # row k + 1
            upper = -h_chain[:-1] * padded[self.upper_at]  # row k
        else:
            h_tail = h
            main = slope[chain] - h * padded[self.diag_at]
            lower = -h * padded[self.lower_at]
            upper = -h * padded[self.upper_at]
        _, _, _, change, info = dgtsv(lower, main, upper, residual[chain], True, True, True,
                                      True)
        if info != 0:
            return None
        correction = np.empty_like(residual)
        correction[chain] = change
        coupled = np.bincount(self.tail_row, weights=values[self.tail_at]
                              * change[self.tail_col], minlength=tail.size)
        correction[tail] = (residual[tail] + h_tail * coupled) / slope[tail]
        return correction

    def step_blocks(self, y_old: np.ndarray, h: np.ndarray, copies: int,
                    pieces: Any) -> np.ndarray | None:
        """Implicit Euler steps of ``copies`` independent blocks of states (copies of one
        system of equal size, block b the states ``b * size:(b + 1) * size``) at once, ``h``
        the step of each state's block: each block is iterated as :meth:`step` iterates it
        alone (its own residual norm, its own piece test, ``pieces`` giving row b the pieces
        of block b from the states as rows) and left as it is once it has converged. None
        when any block fails."""
        m_old, y, weight = self._start(y_old)
        size = y.size // copies
        live = np.ones(copies, dtype=bool)
        for _ in range(MAX_NEWTON):
            content, f, values, slope = self._evaluate(0.0, y, False)
            residual = content - m_old - h * f
            self.counts["rhs_evaluations"] += 1
            scaled = residual / weight
            for b in np.flatnonzero(live):
                part = scaled[b * size:(b + 1) * size]
                norm = math.sqrt(float(np.dot(part, part)) / part.size)
                if not math.isfinite(norm):
                    return None
                if norm <= NEWTON_TOLERANCE:
                    live[b] = False
            if not live.any():
                return y
            correction = self._correction(0.0, y, h, residual, values, slope)
            if correction is None:
                return None
            self.counts["newton_iterations"] += 1
            moving = np.where(np.repeat(live, size), correction, 0.0)
            before = pieces(y.reshape(copies, size)) if self.pieces is not None else None
            y = y - moving
            if before is not None:
                settled = (before == pieces(y.reshape(copies, size))).all(axis=1) & \
                    np.isfinite(moving.reshape(copies, size).sum(axis=1))
                live &= ~settled
                if not live.any():
                    return y
        return None

    def step(self, t: float, y_old: np.ndarray, h: float) -> np.ndarray | None:
        """The implicit Euler step from (t, y_old) to t + h, or None when Newton fails."""
        m_old, y, weight = self._start(y_old)
        t_new = t + h
        size = y.size
        known: np.ndarray | None = None  # pieces(y) of the current iterate, once computed
        for _ in range(MAX_NEWTON):
            content, f, values, slope = self._evaluate(t_new, y, False)
            residual = content - m_old - h * f
            self.counts["rhs_evaluations"] += 1
            scaled = residual / weight
            norm = math.sqrt(float(np.dot(scaled, scaled)) / size)
            if not math.isfinite(norm):
                return None
            if norm <= NEWTON_TOLERANCE:
                return y
            correction = self._correction(t_new, y, h, residual, values, slope)
            if correction is None:
                return None
            self.counts["newton_iterations"] += 1
            if self.pieces is None:
                y = y - correction
                continue
            before = known if known is not None else self.pieces(y)
            y = y - correction
            known = self.pieces(y)
            # (the pieces of one system have one shape: equal arrays are equal elements)
            if bool((before == known).all()) and math.isfinite(float(correction.sum())):
                # the system is affine between the two iterates: the new residual is zero
                # to round-off, so y is the root
                return y
        return None


def _solver(system: Any, atol: np.ndarray, rtol: float) -> _StepSolver:
    """The chain solver where the system declares a tridiagonal chain, else sparse LU."""
    atol = np.asarray(atol, dtype=float)
    if hasattr(system, "chain_order") and hasattr(system, "jacobian_values"):
        try:
            return _ChainSolver(system, atol, float(rtol))
        except ValueError:
            pass
    return _StepSolver(system, atol, float(rtol))


def _hits(times: np.ndarray, start: float, end: float) -> np.ndarray:
    stops = np.unique(np.concatenate((times[(times > start) & (times < end)], [end])))
    return stops


def _quantised(h: float, unit: float) -> float:
    """h rounded down to ``unit`` times a power of two: step lengths repeat, and so do the
    factorisations of a linear system."""
    return unit * 2.0 ** np.floor(np.log2(h / unit) + 1e-9)


def _rows(system: Any) -> Any:
    """The pieces of copies of ``system`` from their states as rows (row b: block b's), or
    None when the system has no pieces."""
    rows = getattr(system, "pieces_of_copies", None)
    if rows is None and getattr(system, "pieces", None) is not None:
        def rows(states: np.ndarray) -> np.ndarray:
            return np.array([system.pieces(state) for state in states])
    return rows


def integrate(system: Any, y0: np.ndarray, start: float, end: float, times: np.ndarray,
              atol: np.ndarray, rtol: float, first_step: float | None = None) -> ImplicitResult:
    """Error-controlled implicit Euler from ``start`` to ``end`` landing on ``times``, with
    the whole-step path alongside; ``atol`` (per state) and ``rtol`` weigh the step-doubling
    error estimate."""
    solver = _solver(system, atol, rtol)
    # the states whose piece changes within a step (with their neighbours), where the system
    # tells them: their error weight is loosened to ``SWITCH_TOLERANCE``
    switched = getattr(system, "switched_states", None)
    y0 = np.asarray(y0, dtype=float)
    ts = [start]
    states = [y0.copy()]
    coarse_states = [y0.copy()]
    if end <= start:
        return ImplicitResult(np.array(ts), np.array(states).T, np.array(coarse_states).T,
                              True, "no time to integrate", solver.counts)
    stops = _hits(np.asarray(times, dtype=float), start, end)
    span = end - start
    h = first_step if first_step is not None else min(span, float(stops[0] - start)) * 1e-4
    h = max(h, span * 1e-14)
    unit = h
    t, y, y_coarse = start, y0.copy(), y0.copy()
    stop_index = 0
    rejected = 0
    message = "reached the end"
    success = True
    while t < end:
        if len(ts) > MAX_STEPS:
            success, message = False, f"more than {MAX_STEPS} steps"
            break
        target = float(stops[stop_index])
        h_try = min(h, target - t)
        lands = h_try >= target - t - 1e-12 * max(abs(target), span)
        if lands:
            h_try = target - t
        pair = _double_step(solver, t, y, h_try)
        if pair is None:
            h = 0.25 * h_try
            rejected += 1
            if h < span * 1e-14:
                success, message = False, f"Newton failed to converge at t = {t:.6g} s"
                break
            continue
        double, whole = pair
        m_new = _content(system, double)
        weight = solver.atol + solver.rtol * np.maximum(np.abs(m_new),
                                                        np.abs(_content(system, y)))
        if switched is not None:
            moved = switched(y, double) | switched(y, whole)
            if moved.any():
                weight[moved] = np.maximum(weight[moved], SWITCH_TOLERANCE * system.switch_scale)
        error = float(np.sqrt(np.mean(((m_new - _content(system, whole)) / weight) ** 2)))
        if error > 1.0:
            h = _quantised(h_try * max(GROWTH_MIN, SAFETY / np.sqrt(error)), unit)
            rejected += 1
            if h < span * 1e-14:
                success, message = False, f"step size underflow at t = {t:.6g} s"
                break
            continue
        coarse_next = solver.step(t, y_coarse, h_try)
        if coarse_next is None:
            h = 0.25 * h_try
            rejected += 1
            continue
        t = target if lands else t + h_try
        y, y_coarse = double, coarse_next
        ts.append(t)
        states.append(y.copy())
        coarse_states.append(y_coarse.copy())
        if lands:
            stop_index += 1
        growth = GROWTH_MAX if error == 0.0 else min(GROWTH_MAX, SAFETY / np.sqrt(error))
        h = _quantised(max(h_try, h) * max(GROWTH_MIN, growth), unit)
    counts = dict(solver.counts)
    counts["steps"] = len(ts) - 1
    counts["rejected_steps"] = rejected
    return ImplicitResult(np.array(ts), np.array(states).T, np.array(coarse_states).T, success,
                          message, counts)


def _double_step(solver: _StepSolver, t: float, y: np.ndarray, h: float
                 ) -> tuple[np.ndarray, np.ndarray] | None:
    """Two half steps and one whole step of implicit Euler from (t, y), or None."""
    whole = solver.step(t, y, h)
    if whole is None:
        return None
    half = solver.step(t, y, 0.5 * h)
    if half is None:
        return None
    double = solver.step(t + 0.5 * h, half, 0.5 * h)
    return None if double is None else (double, whole)


def path(system: Any, y0: np.ndarray, ts: np.ndarray, parts: int, atol: np.ndarray,
         rtol: float) -> tuple[np.ndarray, bool]:
    """Implicit Euler on the step times ``ts`` with every step cut into ``parts`` equal steps
    (no error control; Newton to the tolerance of ``atol``/``rtol``): the states at ``ts``
    (columns) and whether every step converged."""
    solver = _solver(system, atol, rtol)
    y = np.asarray(y0, dtype=float).copy()
    states = np.full((y.size, ts.size), np.nan)
    states[:, 0] = y
    for k in range(1, ts.size):
        h = (ts[k] - ts[k - 1]) / parts
        for i in range(parts):
            found = solver.step(ts[k - 1] + i * h, y, h)
            if found is None:
                return states, False
            y = found
        states[:, k] = y
    return states, True


def paths(system: Any, copies: Any, y0: np.ndarray, ts: np.ndarray, parts: tuple[int, ...],
          atol: np.ndarray, rtol: float) -> dict[int, tuple[np.ndarray, bool]]:
    """:func:`path` for every count of ``parts`` (powers of two), the paths stepped together:
    ``copies(k)`` is the system of k copies of ``system`` laid end to end (a block each); in
    each of the finest path's steps every path whose step ends at a multiple of its own length
    takes it, the paths still stepping being the leading copies (most parts first). Each path's
    states are those :func:`path` gives it alone. Without a tridiagonal chain, :func:`path`
    for each."""
    order = sorted(parts, reverse=True)
    single = _solver(system, atol, rtol)
    finest = order[0]
    if not isinstance(single, _ChainSolver) or any(finest % p for p in order):
        return {p: path(system, y0, ts, p, atol, rtol) for p in order}
    y0 = np.asarray(y0, dtype=float)
    size = y0.size
    solvers = {k: single if k == 1 else _solver(copies(k), np.tile(atol, k), rtol)
               for k in range(1, len(order) + 1)}
    if not all(isinstance(solver, _ChainSolver) for solver in solvers.values()):
        return {p: path(system, y0, ts, p, atol, rtol) for p in order}
    pieces = _rows(system)
    y = np.tile(y0, len(order))
    states = np.full((len(order), size, ts.size), np.nan)
    states[:, :, 0] = y0
    # the paths stepping in each of the finest path's steps, and each path's parts
    counts = [sum(1 for p in order if i % (finest // p) == 0) for i in range(finest)]
    per_state = np.repeat(np.array(order, dtype=float), size)
    for k in range(1, ts.size):
        span = ts[k] - ts[k - 1]
        finest_length = span / finest
        lengths = span / per_state  # each state's step in this step of ``ts``
        for i in range(finest):
            count = counts[i]
            solver = solvers[count]
            if count == 1:
                found = solver.step(ts[k - 1] + i * finest_length, y[:size], finest_length)
            else:
                assert isinstance(solver, _ChainSolver)
                found = solver.step_blocks(y[:count * size], lengths[:count * size], count,
                                           pieces)
            if found is None:
                return {p: (states[j], False) for j, p in enumerate(order)}
            y[:count * size] = found
        states[:, :, k] = y.reshape(len(order), size)
    return {p: (states[j], True) for j, p in enumerate(order)}
