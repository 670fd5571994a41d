"""Exact Laplace-domain solution of layered linear transients, inverted numerically (Talbot).

Every layer ``a_i <= r <= b_i`` obeys ``dC/dt = D (1/r^n)(r^n C')' - k C`` with constant D, no
(k = 0) or first-order (k > 0) consumption and a uniform initial concentration C0. Its Laplace
transform ``C^(r, s) = int_0^inf C exp(-s t) dt`` solves

    D (1/r^n)(r^n C^')' = (s + k) C^ - C0,

whose solution is the particular ``C0/(s + k)`` plus two homogeneous functions of ``q r`` with
``q = sqrt((s + k)/D)`` (principal root, Re q > 0 off the negative real axis). They are built
from the *nodal* functions of the layer, ``g_a(a) = 1, g_a(b) = 0`` and ``g_b(a) = 0,
g_b(b) = 1``:

==========  ==========================================================================
geometry    g_b(r) (g_a mirrors it)
==========  ==========================================================================
slab        sinh(q (r - a)) / sinh(q L)
cylinder    [I0(q r) K0(q a) - K0(q r) I0(q a)] / [I0(q b) K0(q a) - K0(q b) I0(q a)]
sphere      (b / r) sinh(q (r - a)) / sinh(q L)
==========  ==========================================================================

(the classical basis of ``basis_functions`` with m replaced by the complex q; a solid cylinder
or sphere keeps only the regular ``I0(q r)/I0(q b)`` or ``(b/r) sinh(q r)/sinh(q b)``). The two
unknowns of a layer are the coefficients of the even and odd combinations
``e = g_a + g_b`` (1 at both edges) and ``o = (g_b - g_a)/2`` (-1/2 at a, +1/2 at b), whose face
slopes are written so that a thin fast layer's capacity term (O(q^2 L), its tanh(qL/2)) and its
conductance (O(1/L)) are separate numbers: with nodal unknowns the capacity would be a
difference of two conductance-sized slopes and lose about eps/|qL|^2 of itself, which months
after a 1 um adhesive layer's 1 ms diffusion time is everything. Every hyperbolic function is
written with decaying exponentials ``exp(-q x)``, x >= 0 (series for ``x coth x - 1`` and
``x csch x - 1`` below |x| = 1/2), and the Bessel functions through scipy's exponentially scaled
``ive``/``kve`` of complex argument, so nothing overflows however large |q| L is; in a thin
cylindrical shell (L < a, |qL| < 1) the differences ``K0(qa) - K0(qb)`` and
``I0(qb) - I0(qa)`` are integrals of K1 and I1 by Gauss-Legendre quadrature. Constant face data
transform to ``value / s``; each face's
condition is its kind's Robin form ``alpha C + beta C' = gamma`` (``BoundaryKind.eigen_row``, the
face partition ``problem.face_partition``), transformed to ``gamma / s``. With the interface rows
(``C^_a/K_a = C^_b/K_b`` and continuous flux) this is one linear system of 2 unknowns per layer,
solved for all inversion nodes at once (numpy's batched LU).

From the solution, per measure (r^n-weighted, times 1, 2 pi, 4 pi as in ``TransientSolution``):

* face fluxes ``J^ = -D C^'`` at the faces (outward, i.e. towards larger r, positive);
* released amounts, the transform of the cumulative outflow: ``-a^n J^(a) / s`` (inner face),
  ``b^n J^(b) / s`` (outer face);
* remaining amount ``sum_i int r^n C^ dr`` from closed-form antiderivatives of the basis
  functions (slab and sphere: ``int sinh = cosh/q`` and ``int x sinh = x cosh/q - sinh/q^2``,
  written independently of the face slopes; cylinder: ``int r Z0(q r) dr = +-r Z1(q r)/q``,
  Abramowitz & Stegun 11.3.20, from memory) and consumed amount ``sum_i k_i int r^n C^ dr / s``.

The initial load is this module's own Gauss-Legendre quadrature of the initial state, so the
mass balance ``initial = remaining + released + consumed`` tests the particular solution, the
face slopes against the antiderivatives (slab, sphere) and the inversion; it is not an identity.
For the cylinder the Bessel antiderivative is itself ``[r g']/q^2`` (Green's identity), so there
the balance tests the particular solution, the assembly and the inversion, not the slopes.

Inversion: the fixed Talbot method of Abate & Valko (2004), in double precision,

    f(t) ~ (2 / (5 t)) sum_{k=0}^{M-1} Re[gamma_k F(delta_k / t)],
    delta_0 = 2M/5,  delta_k = (2 k pi / 5)(cot(k pi / M) + i),
    gamma_0 = exp(delta_0)/2,
    gamma_k = [1 + i (k pi/M)(1 + cot^2(k pi/M)) - i cot(k pi/M)] exp(delta_k),

with ``M = TALBOT_NODES``. Accuracy limits: each time is inverted on its own contour (no time
stepping, no error growth with t, but no shared work between times either); the rounding error
is about ``eps exp(2M/5)`` times the largest |F| on the contour, so a value far below its own
scale (the outflow of an initially empty membrane long before breakthrough, ~exp(-L^2/(4Dt)))
is accurate in absolute terms (about 1e-10 of the scale), not relatively. Far beyond the
relaxation time the transforms are sampled at |s| ~ 1/t, where every layer is thin in q (the
even/odd unknowns above keep that case accurate: measured below 1e-12 of the load at
t = 1e4 L^2/D for a sealed two-layer slab, and a mass balance within 3e-8 over 400 random
1-3 layer cases with diffusivity contrasts up to 1e7 and times up to 1e10 times a layer's own
diffusion time). t = 0 is never
inverted (the initial state is returned exactly, and the face fluxes as NaN, where they are
singular). Measured accuracy against known transform pairs and against the eigenfunction series
is in the tests (``tests/unit/worker/engine/transient/test_laplace.py``).

References
----------
J. Abate, P.P. Valko, "Multi-precision Laplace transform inversion", Int. J. Numer. Meth. Eng.
60 (2004) 979-993 (fixed Talbot). J. Abate, W. Whitt, "A unified framework for numerically
inverting Laplace transforms", INFORMS J. Comput. 18 (2006) 408-421 (the same weights).
H.S. Carslaw, J.C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford, 1959, ch. 12 (the
Laplace transformation for composite media). J. Crank, *The Mathematics of Diffusion*, 2nd ed.,
Oxford, 1975, ch. 2-6 and 14. M. Abramowitz, I.A. Stegun, *Handbook of Mathematical Functions*,
1964, 9.6 and 11.3 (modified Bessel functions and their integrals).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike
from scipy import special

from worker.engine.boundaries.compartment import capacity as compartment_capacity
from worker.engine.boundaries.compartment import compartment_sides
from worker.engine.exact_steady import validate_problem
from worker.engine.model import Problem
from worker.engine.transient.solution import TransientSolution

#: Nodes of the fixed Talbot contour: about 1e-10 relative accuracy on smooth transforms and
#: 1e-9 on the erfc pair in double precision (rounding grows as exp(2M/5), truncation falls as
#: about 10^(-0.6 M); the tests measure both).
TALBOT_NODES = 24
#: Gauss-Legendre points per layer of the initial-load quadrature (exact for r^n, n <= 2).
LOAD_QUADRATURE_POINTS = 3
#: Gauss-Legendre points of the thin-shell Bessel differences (integrands smooth for |qL| < 1).
THIN_SHELL_POINTS = 8
#: Names of the transformed quantities, in the order they are stacked for the inversion.
QUANTITIES = ("remaining", "released_inner", "released_outer", "consumed", "flux_inner",
              "flux_outer")

METHOD_NAME = "exact Laplace-domain solution (layer transfer system), fixed Talbot inversion"
METHOD_REFERENCE = (
    "H.S. Carslaw, J.C. Jaeger, Conduction of Heat in Solids, 2nd ed., 1959, ch. 12; J. Abate, "
    "P.P. Valko, Int. J. Numer. Meth. Eng. 60 (2004) 979 (fixed Talbot inversion)"
)

__all__ = [
    "METHOD_NAME",
    "METHOD_REFERENCE",
    "TALBOT_NODES",
    "TransientLaplaceSolution",
    "invert_talbot",
    "laplace_transforms",
    "laplace_unsupported_reason",
    "solve_transient_laplace",
    "talbot_contour",
]


@dataclass
class TransientLaplaceSolution(TransientSolution):
    """Laplace-domain solution at the requested times (amounts and fluxes: see
    :class:`~worker.engine.transient.solution.TransientSolution`; fluxes are NaN at t = 0).

    ``concentration_at(r, t)`` returns C (amount/m^3) as an array (len(t), len(r)); an r exactly
    on an interface takes the inner layer's value; t = 0 gives the initial state exactly.
    ``positions`` and ``profile`` hold that evaluation at the positions asked for when solving
    (None when none were). ``nodes`` is the number of Talbot nodes per time.
    """

    nodes: int
    concentration_at: Callable[..., np.ndarray]
    positions: np.ndarray | None = None
    profile: np.ndarray | None = None
    notes: list[str] = field(default_factory=list)
    #: Fluid concentration of each compartment face (``"inner"``/``"outer"``) at the times.
    compartments: dict[str, np.ndarray] = field(default_factory=dict)


# --------------------------------------------------------------------------------------------
# Fixed Talbot inversion
# --------------------------------------------------------------------------------------------


def talbot_contour(times: np.ndarray, nodes: int = TALBOT_NODES
                   ) -> tuple[np.ndarray, np.ndarray]:
    """Contour points s (1/s) and weights w, each (len(times), nodes), for positive times (s),
    such that ``f(t) ~ sum_k Re(w_k F(s_k))`` (Abate & Valko 2004, fixed Talbot)."""
    times = np.asarray(times, dtype=float)
    if np.any(times <= 0.0) or not np.all(np.isfinite(times)):
        raise ValueError(f"times: expected positive finite times in s, got {times!r}")
    if nodes < 2:
        raise ValueError(f"nodes: expected at least 2 Talbot nodes, got {nodes!r}")
    angle = np.arange(1, nodes) * np.pi / nodes
    cot = 1.0 / np.tan(angle)
    delta = np.concatenate(([2.0 * nodes / 5.0 + 0j], 0.4 * angle * nodes * (cot + 1j)))
    gamma = np.concatenate((
        [0.5 * np.exp(2.0 * nodes / 5.0) + 0j],
        (1.0 + 1j * angle * (1.0 + cot**2) - 1j * cot) * np.exp(delta[1:]),
    ))
    contour = delta[None, :] / times[:, None]
    weights = (0.4 / times)[:, None] * gamma[None, :]
    return contour, weights


def invert_talbot(transform: Callable[[np.ndarray], np.ndarray], times: ArrayLike,
                  nodes: int = TALBOT_NODES) -> np.ndarray:
    """f(t) at positive times from its transform F(s) by the fixed Talbot method.

    ``transform`` takes complex s of shape (len(times), nodes) and returns an array of shape
    s.shape + extra; the result has shape (len(times),) + extra.
    """
    times = np.atleast_1d(np.asarray(times, dtype=float))
    contour, weights = talbot_contour(times, nodes)
    values = np.asarray(transform(contour))
    extra = values.ndim - 2
    weighted = weights.reshape(weights.shape + (1,) * extra) * values
    return np.real(weighted.sum(axis=1))


# --------------------------------------------------------------------------------------------
# Nodal basis of one layer for complex q
# --------------------------------------------------------------------------------------------


def _decay(x: np.ndarray) -> np.ndarray:
    return np.exp(-x)


#: Below this |x| the ratios x coth x - 1 and x csch x - 1 are summed from their series.
_SERIES_LIMIT = 0.5
_SERIES_ORDERS = np.arange(1, 10)
_ODD_FACTORIALS = np.array([float(special.factorial(2 * k + 1)) for k in _SERIES_ORDERS])


def _hyperbolic_ratios(x: np.ndarray):
    """tanh(x/2), coth(x/2), x coth x - 1 and x csch x - 1 for complex x with Re x >= 0.

    Decaying exponentials for large |x|; for |x| <= ``_SERIES_LIMIT`` the last two from
    ``x cosh x - sinh x = sum 2k x^(2k+1)/(2k+1)!`` and ``x - sinh x = -sum x^(2k+1)/(2k+1)!``
    (k >= 1) divided by sinh x, so the O(x^2) values keep their digits as x -> 0.
    """
    e = _decay(x)
    half_denominator = -np.expm1(-x)
    tanh_half = half_denominator / (1.0 + e)
    coth_half = (1.0 + e) / half_denominator
    small = np.abs(x) <= _SERIES_LIMIT
    big = np.where(small, 1.0, x)
    denominator = -np.expm1(-2.0 * big)
    x_coth = big * (1.0 + np.exp(-2.0 * big)) / denominator - 1.0
    x_csch = big * 2.0 * _decay(big) / denominator - 1.0
    tiny = np.where(small, x, 0.1)
    square = tiny * tiny
    sum_coth = np.zeros_like(tiny)
    sum_csch = np.zeros_like(tiny)
    for k, factorial in zip(_SERIES_ORDERS[::-1], _ODD_FACTORIALS[::-1], strict=True):
        sum_coth = sum_coth * square + 2 * k / factorial
        sum_csch = sum_csch * square + 1.0 / factorial
    cube_over_sinh = tiny * square / np.sinh(tiny)
    series_coth = sum_coth * cube_over_sinh
    series_csch = -sum_csch * cube_over_sinh
    return (tanh_half, coth_half, np.where(small, series_coth, x_coth),
            np.where(small, series_csch, x_csch))


class _SlabBasis:
    """Even and odd solutions e = cosh(q(r - m))/cosh(qL/2), o = sinh(q(r - m))/(2 sinh(qL/2))
    about the mid-plane m: e = 1 at both edges, o = -1/2 at a and +1/2 at b. Their slopes
    q tanh(qL/2) and (q/2) coth(qL/2) carry a thin fast layer's capacity (O(q^2 L)) and its
    conductance (1/L) in separate numbers, so neither is lost in the other's rounding."""

    solid = False

    def __init__(self, a: float, b: float):
        self.a, self.b = a, b
        self.length = b - a

    def terms(self, q):
        """Slopes (e'(a), e'(b), o'(a), o'(b)) in 1/m and integrals (int e dr, int o dr) in m:
        int e dr = 2 tanh(qL/2)/q (from int cosh = sinh/q), int o dr = 0."""
        tanh_half, coth_half, _, _ = _hyperbolic_ratios(q * self.length)
        odd = 0.5 * q * coth_half
        return (-q * tanh_half, q * tanh_half, odd, odd), (2.0 * tanh_half / q, np.zeros_like(q))

    def _nodal_values(self, q, r):
        """sinh(q(b - r))/sinh(qL) and sinh(q(r - a))/sinh(qL), decaying form."""
        denominator = -np.expm1(-2.0 * q * self.length)
        g_b = _decay(q * (self.b - r)) * -np.expm1(-2.0 * q * (r - self.a)) / denominator
        g_a = _decay(q * (r - self.a)) * -np.expm1(-2.0 * q * (self.b - r)) / denominator
        return g_a, g_b

    def values(self, q, r):
        """(e(r), o(r)) for q (S, 1) and r (1, R): each (S, R)."""
        g_a, g_b = self._nodal_values(q, r)
        return g_a + g_b, 0.5 * (g_b - g_a)


class _SphereBasis(_SlabBasis):
    """From the nodal g_a = (a/r) sinh(q(b - r))/sinh(qL), g_b = (b/r) sinh(q(r - a))/sinh(qL):
    e = g_a + g_b, o = (g_b - g_a)/2; solid (a = 0): e = (b/r) sinh(q r)/sinh(q b), o = 0.

    With x = qL, T = tanh(x/2), A = x coth x - 1, B = x csch x - 1 (each computed without
    cancellation): e'(b) = (A + a q T)/b, e'(a) = (B - a q T)/a, and, from
    int (a + t) sinh(q t) dt = (a + t) cosh(q t)/q - sinh(q t)/q^2,
    int r^2 e dr = (a^2 + b^2) T/q + L B/q^2, int r^2 o dr = (a + b) A/(2 q^2).
    """

    def __init__(self, a: float, b: float, solid: bool):
        super().__init__(a, b)
        self.solid = solid

    def terms(self, q):
        tanh_half, _, x_coth, x_csch = _hyperbolic_ratios(q * self.length)
        a, b = self.a, self.b
        if self.solid:
            zero = np.zeros_like(q)
            return (zero, x_coth / b, zero, zero), (b * x_coth / q**2, zero)
        # o' = (g_b' - g_a')/2 with g_b'(a) = (b/a) q csch, g_a'(a) = -q coth - 1/a,
        # g_b'(b) = q coth - 1/b, g_a'(b) = -(a/b) q csch
        q_coth = (x_coth + 1.0) / self.length
        q_csch = (x_csch + 1.0) / self.length
        odd_a = 0.5 * ((b / a) * q_csch + q_coth + 1.0 / a)
        odd_b = 0.5 * (q_coth - 1.0 / b + (a / b) * q_csch)
        slopes = ((x_csch - a * q * tanh_half) / a, (x_coth + a * q * tanh_half) / b,
                  odd_a, odd_b)
        integrals = ((a * a + b * b) * tanh_half / q + self.length * x_csch / q**2,
                     (a + b) * x_coth / (2.0 * q**2))
        return slopes, integrals

    def values(self, q, r):
        g_a, g_b = self._nodal_values(q, r)
        safe_r = np.where(r > 0.0, r, 1.0)
        if self.solid:
            x = q * self.b
            centre = self.b * q * 2.0 * _decay(x) / -np.expm1(-2.0 * x)  # b q csch(q b)
            e = np.where(r > 0.0, (self.b / safe_r) * g_b, centre)
            return e, np.zeros_like(e)
        g_a, g_b = (self.a / safe_r) * g_a, (self.b / safe_r) * g_b
        return g_a + g_b, 0.5 * (g_b - g_a)


def _scaled_i(order: int, z):
    """I_order(z) exp(-z) for Re z >= 0 (scipy's ive is scaled by exp(-|Re z|))."""
    return special.ive(order, z) * np.exp(-1j * z.imag)


def _scaled_k(order: int, z):
    """K_order(z) exp(z)."""
    return special.kve(order, z)


class _CylinderBasis:
    """Nodal combinations g_a, g_b of I0(q r) and K0(q r), returned as e = g_a + g_b and
    o = (g_b - g_a)/2 (as the slab's); solid: e = I0(q r)/I0(q b), o = 0.

    Unlike the slab and sphere, e' is formed as g_a' + g_b' here: a thin cylindrical shell with
    |qL| << 1 loses about eps/|qL|^2 of its capacity term (see the module's accuracy notes).
    """

    def __init__(self, a: float, b: float, solid: bool):
        self.a, self.b, self.solid = a, b, solid
        self.length = b - a

    def _edge_functions(self, q):
        zb = q * self.b
        ib0, ib1 = _scaled_i(0, zb), _scaled_i(1, zb)
        if self.solid:
            return ib0, ib1, None
        za = q * self.a
        return ib0, ib1, (_scaled_i(0, za), _scaled_i(1, za), _scaled_k(0, za),
                          _scaled_k(1, za), _scaled_k(0, zb), _scaled_k(1, zb))

    def _thin(self, q):
        """Where the shell is thin (L < a) and |qL| < 1: there the even slopes, and the
        determinant, are differences of nearly equal Bessel products."""
        if self.solid or self.length >= self.a:
            return np.zeros(q.shape, dtype=bool)
        return np.abs(q) * self.length < 1.0

    def _thin_shell(self, q):
        """(det, e'(a), e'(b)) of a thin shell from K0(qa) - K0(qb) = q int K1(q r) dr and
        I0(qb) - I0(qa) = q int I1(q r) dr (Gauss-Legendre; smooth integrands for |qL| < 1),
        scaled as the nodal determinant ``det`` (I~0(qb) K~0(qa) - K~0(qb) I~0(qa) e^{-2qL})."""
        a, b = self.a, self.b
        nodes, weights = np.polynomial.legendre.leggauss(THIN_SHELL_POINTS)
        r = 0.5 * (a + b) + 0.5 * self.length * nodes
        w = 0.5 * self.length * weights
        z = q[:, None] * r[None, :]

        def integral(values):
            return q * (values * w).sum(axis=1)

        # each product of an edge Bessel function with a difference, exponentials cancelled
        k1, i1 = _scaled_k(1, z), _scaled_i(1, z)
        k_to_b = integral(k1 * np.exp(q[:, None] * (b - r)))  # e^{qb} (K0(qa) - K0(qb))
        i_to_b = integral(i1 * np.exp(q[:, None] * (r - b)))  # e^{-qb} (I0(qb) - I0(qa))
        k_to_a = integral(k1 * np.exp(q[:, None] * (a - r)))  # e^{qa} (K0(qa) - K0(qb))
        i_to_a = integral(i1 * np.exp(q[:, None] * (r - a)))  # e^{-qa} (I0(qb) - I0(qa))
        zb, za = q * b, q * a
        ib0, ib1, kb0, kb1 = _scaled_i(0, zb), _scaled_i(1, zb), _scaled_k(0, zb), _scaled_k(1, zb)
        ia1, ka1 = _scaled_i(1, za), _scaled_k(1, za)
        unscaled_det = ib0 * k_to_b + kb0 * i_to_b  # I0(qb) K0(qa) - K0(qb) I0(qa)
        slope_b = q * (ib1 * k_to_b - kb1 * i_to_b) / unscaled_det
        slope_a = q * (ia1 * k_to_a - ka1 * i_to_a) / unscaled_det
        return unscaled_det * _decay(q * self.length), slope_a, slope_b

    def terms(self, q):
        """Slopes (e'(a), e'(b), o'(a), o'(b)) and integrals (int r e dr, int r o dr). The
        integrals are the antiderivatives r I1(q r)/q of r I0(q r) and -r K1(q r)/q of
        r K0(q r) (Abramowitz & Stegun 11.3.20, from memory), that is [r g']_a^b / q^2."""
        ib0, ib1, hollow = self._edge_functions(q)
        a, b = self.a, self.b
        if hollow is None:
            zero = np.zeros_like(q)
            return (zero, q * ib1 / ib0, zero, zero), (b * ib1 / (q * ib0), zero)
        ia0, ia1, ka0, ka1, kb0, kb1 = hollow
        e1 = _decay(q * self.length)
        e2 = e1 * e1
        det = ib0 * ka0 - kb0 * ia0 * e2
        thin = self._thin(q)
        if np.any(thin):
            det = det.copy()
            det[thin], thin_a, thin_b = self._thin_shell(q[thin])
        gb_a = q * e1 * (ia1 * ka0 + ka1 * ia0) / det
        gb_b = q * (ib1 * ka0 + kb1 * ia0 * e2) / det
        ga_a = -q * (ka1 * ib0 + ia1 * kb0 * e2) / det
        ga_b = -q * e1 * (kb1 * ib0 + ib1 * kb0) / det
        even_a, even_b = ga_a + gb_a, ga_b + gb_b
        if np.any(thin):
            even_a[thin], even_b[thin] = thin_a, thin_b
        odd_a, odd_b = 0.5 * (gb_a - ga_a), 0.5 * (gb_b - ga_b)
        integrals = ((b * even_b - a * even_a) / q**2, (b * odd_b - a * odd_a) / q**2)
        return (even_a, even_b, odd_a, odd_b), integrals

    def values(self, q, r):
        zr = q * r
        ir0 = _scaled_i(0, zr)
        ib0, _, hollow = self._edge_functions(q)
        grow = _decay(q * (self.b - r))
        if hollow is None:
            e = ir0 / ib0 * grow
            return e, np.zeros_like(e)
        ia0, _, ka0, _, kb0, _ = hollow
        kr0 = _scaled_k(0, zr)
        e1 = _decay(q * self.length)
        det = ib0 * ka0 - kb0 * ia0 * e1 * e1
        fall = _decay(q * (r - self.a))
        g_b = (ir0 * ka0 * grow - kr0 * ia0 * fall * e1) / det
        g_a = (kr0 * ib0 * fall - ir0 * kb0 * grow * e1) / det
        return g_a + g_b, 0.5 * (g_b - g_a)


def _layer_basis(problem: Problem, index: int):
    a, b = float(problem.edges[index]), float(problem.edges[index + 1])
    solid = index == 0 and problem.solid_centre
    if problem.exponent == 0:
        return _SlabBasis(a, b)
    if problem.exponent == 1:
        return _CylinderBasis(a, b, solid)
    return _SphereBasis(a, b, solid)


# --------------------------------------------------------------------------------------------
# The transformed problem
# --------------------------------------------------------------------------------------------


def laplace_unsupported_reason(problem: Problem) -> str | None:
    """Why this module has no solution of the problem, or None when it has one.

    Supported: any geometry (hollow or solid), any number of layers with partition jumps, no or
    first-order reaction in every layer, no solubility that can be reached
    (``Problem.can_saturate``), and every boundary kind with a Robin form (concentration, flux,
    mass transfer, symmetry, compartment), a uniform initial state per layer.
    """
    for i, layer in enumerate(problem.layers):
        if not layer.reaction.law.is_linear:
            return (f"layers[{i}] ({layer.name}): {layer.reaction.kind} kinetics are nonlinear "
                    "(no Laplace transform of the layer equation)")
    if problem.can_saturate:
        return ("a layer's dissolved solute can reach its solubility (undissolved solute makes "
                "the equations nonlinear)")
    for side in ("inner", "outer"):
        boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
        try:
            boundary.condition.laplace_row(boundary, np.ones(1), 1.0, 1.0, 1.0, 1.0, 1.0)
        except NotImplementedError:
            return f"{side}_boundary: kind {boundary.kind!r} has no linear face condition"
    return None


class _Transformed:
    """The layered problem in the Laplace domain: solve for a batch of s, give the transforms.

    Built once per problem (validation, bases, face rows); ``solve(s)`` returns the layer
    unknowns for complex s of any shape.
    """

    def __init__(self, problem: Problem):
        validate_problem(problem)
        reason = laplace_unsupported_reason(problem)
        if reason is not None:
            raise ValueError(reason)
        self.problem = problem
        self.layers = problem.layers
        self.count = len(problem.layers)
        self.bases = [_layer_basis(problem, i) for i in range(self.count)]
        self.solid = problem.solid_centre
        self.rates = np.array([ly.reaction.linear_rate_constant or 0.0 for ly in self.layers])
        self.diffusivities = np.array([ly.diffusivity for ly in self.layers])
        self.partitions = np.array([ly.partition for ly in self.layers])
        self.initial = np.array([float(ly.initial) for ly in self.layers])
        n = problem.exponent
        edges = problem.edges
        self.volumes = (edges[1:] ** (n + 1) - edges[:-1] ** (n + 1)) / (n + 1)
        self.inner_weight = 0.0 if self.solid else float(edges[0]) ** n
        self.outer_weight = float(edges[-1]) ** n
        self.measure = problem.measure_factor
        self.compartments = compartment_sides(problem)
        self.capacities = {side: compartment_capacity(problem, side)
                           for side in self.compartments}

    def face_row(self, side: str, s: np.ndarray):
        """``(alpha, beta, gamma)`` of the face's Laplace-domain row at s (``laplace_row``: the
        eigen row with gamma / s; a compartment's coefficients depend on s)."""
        problem = self.problem
        inner = side == "inner"
        boundary = problem.inner_boundary if inner else problem.outer_boundary
        layer = self.layers[0] if inner else self.layers[-1]
        weight = self.inner_weight if inner else self.outer_weight
        return boundary.condition.laplace_row(
            boundary, s, -1.0 if inner else 1.0, layer.diffusivity,
            problem.face_partition(side), weight if weight > 0.0 else 1.0,
            self.capacities.get(side, 0.0))

    def initial_load(self) -> float:
        """Initial amount per measure by Gauss-Legendre quadrature of r^n C0 over each layer."""
        nodes, weights = np.polynomial.legendre.leggauss(LOAD_QUADRATURE_POINTS)
        edges = self.problem.edges
        total = 0.0
        for i in range(self.count):
            a, b = float(edges[i]), float(edges[i + 1])
            r = 0.5 * (a + b) + 0.5 * (b - a) * nodes
            total += 0.5 * (b - a) * float(np.sum(weights * r**self.problem.exponent
                                                  * self.initial[i]))
        return self.measure * total

    def solve(self, s: np.ndarray):
        """Per layer: q, the particular C0/(s+k), the slopes (e'(a), e'(b), o'(a), o'(b)), the
        integrals (int r^n e dr, int r^n o dr) and the unknowns sigma, delta of
        ``C^ = C0/(s+k) + sigma e + delta o`` (s flattened).

        In a hollow layer the edge values are C^(a) = p + sigma - delta/2 and
        C^(b) = p + sigma + delta/2; in a solid one C^(b) = p + sigma and delta = 0.
        """
        s = np.asarray(s, dtype=complex).ravel()
        size = 2 * self.count
        matrix = np.zeros((s.size, size, size), dtype=complex)
        rhs = np.zeros((s.size, size), dtype=complex)
        shifted = s[:, None] + self.rates[None, :]
        q = np.sqrt(shifted / self.diffusivities[None, :])
        particular = self.initial[None, :] / shifted
        terms = [basis.terms(q[:, i]) for i, basis in enumerate(self.bases)]
        slopes = [slope for slope, _ in terms]
        odd_b = [0.0 if basis.solid else 0.5 for basis in self.bases]
        if self.solid:  # delta_0 = 0: a solid centre has the one regular solution
            matrix[:, 0, 1] = 1.0
        else:
            alpha, beta, gamma = self.face_row("inner", s)
            e_a, _, o_a, _ = slopes[0]
            matrix[:, 0, 0] = alpha + beta * e_a
            matrix[:, 0, 1] = -0.5 * alpha + beta * o_a
            rhs[:, 0] = gamma - alpha * particular[:, 0]
        for i in range(self.count - 1):
            row = 2 * i + 1
            k_left, k_right = self.partitions[i], self.partitions[i + 1]
            matrix[:, row, 2 * i] = 1.0 / k_left
            matrix[:, row, 2 * i + 1] = odd_b[i] / k_left
            matrix[:, row, 2 * i + 2] = -1.0 / k_right
            matrix[:, row, 2 * i + 3] = 0.5 / k_right
            rhs[:, row] = particular[:, i + 1] / k_right - particular[:, i] / k_left
            _, e_b, _, o_b = slopes[i]
            e_a, _, o_a, _ = slopes[i + 1]
            d_left, d_right = self.diffusivities[i], self.diffusivities[i + 1]
            matrix[:, row + 1, 2 * i] = d_left * e_b
            matrix[:, row + 1, 2 * i + 1] = d_left * o_b
            matrix[:, row + 1, 2 * i + 2] = -d_right * e_a
            matrix[:, row + 1, 2 * i + 3] = -d_right * o_a
        alpha, beta, gamma = self.face_row("outer", s)
        _, e_b, _, o_b = slopes[-1]
        last = self.count - 1
        matrix[:, -1, 2 * last] = alpha + beta * e_b
        matrix[:, -1, 2 * last + 1] = odd_b[last] * alpha + beta * o_b
        rhs[:, -1] = gamma - alpha * particular[:, last]
        scale = np.max(np.abs(matrix), axis=2)
        unknowns = np.linalg.solve(matrix / scale[:, :, None], (rhs / scale)[:, :, None])[..., 0]
        integrals = [integral for _, integral in terms]
        return q, particular, slopes, integrals, unknowns[:, 0::2], unknowns[:, 1::2]

    def quantities(self, s: np.ndarray) -> np.ndarray:
        """The transforms of :data:`QUANTITIES` at s, shape s.shape + (6,), per measure."""
        shape = np.shape(s)
        s_flat = np.asarray(s, dtype=complex).ravel()
        q, particular, slopes, integrals, sigma, delta = self.solve(s_flat)
        e_a, _, o_a, _ = slopes[0]
        _, e_b, _, o_b = slopes[-1]
        flux_inner = -self.diffusivities[0] * (sigma[:, 0] * e_a + delta[:, 0] * o_a)
        if self.solid:
            flux_inner = np.zeros_like(flux_inner)
        flux_outer = -self.diffusivities[-1] * (sigma[:, -1] * e_b + delta[:, -1] * o_b)
        held = np.empty_like(particular)
        for i in range(self.count):
            int_e, int_o = integrals[i]
            held[:, i] = particular[:, i] * self.volumes[i] + sigma[:, i] * int_e \
                + delta[:, i] * int_o
        m = self.measure
        out = np.stack((
            m * held.sum(axis=1),
            -m * self.inner_weight * flux_inner / s_flat,
            m * self.outer_weight * flux_outer / s_flat,
            m * (held @ self.rates) / s_flat,
            flux_inner,
            flux_outer,
        ), axis=-1)
        return out.reshape(shape + (len(QUANTITIES),))

    def layer_of(self, r: np.ndarray) -> np.ndarray:
        """Layer index of each position (an interface belongs to the inner layer)."""
        edges = self.problem.edges
        span = 1e-12 * (edges[-1] - edges[0])
        if np.any(r < edges[0] - span) or np.any(r > edges[-1] + span) \
                or not np.all(np.isfinite(r)):
            raise ValueError(f"positions: expected positions within [{edges[0]}, {edges[-1]}] m, "
                             f"got {r!r}")
        return np.clip(np.searchsorted(edges, r, side="left") - 1, 0, self.count - 1)

    def concentrations(self, s: np.ndarray, r: np.ndarray, layer: int | None = None
                       ) -> np.ndarray:
        """C^(r, s), shape s.shape + (len(r),); with ``layer`` every r is read in that layer
        (its closed interval), so both sides of a partition jump can be read."""
        shape = np.shape(s)
        s_flat = np.asarray(s, dtype=complex).ravel()
        q, particular, _, _, sigma, delta = self.solve(s_flat)
        layers = self.layer_of(r)  # also the range check
        if layer is not None:
            layers = np.full(r.size, int(layer))
        edges = self.problem.edges
        out = np.empty((s_flat.size, r.size), dtype=complex)
        for i, basis in enumerate(self.bases):
            chosen = layers == i
            if not np.any(chosen):
                continue
            inside = np.clip(r[chosen], edges[i], edges[i + 1])
            even, odd = basis.values(q[:, i:i + 1], inside[None, :])
            out[:, chosen] = (particular[:, i:i + 1] + sigma[:, i:i + 1] * even
                              + delta[:, i:i + 1] * odd)
        return out.reshape(shape + (r.size,))


def laplace_transforms(problem: Problem, s: ArrayLike) -> dict[str, np.ndarray]:
    """The transforms of :data:`QUANTITIES` at complex s (any shape), per measure: amounts in
    amount*s (per measure), face fluxes in amount/m^2 (the transform of amount/(m^2*s)).

    For reference inversions (mpmath) and tests; ValueError as ``solve_transient_laplace``.
    """
    values = _Transformed(problem).quantities(np.asarray(s, dtype=complex))
    return {name: values[..., k] for k, name in enumerate(QUANTITIES)}


def _check_times(problem: Problem, times) -> np.ndarray:
    times = np.asarray(problem.regime.times if times is None else times, dtype=float)
    if times.ndim != 1 or times.size == 0 or not np.all(np.isfinite(times)) \
            or np.any(times < 0.0):
        raise ValueError(f"times: expected a non-empty list of finite times >= 0 s, got "
                         f"{times!r}")
    return times


def solve_transient_laplace(problem: Problem, times: ArrayLike | None = None,
                            positions: ArrayLike | None = None, *,
                            nodes: int = TALBOT_NODES) -> TransientLaplaceSolution:
    """Amounts, face fluxes and (optionally) the profile at the requested times, exactly in the
    Laplace domain and inverted by the fixed Talbot method.

    Parameters
    ----------
    problem : Problem
        Normalised case (SI): any geometry and number of layers, no or first-order reaction,
        every boundary kind (see :func:`laplace_unsupported_reason`).
    times : array_like, optional
        Times in s (>= 0, any order); default ``problem.regime.times``.
    positions : array_like, optional
        Positions in m (within the body) at which the profile is also returned (``profile``,
        shape (len(times), len(positions)), amount/m^3).
    nodes : int
        Talbot nodes per time (default :data:`TALBOT_NODES`).

    Returns
    -------
    TransientLaplaceSolution

    Raises
    ------
    ValueError
        For an unsupported problem (the reason), a field out of range, or bad times/positions;
        the message names the field.
    """
    transformed = _Transformed(problem)
    times = _check_times(problem, times)
    load = transformed.initial_load()
    values = np.empty((times.size, len(QUANTITIES)))
    positive = times > 0.0
    if np.any(positive):
        values[positive] = invert_talbot(transformed.quantities, times[positive], nodes)
    start = ~positive
    values[start] = (load, 0.0, 0.0, 0.0, np.nan, np.nan)
    # A face that passes nothing (sealed, or the centre of a solid body) has a transform that
    # is zero: its inversion's round-off (about 1e-13 of the scale) is not reported as release.
    for side, released, flux in (("inner", 1, 4), ("outer", 2, 5)):
        boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
        if boundary.condition.is_sealed(boundary) or (side == "inner" and problem.solid_centre):
            values[positive, released] = 0.0
            values[positive, flux] = 0.0

    def concentration_at(r: ArrayLike, t: ArrayLike, layer: int | None = None) -> np.ndarray:
        """C at positions r (m) and times t (s), shape (len(t), len(r)); with ``layer`` every r
        is read in that layer (an interface otherwise belongs to the inner layer)."""
        r = np.atleast_1d(np.asarray(r, dtype=float))
        t = np.atleast_1d(np.asarray(t, dtype=float))
        if np.any(t < 0.0) or not np.all(np.isfinite(t)):
            raise ValueError(f"times: expected finite times >= 0 s, got {t!r}")
        layers = transformed.layer_of(r) if layer is None else np.full(r.size, int(layer))
        out = np.empty((t.size, r.size))
        later = t > 0.0
        if np.any(later):
            out[later] = invert_talbot(lambda s: transformed.concentrations(s, r, layer),
                                       t[later], nodes)
        out[~later] = transformed.initial[layers][None, :]
        return out

    compartments = {}
    for side in transformed.compartments:
        boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
        face = problem.edges[0] if side == "inner" else problem.edges[-1]
        layer_index = 0 if side == "inner" else transformed.count - 1
        level = np.full(times.size, float(boundary.initial))
        if np.any(positive):  # surface C = K_face * C_f
            level[positive] = concentration_at(np.array([face]), times[positive],
                                               layer_index)[:, 0] / problem.face_partition(side)
        compartments[side] = level

    profile = None
    where = None
    if positions is not None:
        where = np.atleast_1d(np.asarray(positions, dtype=float))
        profile = concentration_at(where, times)
    return TransientLaplaceSolution(
        method=METHOD_NAME,
        reference=METHOD_REFERENCE,
        times=times,
        remaining=values[:, 0],
        released_inner=values[:, 1],
        released_outer=values[:, 2],
        consumed=values[:, 3],
        flux_inner=values[:, 4],
        flux_outer=values[:, 5],
        initial_load=float(load),
        nodes=int(nodes),
        concentration_at=concentration_at,
        positions=where,
        profile=profile,
        notes=[f"fixed Talbot inversion, {nodes} nodes per time"],
        compartments=compartments,
    )
