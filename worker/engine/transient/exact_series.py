"""Exact eigenfunction series for transient diffusion in one homogeneous layer.

The case is a single layer (plane sheet, solid or hollow cylinder, solid or hollow sphere) with a
uniform initial concentration C0, constant boundary data of any kind at each face
(concentration, flux, mass transfer, symmetry) and no reaction or first-order consumption
``R = k C``. The field is split into the steady state and a decaying part,

    C(r, t) = C_ss(r) + sum_n a_n phi_n(r) exp(-(D lambda_n^2 + k) t),

where ``(1/r^n)(r^n phi')' = -lambda^2 phi`` with the homogeneous form of the boundary
conditions, and ``a_n = <C0 - C_ss, phi_n> / <phi_n, phi_n>`` in the weight ``r^n``. Every
integral that the released amounts, the remaining amount and the projections need is reduced
to face values by Green's identity, so the series is closed-form term by term:

* ``int r^n phi dr = -[r^n phi']_a^b / lambda^2``,
* ``int r^n C_ss phi dr = -[r^n (C_ss phi' - phi C_ss')]_a^b / (lambda^2 + k/D)``,
* norms: ``int_0^L (A cos + B sin)^2`` (sheet; sphere after ``phi = g/r``) and Lommel's
  ``int r Z0(lambda r)^2 dr = (r^2/2)(Z0^2 + Z1^2)`` (cylinder).

With zero boundary data and first-order consumption this is Danckwerts' transformation
``C = exp(-k t) u`` with ``u`` the solution without reaction (C_ss = 0, rates shifted by k); with
non-zero constant boundary data the steady reaction-diffusion state is superposed instead,
which Danckwerts' transformation does not cover directly. Zero-order and Michaelis-Menten
kinetics, several layers, and bodies with no Dirichlet or Robin face have no series here
(``solve_transient_exact`` returns None); the finite-volume solver covers them.

The number of terms is chosen from a bound on the tail of the face-flux series at the smallest
positive requested time (eigenvalue spacing about pi/L, Sturm-Liouville asymptotics; a
spacing of pi/(2L) is assumed for safety). Where that would need more than ``MAX_TERMS``
terms, Crank's short-time erfc forms give the release fraction of the standard sink cases.

Amounts are r^n-weighted and multiplied by the measure factor (1, 2 pi, 4 pi): per m^2 of a
slab, per m of a cylinder, total for a sphere.

References
----------
J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford, 1975: eq. 4.18 and 4.20 (sheet),
section 4.3.5 (surface film), section 4.3 (membrane, time lag), eq. 5.23-5.24 (cylinder),
eq. 6.20-6.21 (sphere), ch. 8 (first-order reaction, Danckwerts' transformation).
H.S. Carslaw, J.C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford, 1959, ch. 3, 7, 9
(hollow cylinder, Bessel cross products).
P.V. Danckwerts, "Absorption by simultaneous diffusion and chemical reaction into particles of
various shapes and into falling drops", Trans. Faraday Soc. 47 (1951) 1014-1023.
H.A. Daynes, Proc. R. Soc. A 97 (1920) 286; R.M. Barrer, Trans. Faraday Soc. 35 (1939) 628.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike
from scipy import special

from worker.engine.model import Boundary, Problem
from worker.engine.transient.eigen_roots import scanned_roots
from worker.engine.transient.solution import TransientSolution

#: Target bound on the truncated tail of the face-flux series, relative to its largest term.
SERIES_TOLERANCE = 1e-12
#: Most eigenvalues used; beyond this the short-time forms take over where they exist.
MAX_TERMS = 5000
#: Fewest eigenvalues used (so even late times have a well-resolved series).
MIN_TERMS = 40

METHOD_NAME = "eigenfunction series (single layer, steady state + decaying modes)"
METHOD_REFERENCE = (
    "J. Crank, The Mathematics of Diffusion, 2nd ed., Oxford, 1975, ch. 4-6 and 8 (eqs. 4.18, "
    "5.23, 6.20, section 4.3.5); H.S. Carslaw, J.C. Jaeger, Conduction of Heat in Solids, "
    "2nd ed., 1959; P.V. Danckwerts, Trans. Faraday Soc. 47 (1951) 1014"
)


@dataclass
class TransientSeriesSolution(TransientSolution):
    """Series solution evaluated at the requested times (amounts and fluxes: see
    :class:`~worker.engine.transient.solution.TransientSolution`).

    ``concentration_at(r, t)`` returns an array (len(t), len(r)) in amount/m^3;
    ``amounts_at(t)`` returns (remaining, released_inner, released_outer, consumed) at any
    times t no smaller than the smallest positive requested time (the terms were chosen for it).
    ``tail_bound`` is, per time, the bound on the truncated flux tail relative to the largest
    flux term; ``converged`` marks the times where it is within ``SERIES_TOLERANCE`` (t = 0 is
    exact by definition). ``time_lag`` is the late-time intercept of ``released_outer`` for a
    body without reaction whose outer face reaches a steady outward flux, else None.
    """

    terms: int
    tail_bound: np.ndarray
    converged: np.ndarray
    release_converged: np.ndarray
    steady_flux_inner: float
    steady_flux_outer: float
    time_lag: float | None
    concentration_at: Callable[[ArrayLike, ArrayLike], np.ndarray]
    amounts_at: Callable[[np.ndarray], tuple]
    notes: list[str] = field(default_factory=list)


# --------------------------------------------------------------------------------------------
# Boundary rows: alpha * f(face) + beta * f'(face) = gamma
# --------------------------------------------------------------------------------------------


def _face_row(boundary: Boundary, side: str, diffusivity: float, face_partition: float):
    """Boundary condition at one face as (alpha, beta, gamma), flux rows divided by D."""
    outward = 1.0 if side == "outer" else -1.0
    return boundary.condition.eigen_row(boundary, outward, diffusivity, face_partition)


def _row_value(row, value, derivative):
    alpha, beta, _ = row
    return alpha * value + beta * derivative


# --------------------------------------------------------------------------------------------
# Bases: eigenfunctions u1, u2 (with r-derivatives) and steady solutions v1, v2
# --------------------------------------------------------------------------------------------


class _Body:
    """Geometry of one layer: inner a, outer b, exponent n, solid centre or not."""

    def __init__(self, problem: Problem):
        self.n = problem.exponent
        self.a = float(problem.inner)
        self.b = float(problem.outer)
        self.length = self.b - self.a
        self.solid = problem.solid_centre

    def weight(self, r):
        return np.asarray(r, dtype=float) ** self.n

    # eigen basis ---------------------------------------------------------------------------
    def eigen_basis(self, lam, r):
        """(u1, du1, u2, du2) at r for eigenvalues lam (broadcast); u2 is None when solid."""
        lam = np.asarray(lam, dtype=float)
        r = np.asarray(r, dtype=float)
        if self.n == 0:
            s = r - self.a
            return np.cos(lam * s), -lam * np.sin(lam * s), np.sin(lam * s), lam * np.cos(lam * s)
        if self.n == 1:
            z = lam * r
            u1, du1 = special.j0(z), -lam * special.j1(z)
            if self.solid:
                return u1, du1, None, None
            return u1, du1, special.y0(z), -lam * special.y1(z)
        if self.solid:
            # sin(lam r)/r, regular at the centre (value lam there)
            z = lam * r
            safe_r = np.where(r > 0.0, r, 1.0)
            value = lam * np.sinc(z / np.pi)
            derivative = np.where(
                r > 0.0, (lam * np.cos(z) - np.sin(z) / safe_r) / safe_r, 0.0 * z
            )
            return value, derivative, None, None
        s = r - self.a
        c, sn = np.cos(lam * s), np.sin(lam * s)
        return c / r, (-lam * sn) / r - c / r**2, sn / r, (lam * c) / r - sn / r**2

    def characteristic(self, rows, lam):
        """Determinant whose zeros are the eigenvalues (no poles)."""
        u1a, du1a, u2a, du2a = self.eigen_basis(lam, self.a)
        u1b, du1b, u2b, du2b = self.eigen_basis(lam, self.b)
        if self.solid:
            return _row_value(rows[1], u1b, du1b)
        return _row_value(rows[0], u1a, du1a) * _row_value(rows[1], u2b, du2b) - _row_value(
            rows[0], u2a, du2a
        ) * _row_value(rows[1], u1b, du1b)

    def mode_coefficients(self, rows, lam):
        """(A, B) with phi = A u1 + B u2 satisfying both homogeneous rows, A^2 + B^2 = 1."""
        if self.solid:
            return np.ones_like(lam), np.zeros_like(lam)
        u1a, du1a, u2a, du2a = self.eigen_basis(lam, self.a)
        u1b, du1b, u2b, du2b = self.eigen_basis(lam, self.b)
        pa, qa = _row_value(rows[0], u1a, du1a), _row_value(rows[0], u2a, du2a)
        pb, qb = _row_value(rows[1], u1b, du1b), _row_value(rows[1], u2b, du2b)
        use_a = np.hypot(pa, qa) >= np.hypot(pb, qb)
        coef_a = np.where(use_a, qa, qb)
        coef_b = np.where(use_a, -pa, -pb)
        norm = np.hypot(coef_a, coef_b)
        return coef_a / norm, coef_b / norm

    def mode(self, lam, coef_a, coef_b, r):
        """phi and phi' at r, shape broadcast of (modes, positions)."""
        u1, du1, u2, du2 = self.eigen_basis(lam, r)
        if u2 is None:
            return coef_a * u1, coef_a * du1
        return coef_a * u1 + coef_b * u2, coef_a * du1 + coef_b * du2

    def mode_norm(self, lam, coef_a, coef_b):
        """int_a^b r^n phi^2 dr, closed form."""
        if self.n == 1:
            def lommel(r):
                z = lam * r
                z0 = coef_a * special.j0(z) + (0.0 if self.solid else coef_b * special.y0(z))
                z1 = coef_a * special.j1(z) + (0.0 if self.solid else coef_b * special.y1(z))
                return 0.5 * r**2 * (z0**2 + z1**2)

            return lommel(self.b) - (0.0 if self.solid else lommel(self.a))
        # sheet, and sphere written as g/r with g = A cos(lam s) + B sin(lam s)
        if self.n == 2 and self.solid:
            g_a, g_b = 0.0, coef_a  # phi = sin(lam r)/r: g = sin(lam r)
        else:
            g_a, g_b = coef_a, coef_b
        span = self.length
        two = 2.0 * lam * span
        return (
            g_a**2 * (0.5 * span + np.sin(two) / (4.0 * lam))
            + g_b**2 * (0.5 * span - np.sin(two) / (4.0 * lam))
            + g_a * g_b * np.sin(lam * span) ** 2 / lam
        )

    # steady basis -------------------------------------------------------------------------
    def steady_basis(self, m, r):
        """(v1, dv1, v2, dv2) of (1/r^n)(r^n v')' = m^2 v; v2 None when solid."""
        r = np.asarray(r, dtype=float)
        a, b = self.a, self.b
        if m == 0.0:
            one, zero = np.ones_like(r), np.zeros_like(r)
            if self.solid:
                return one, zero, None, None
            if self.n == 0:
                return one, zero, r - a, one
            if self.n == 1:
                return one, zero, np.log(r / a), 1.0 / r
            return one, zero, 1.0 / r, -1.0 / r**2
        if self.n == 0:
            v1, v2 = np.exp(m * (r - b)), np.exp(-m * (r - a))
            return v1, m * v1, v2, -m * v2
        if self.n == 1:
            grow = np.exp(m * (r - b))
            v1, dv1 = special.ive(0, m * r) * grow, m * special.ive(1, m * r) * grow
            if self.solid:
                return v1, dv1, None, None
            decay = np.exp(-m * (r - a))
            return v1, dv1, special.kve(0, m * r) * decay, -m * special.kve(1, m * r) * decay
        if self.solid:
            # 2 e^{-mb} sinh(m r)/r, regular at the centre
            safe_r = np.where(r > 0.0, r, 1.0)
            s_val = np.exp(m * (r - b)) - np.exp(-m * (r + b))
            s_der = m * (np.exp(m * (r - b)) + np.exp(-m * (r + b)))
            v1 = np.where(r > 0.0, s_val / safe_r, 2.0 * m * np.exp(-m * b))
            dv1 = np.where(r > 0.0, s_der / safe_r - s_val / safe_r**2, 0.0)
            return v1, dv1, None, None
        grow, decay = np.exp(m * (r - b)), np.exp(-m * (r - a))
        return grow / r, m * grow / r - grow / r**2, decay / r, -m * decay / r - decay / r**2

    def steady_integral(self, m, coef_p, coef_q, value_and_slope):
        """int_a^b r^n C_ss dr for C_ss = P v1 + Q v2."""
        if m > 0.0:
            (_, slope_a), (_, slope_b) = value_and_slope(self.a), value_and_slope(self.b)
            lower = 0.0 if self.solid else self.weight(self.a) * slope_a
            return (self.weight(self.b) * slope_b - lower) / m**2
        a, b = self.a, self.b
        if self.n == 0:
            return coef_p * (b - a) + coef_q * (b - a) ** 2 / 2.0
        if self.n == 1:
            if self.solid:
                return coef_p * b**2 / 2.0

            def antiderivative(r):
                return r**2 * np.log(r / a) / 2.0 - r**2 / 4.0

            return coef_p * (b**2 - a**2) / 2.0 + coef_q * (antiderivative(b) - antiderivative(a))
        if self.solid:
            return coef_p * b**3 / 3.0
        return coef_p * (b**3 - a**3) / 3.0 + coef_q * (b**2 - a**2) / 2.0

    def volume(self):
        """int_a^b r^n dr."""
        return (self.b ** (self.n + 1) - self.a ** (self.n + 1)) / (self.n + 1)


#: Why the linear exact routes refuse a case whose dissolved solute can reach a solubility.
SATURATION_REASON = ("a layer's dissolved solute can reach its solubility (undissolved solute "
                     "makes the equations nonlinear)")


def series_unsupported_reason(problem: Problem) -> str | None:
    """Why no exact series exists for the problem here, or None when it does."""
    if len(problem.layers) != 1:
        return "more than one layer"
    for side, boundary in (("inner", problem.inner_boundary), ("outer", problem.outer_boundary)):
        if boundary.condition.finite_volume:
            return (f"{side}_boundary is a compartment (its level changes in time: the "
                    "eigenvalue problem is not of this form)")
    layer = problem.layers[0]
    if not layer.reaction.law.is_linear:
        return f"{layer.reaction.kind} kinetics are nonlinear"
    if problem.can_saturate:
        return SATURATION_REASON
    anchored = [
        b.condition.fixes_level(b) for b in (problem.inner_boundary, problem.outer_boundary)
    ]
    if not any(anchored):
        return "no concentration or mass-transfer face (no decaying steady approach in this form)"
    if layer.diffusivity <= 0.0 or problem.total_thickness <= 0.0:
        return "non-positive diffusivity or thickness"
    return None


def solve_transient_exact(problem: Problem, times=None) -> TransientSeriesSolution | None:
    """Evaluate the exact series at the requested times, or return None where none applies.

    Parameters
    ----------
    problem : Problem
        Normalised case (SI). Only single-layer cases without or with first-order reaction and
        at least one concentration or mass-transfer face have a series here.
    times : array_like, optional
        Times in s (>= 0); default ``problem.regime.times``.

    Returns
    -------
    TransientSeriesSolution or None
    """
    if series_unsupported_reason(problem) is not None:
        return None
    times = np.asarray(problem.regime.times if times is None else times, dtype=float)
    if times.ndim != 1 or times.size == 0 or np.any(times < 0.0) or not np.all(np.isfinite(times)):
        raise ValueError(f"times must be a non-empty list of finite values >= 0 s, got {times!r}")
    layer = problem.layers[0]
    diffusivity = layer.diffusivity
    rate_constant = layer.reaction.linear_rate_constant or 0.0
    m = float(np.sqrt(rate_constant / diffusivity))
    body = _Body(problem)
    rows = (
        _face_row(problem.inner_boundary, "inner", diffusivity, problem.face_partition("inner")),
        _face_row(problem.outer_boundary, "outer", diffusivity, problem.face_partition("outer")),
    )

    steady_value, steady_slope, coef_p, coef_q = _steady_state(body, rows, m)
    initial = float(layer.initial)

    positive = times[times > 0.0]
    t_min = float(positive.min()) if positive.size else float(body.length**2 / diffusivity)
    spacing = np.pi / body.length
    lam_needed = np.sqrt(np.log(1.0 / SERIES_TOLERANCE) / (diffusivity * t_min))
    for _ in range(3):  # include the geometric-sum factor of the tail bound (fixed point)
        ratio = -np.expm1(-np.pi * diffusivity * lam_needed * t_min / body.length)
        lam_needed = np.sqrt(np.log(1.0 / (SERIES_TOLERANCE * ratio)) / (diffusivity * t_min))
    lam_needed += 4.0 * spacing
    lam_upper = min(max(lam_needed, (MIN_TERMS + 0.5) * spacing), (MAX_TERMS + 0.5) * spacing)
    lam = scanned_roots(lambda x: body.characteristic(rows, x), lam_upper, spacing)
    lam = lam[lam > 1e-9 * spacing][:MAX_TERMS]
    coef_a, coef_b = body.mode_coefficients(rows, lam)
    norm = body.mode_norm(lam, coef_a, coef_b)

    phi_a, dphi_a = body.mode(lam, coef_a, coef_b, body.a)
    phi_b, dphi_b = body.mode(lam, coef_a, coef_b, body.b)
    w_a = 0.0 if body.solid else body.weight(body.a)
    w_b = body.weight(body.b)
    mode_integral = -(w_b * dphi_b - w_a * dphi_a) / lam**2
    css_a, dcss_a = steady_value(body.a), steady_slope(body.a)
    css_b, dcss_b = steady_value(body.b), steady_slope(body.b)
    steady_projection = -(
        w_b * (css_b * dphi_b - phi_b * dcss_b) - w_a * (css_a * dphi_a - phi_a * dcss_a)
    ) / (lam**2 + m**2)
    amplitude = (initial * mode_integral - steady_projection) / norm
    decay_rate = diffusivity * lam**2 + rate_constant

    measure = problem.measure_factor
    flux_term_a = -diffusivity * amplitude * dphi_a
    flux_term_b = -diffusivity * amplitude * dphi_b
    steady_flux_a, steady_flux_b = -diffusivity * dcss_a, -diffusivity * dcss_b
    steady_amount = body.steady_integral(
        m, coef_p, coef_q, lambda r: (steady_value(r), steady_slope(r))
    )

    slope_w_a, slope_w_b, integral_w = _excess_integral(
        body, rows, m, diffusivity, initial, coef_p, coef_q, steady_value, steady_slope,
        steady_amount,
    )
    excess_a, excess_b = -diffusivity * slope_w_a, -diffusivity * slope_w_b

    initial_load = measure * initial * body.volume()

    def amounts_at(t):
        """(remaining, released_inner, released_outer, consumed) at times t (s), per measure."""
        t = np.atleast_1d(np.asarray(t, dtype=float))
        decay = np.exp(-np.outer(decay_rate, t))  # (modes, times)
        pending = decay / decay_rate[:, None]
        held = measure * (steady_amount + (amplitude * mode_integral) @ decay)
        out_b = measure * w_b * (steady_flux_b * t + excess_b - flux_term_b @ pending)
        out_a = -measure * w_a * (steady_flux_a * t + excess_a - flux_term_a @ pending)
        used = measure * rate_constant * (
            steady_amount * t + integral_w - (amplitude * mode_integral) @ pending
        )
        start = t == 0.0
        held[start] = initial_load
        out_a[start] = out_b[start] = used[start] = 0.0
        return held, out_a, out_b, used

    remaining, released_inner, released_outer, consumed = amounts_at(times)
    decay = np.exp(-np.outer(decay_rate, times))
    flux_outer = steady_flux_b + flux_term_b @ decay
    flux_inner = steady_flux_a + flux_term_a @ decay
    at_start = times == 0.0
    flux_outer[at_start] = np.nan
    flux_inner[at_start] = np.nan

    lam_last = lam[-1] if lam.size else spacing
    safe_t = np.where(times > 0.0, times, 1.0)
    tail = np.exp(-diffusivity * lam_last**2 * safe_t) / (
        -np.expm1(-np.pi * diffusivity * lam_last * safe_t / body.length)
    )
    tail = np.where(times > 0.0, tail, 0.0) * np.exp(-rate_constant * times)
    converged = tail <= SERIES_TOLERANCE * 10.0
    release_converged = converged.copy()
    notes = [f"{lam.size} eigenvalues, largest lambda*L = {lam_last * body.length:.4g}"]

    short = short_time_release_fraction(problem, times)
    if short is not None and initial_load > 0.0:
        replace = (~converged) & np.isfinite(short)
        if np.any(replace):
            released = short[replace] * initial_load
            remaining[replace] = initial_load - released
            share_outer = _outer_share(problem)
            released_outer[replace] = share_outer * released
            released_inner[replace] = (1.0 - share_outer) * released
            notes.append(
                f"short-time erfc form used at {int(np.sum(replace))} time(s) (Crank 1975)"
            )
            release_converged = release_converged | replace

    time_lag = None
    if rate_constant == 0.0 and abs(steady_flux_b) > 0.0:
        time_lag = float(-excess_b / steady_flux_b)

    def concentration_at(r, t):
        r = np.atleast_1d(np.asarray(r, dtype=float))
        t = np.atleast_1d(np.asarray(t, dtype=float))
        phi, _ = body.mode(lam[:, None], coef_a[:, None], coef_b[:, None], r[None, :])
        decay_t = np.exp(-np.outer(t, decay_rate))  # (times, modes)
        field_values = steady_value(r)[None, :] + decay_t @ (amplitude[:, None] * phi)
        field_values[t == 0.0, :] = initial
        return field_values

    return TransientSeriesSolution(
        method=METHOD_NAME,
        reference=METHOD_REFERENCE,
        times=times,
        remaining=remaining,
        released_inner=released_inner,
        released_outer=released_outer,
        consumed=consumed,
        flux_inner=flux_inner,
        flux_outer=flux_outer,
        initial_load=float(initial_load),
        terms=int(lam.size),
        tail_bound=tail,
        converged=converged,
        release_converged=release_converged,
        steady_flux_inner=float(steady_flux_a),
        steady_flux_outer=float(steady_flux_b),
        time_lag=time_lag,
        concentration_at=concentration_at,
        amounts_at=amounts_at,
        notes=notes,
    )


def _steady_state(body: _Body, rows, m: float):
    """Steady C_ss = P v1 + Q v2 meeting both (inhomogeneous) rows."""
    v1a, dv1a, v2a, dv2a = body.steady_basis(m, np.array(body.a))
    v1b, dv1b, v2b, dv2b = body.steady_basis(m, np.array(body.b))
    if body.solid:
        coef_p = rows[1][2] / float(_row_value(rows[1], v1b, dv1b))
        coef_q = 0.0
    else:
        matrix = np.array(
            [
                [_row_value(rows[0], v1a, dv1a), _row_value(rows[0], v2a, dv2a)],
                [_row_value(rows[1], v1b, dv1b), _row_value(rows[1], v2b, dv2b)],
            ],
            dtype=float,
        )
        coef_p, coef_q = np.linalg.solve(matrix, np.array([rows[0][2], rows[1][2]]))

    def value(r):
        v1, _, v2, _ = body.steady_basis(m, np.asarray(r, dtype=float))
        return coef_p * v1 + (0.0 if v2 is None else coef_q * v2)

    def slope(r):
        _, dv1, _, dv2 = body.steady_basis(m, np.asarray(r, dtype=float))
        return coef_p * dv1 + (0.0 if dv2 is None else coef_q * dv2)

    return value, slope, float(coef_p), float(coef_q)


def _excess_integral(body, rows, m, diffusivity, initial, coef_p, coef_q, value, slope, amount):
    """W'(a), W'(b) and int r^n W dr of W = int_0^inf (C - C_ss) dt.

    W solves ``D (1/r^n)(r^n W')' - k W = C_ss - C0`` with the homogeneous boundary rows, so the
    time-integrated excess outward flux at a face is ``-D W'`` in closed form; this gives the
    slowly converging part of the cumulative-release series exactly, leaving only exponentially
    decaying terms. Particular solutions: k > 0, ``W_p = r C_ss'/(2k) + C0/k`` (derivative of
    the steady basis with respect to m); k = 0, polynomial/logarithmic integrals.
    """
    n, a = body.n, body.a
    rate_constant = diffusivity * m**2

    def particular(r):
        r = np.asarray(r, dtype=float)
        if m > 0.0:
            c_val, c_der = value(r), slope(r)
            w_val = r * c_der / (2.0 * rate_constant) + initial / rate_constant
            w_der = ((1 - n) * c_der + r * m**2 * c_val) / (2.0 * rate_constant)
            return w_val, w_der
        shift = coef_p - initial
        if n == 0:
            s = r - a
            return (
                (shift * s**2 / 2.0 + coef_q * s**3 / 6.0) / diffusivity,
                (shift * s + coef_q * s**2 / 2.0) / diffusivity,
            )
        w_val = shift * r**2 / (2.0 * (n + 1))
        w_der = shift * r / (n + 1)
        if not body.solid:
            if n == 1:
                w_val = w_val + coef_q * (r**2 * np.log(r / a) - r**2) / 4.0
                w_der = w_der + coef_q * (2.0 * r * np.log(r / a) - r) / 4.0
            else:
                w_val = w_val + coef_q * r / 2.0
                w_der = w_der + coef_q / 2.0
        return w_val / diffusivity, w_der / diffusivity

    wpa, dwpa = particular(body.a)
    wpb, dwpb = particular(body.b)
    v1a, dv1a, v2a, dv2a = body.steady_basis(m, np.array(body.a))
    v1b, dv1b, v2b, dv2b = body.steady_basis(m, np.array(body.b))
    rhs_b = -_row_value(rows[1], wpb, dwpb)
    if body.solid:
        hom_p = float(rhs_b / _row_value(rows[1], v1b, dv1b))
        hom_q = 0.0
    else:
        rhs_a = -_row_value(rows[0], wpa, dwpa)
        matrix = np.array(
            [
                [_row_value(rows[0], v1a, dv1a), _row_value(rows[0], v2a, dv2a)],
                [_row_value(rows[1], v1b, dv1b), _row_value(rows[1], v2b, dv2b)],
            ],
            dtype=float,
        )
        hom_p, hom_q = np.linalg.solve(matrix, np.array([rhs_a, rhs_b], dtype=float))
    slope_a = float(dwpa + hom_p * dv1a + (0.0 if body.solid else hom_q * dv2a))
    slope_b = float(dwpb + hom_p * dv1b + (0.0 if body.solid else hom_q * dv2b))
    if m > 0.0:
        w_a = 0.0 if body.solid else body.weight(body.a)
        flux_sum = body.weight(body.b) * slope_b - w_a * slope_a
        integral = (diffusivity * flux_sum - amount + initial * body.volume()) / rate_constant
    else:
        integral = 0.0  # no consumption term uses it without reaction
    return slope_a, slope_b, float(integral)


# --------------------------------------------------------------------------------------------
# Short-time forms (Crank 1975) for release into a perfect sink
# --------------------------------------------------------------------------------------------


def _ierfc(x):
    """First repeated integral of erfc: exp(-x^2)/sqrt(pi) - x erfc(x)."""
    return np.exp(-(x**2)) / np.sqrt(np.pi) - x * special.erfc(x)


def _sink_geometry(problem: Problem) -> tuple[str, float] | None:
    """('sheet', l) / ('cylinder', a) / ('sphere', a) for uniform release into a perfect sink."""
    if len(problem.layers) != 1 or problem.layers[0].reaction.law.reacts:
        return None
    kinds = [problem.inner_boundary, problem.outer_boundary]

    def sink(b: Boundary) -> bool:
        return b.condition.is_perfect_sink(b)

    def sealed(b: Boundary) -> bool:
        return b.condition.is_sealed(b)

    if problem.geometry == "slab":
        if sink(kinds[0]) and sink(kinds[1]):
            return "sheet", 0.5 * problem.total_thickness
        if (sink(kinds[0]) and sealed(kinds[1])) or (sealed(kinds[0]) and sink(kinds[1])):
            return "sheet", problem.total_thickness
        return None
    if problem.solid_centre and sink(kinds[1]):
        return problem.geometry, problem.outer
    return None


def _outer_share(problem: Problem) -> float:
    """Fraction of the release leaving through the outer face in a symmetric sink case."""
    inner, outer = problem.inner_boundary, problem.outer_boundary
    if problem.geometry != "slab":
        return 1.0
    inner_sink = inner.condition.is_perfect_sink(inner)
    outer_sink = outer.condition.is_perfect_sink(outer)
    if inner_sink and outer_sink:
        return 0.5
    return 1.0 if outer_sink else 0.0


def short_time_release_fraction(problem: Problem, times) -> np.ndarray | None:
    """M_t/M_inf from Crank's short-time forms, for release into a perfect sink.

    Sheet of half-thickness l (or a sealed-back layer of thickness l), Crank 1975 eq. 4.20:
    ``2 (Dt/l^2)^(1/2) [pi^(-1/2) + 2 sum_n (-1)^n ierfc(n l / sqrt(Dt))]``;
    solid sphere of radius a, eq. 6.21:
    ``6 (Dt/a^2)^(1/2) [pi^(-1/2) + 2 sum_n ierfc(n a / sqrt(Dt))] - 3 Dt/a^2``;
    solid cylinder, eq. 5.24 (first three terms, from memory):
    ``4/sqrt(pi) (Dt/a^2)^(1/2) - Dt/a^2 - 1/(3 sqrt(pi)) (Dt/a^2)^(3/2)``.

    Returns None where the case is not one of these; NaN at times where the short form is not
    accurate (Dt/l^2 above ``SHORT_TIME_LIMIT``).
    """
    found = _sink_geometry(problem)
    if found is None or problem.layers[0].initial <= 0.0:
        return None
    kind, size = found
    times = np.asarray(times, dtype=float)
    tau = problem.layers[0].diffusivity * times / size**2
    root = np.sqrt(tau)
    orders = np.arange(1, 60)[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        if kind == "sheet":
            terms = (-1.0) ** orders * _ierfc(orders / np.where(root > 0, root, 1.0))
            fraction = 2.0 * root * (1.0 / np.sqrt(np.pi) + 2.0 * terms.sum(axis=0))
        elif kind == "sphere":
            terms = _ierfc(orders / np.where(root > 0, root, 1.0))
            fraction = 6.0 * root * (1.0 / np.sqrt(np.pi) + 2.0 * terms.sum(axis=0)) - 3.0 * tau
        else:
            fraction = 4.0 / np.sqrt(np.pi) * root - tau - tau**1.5 / (3.0 * np.sqrt(np.pi))
    limit = SHORT_TIME_LIMIT[kind]
    return np.where(tau <= limit, np.where(times > 0.0, fraction, 0.0), np.nan)


#: Dimensionless time Dt/size^2 up to which each short-time form is used (the cylinder form is
#: truncated; its neglected terms are O(tau^2), below 1e-12 for tau <= 1e-6).
SHORT_TIME_LIMIT = {"sheet": 0.1, "sphere": 0.1, "cylinder": 1e-6}


# --------------------------------------------------------------------------------------------
# Membrane permeation (Daynes 1920, Barrer 1939)
# --------------------------------------------------------------------------------------------


def membrane_time_lag(diffusivity: float, thickness: float) -> float:
    """Time lag L^2/(6D) in s of an initially empty membrane, thickness L (m), D (m^2/s).

    References
    ----------
    H.A. Daynes, Proc. R. Soc. A 97 (1920) 286; R.M. Barrer, Trans. Faraday Soc. 35 (1939) 628;
    J. Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, section 4.3.
    """
    if diffusivity <= 0.0 or thickness <= 0.0:
        raise ValueError(
            f"diffusivity and thickness must be positive, got {diffusivity!r}, {thickness!r}"
        )
    return thickness**2 / (6.0 * diffusivity)
