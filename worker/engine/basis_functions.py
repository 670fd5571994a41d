"""Closed-form solutions of the steady diffusion-reaction equation inside one layer.

In a homogeneous layer ``a <= r <= b`` the steady shell balance reads

    (1/r^n) d/dr(r^n D dC/dr) = k C + Q,        n = 0 (slab), 1 (cylinder), 2 (sphere),

with ``k >= 0`` a first-order rate constant (1/s) and ``Q >= 0`` a constant (zero-order)
consumption rate, amount/(m^3*s); at most one of them is non-zero. Its general solution is

    C(r) = c1 * g1(r) + c2 * g2(r) + P(r),

where ``g1``, ``g2`` solve the homogeneous equation and ``P`` is the zero-order particular solution
that vanishes at both edges. ``g2`` is always the nodal function with ``g2(a) = 0``, ``g2(b) = 1``.
``g1(a) = 1`` and, depending on the layer's Thiele number ``m (b - a)`` (m = sqrt(k/D)):

* ``m (b - a) > 1`` (*nodal* form): ``g1(b) = 0``. Both functions stay within [0, 1] however
  large m is, so nothing overflows;
* ``m (b - a) <= 1``, no reaction included (*initial-value* form): ``g1'(a) = 0``. Then a sealed
  inner face fixes ``c2 = 0`` exactly and weak-reaction fluxes are not formed as small differences
  of large edge values.

The functions are combinations of the classical basis functions:

==========  =====================  ==========================================
geometry    no reaction            first order
==========  =====================  ==========================================
slab        1, x                   cosh(m(x - a)), sinh(m(x - a)), sinh(m(b - x))
cylinder    1, ln r                I0(m r), K0(m r)
sphere      1, 1/r                 sinh(m(r - a))/r, cosh(m(r - a))/r, sinh(m(b - r))/r
==========  =====================  ==========================================

and the zero-order particular solution is ``Q r^2 / (2 (n + 1) D)`` (J. Crank, *The Mathematics
of Diffusion*, 2nd ed., Oxford, 1975, ch. 14; R.B. Bird, W.E. Stewart, E.N. Lightfoot, *Transport
Phenomena*, 2nd ed., Wiley, 2002, §10.6 and §18; H.S. Carslaw, J.C. Jaeger, *Conduction of Heat
in Solids*, 2nd ed., Oxford, 1959). Exponentials are written as decaying exponentials relative
to a layer edge, and the modified Bessel functions through their exponentially scaled forms
(``i0e``, ``i1e``, ``k0e``, ``k1e``), so that no evaluation overflows and no digits are lost for
m*(b - a) up to 1e4 and beyond. The cylinder's initial-value function uses the Wronskian
``I0(x) K1(x) + I1(x) K0(x) = 1/x`` (M. Abramowitz, I.A. Stegun, *Handbook of Mathematical
Functions*, 1964, 9.6.15, number from memory; tests check g1(a) = 1, g1'(a) = 0 directly).

For the innermost layer of a solid cylinder or sphere (``a = 0``) the functions that are singular
at the centre (ln r, K0, 1/r, cosh(m r)/r) are dropped: the layer has the single regular function
``g2`` (``g2(b) = 1``) and ``g1`` is identically zero.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import overload

import numpy as np
from scipy import special

#: Positions r in metres: an array, or one position as a numpy scalar (``LayerBasis.evaluate``
#: keeps a single position scalar, for numpy's scalar arithmetic); values follow its shape.
Positions = np.ndarray | np.float64

# Below this x, x cosh x - sinh x is summed from its Taylor series (the direct form cancels).
_SERIES_LIMIT = 0.1


def _x_cosh_minus_sinh(x: Positions) -> np.ndarray:
    """x cosh x - sinh x = sum_{k>=1} 2k x^(2k+1)/(2k+1)!, accurate for small x, x <= 1."""
    x = np.asarray(x, dtype=float)
    small = np.minimum(x, _SERIES_LIMIT)
    series = sum(2 * k * small ** (2 * k + 1) / math.factorial(2 * k + 1) for k in range(1, 7))
    return np.where(x < _SERIES_LIMIT, series, x * np.cosh(x) - np.sinh(x))


def _full(r, value):
    """``value`` with the shape of r (an array), or as a scalar for a scalar r; a ``value``
    batched over trials (an array) is broadcast against r."""
    if not isinstance(r, np.ndarray):
        return np.float64(value)
    if isinstance(value, np.ndarray):
        return np.broadcast_to(value, r.shape).copy()
    out = np.empty(r.shape)
    out.fill(value)
    return out


def uniform_branch(condition) -> bool:
    """A branch test on one layer's parameters. For plain floats, the test itself. For
    parameters batched over trials (arrays, see ``LayerBasis``) every trial must take the same
    branch: the caller groups trials by ``LayerBasis.branch`` first (ValueError otherwise)."""
    if isinstance(condition, np.ndarray):
        if condition.all():
            return True
        if not condition.any():
            return False
        raise ValueError("batched layer parameters span two branches of the closed form; "
                         "group the trials by LayerBasis.branch")
    return bool(condition)


def _sqrt(x):
    return np.sqrt(x) if isinstance(x, np.ndarray) else math.sqrt(x)


def _expm1(x):
    return np.expm1(x) if isinstance(x, np.ndarray) else math.expm1(x)


def _zeros(r):
    return np.zeros(r.shape) if isinstance(r, np.ndarray) else np.float64(0.0)


@dataclass(frozen=True)
class LayerBasis:
    """Nodal closed-form solution of one layer.

    Parameters
    ----------
    exponent : int
        Geometric exponent n: 0 slab, 1 cylinder, 2 sphere.
    inner_edge, outer_edge : float
        Edge positions a < b, m.
    diffusivity : float
        D, m^2/s.
    rate_constant : float
        First-order constant k, 1/s (0 for none).
    zero_order_rate : float
        Zero-order consumption Q, amount/(m^3*s) (0 for none).
    solid : bool
        True for the innermost layer of a solid cylinder or sphere (a = 0).

    The numeric fields may also be arrays over trials, of one shape that broadcasts against
    the positions (``(n, 1)`` parameters, ``(n, p)`` positions): ``evaluate`` then gives every
    trial's functions at once, provided every trial takes the same branch of the closed form
    (``branch``; ``uniform_branch`` raises otherwise).
    """

    exponent: int
    inner_edge: float
    outer_edge: float
    diffusivity: float
    rate_constant: float = 0.0
    zero_order_rate: float = 0.0
    solid: bool = False

    @property
    def thickness(self) -> float:
        return self.outer_edge - self.inner_edge

    @property
    def decay_constant(self) -> float:
        """m = sqrt(k/D), 1/m (0 without first-order reaction)."""
        return _sqrt(self.rate_constant / self.diffusivity)

    @staticmethod
    def branch(rate_constant, diffusivity, thickness, zero_order_rate):
        """Which closed form a layer takes, element by element (arrays over trials, or floats):
        (reacting, nodal, zero order), the tests of ``evaluate``; trials with equal branches
        can be evaluated as one batched ``LayerBasis``."""
        m = np.sqrt(np.asarray(rate_constant, dtype=float) / diffusivity)
        return m > 0.0, m * thickness > 1.0, np.asarray(zero_order_rate) != 0.0

    @overload
    def evaluate(self, r: np.ndarray) -> tuple[np.ndarray, ...]: ...
    @overload
    def evaluate(self, r: float) -> tuple[np.float64, ...]: ...

    def evaluate(self, r: float | np.ndarray) -> tuple[Positions, ...]:
        """Nodal functions, particular solution and their r-derivatives at positions ``r``.

        Returns
        -------
        g1, g2, particular, dg1, dg2, dparticular : ndarray
            The two dimensionless homogeneous solutions (see the module docstring), the
            particular solution in concentration units and the derivatives per metre, each with
            the shape of ``r`` (a single float position gives scalars: numpy's scalar
            arithmetic, the same values as for that position in an array, without the array
            overhead).
        """
        r = np.float64(r) if isinstance(r, float) else np.asarray(r, dtype=float)
        if uniform_branch(self.decay_constant > 0.0):
            values = self._reacting(r)
        else:
            values = self._plain(r)
        particular, dparticular = self._particular(r)
        return (*values[:2], particular, *values[2:], dparticular)

    def edge_values(self, r: float) -> tuple[float, ...]:
        """``evaluate`` at one position, as floats; for a hollow layer without reaction the
        constant functions (g1 = 1, g1' = P = P' = 0) are not evaluated."""
        if self.decay_constant == 0.0 and self.zero_order_rate == 0.0 and not self.solid:
            g2, dg2 = self._plain_nodal(np.float64(r))
            return 1.0, float(g2), 0.0, 0.0, float(dg2), 0.0
        return tuple(float(v) for v in self.evaluate(float(r)))

    @overload
    def combination(self, r: np.ndarray, c1: float, c2: float, partition: float
                    ) -> tuple[np.ndarray, np.ndarray]: ...
    @overload
    def combination(self, r: float, c1: float, c2: float, partition: float
                    ) -> tuple[np.float64, np.float64]: ...

    def combination(self, r: float | np.ndarray, c1: float, c2: float, partition: float
                    ) -> tuple[Positions, Positions]:
        """C = K (c1 g1 + c2 g2) + P and dC/dr at positions ``r`` (see ``evaluate``).

        In a hollow layer without reaction g1 = 1, g1' = 0 and P = P' = 0 identically: those
        terms enter as scalars, the same arithmetic value for value, without their arrays.
        """
        if self.decay_constant == 0.0 and self.zero_order_rate == 0.0 and not self.solid:
            r = np.float64(r) if isinstance(r, float) else np.asarray(r, dtype=float)
            g2, dg2 = self._plain_nodal(r)
            return (partition * (c1 * 1.0 + c2 * g2) + 0.0,
                    partition * (c1 * 0.0 + c2 * dg2) + 0.0)
        g1, g2, part, dg1, dg2, dpart = self.evaluate(r)
        return partition * (c1 * g1 + c2 * g2) + part, partition * (c1 * dg1 + c2 * dg2) + dpart

    # -- no reaction ------------------------------------------------------------------------
    def _plain(self, r: Positions) -> tuple[Positions, ...]:
        """g1 = 1 and the nodal g2, with derivatives."""
        zeros, ones = _zeros(r), _full(r, 1.0)
        if self.solid:
            return zeros, ones, zeros, zeros
        g2, dg2 = self._plain_nodal(r)
        return ones, g2, zeros, dg2

    def _plain_nodal(self, r: Positions) -> tuple[Positions, Positions]:
        """(x - a)/L, ln(r/a)/ln(b/a) or (1/a - 1/r)/(1/a - 1/b), and the derivative."""
        a, b, n = self.inner_edge, self.outer_edge, self.exponent
        length = b - a
        if n == 0:
            return (r - a) / length, _full(r, 1.0 / length)
        if n == 1:
            log_ratio = np.log1p(length / a)
            return np.log1p((r - a) / a) / log_ratio, 1.0 / (r * log_ratio)
        return b * (r - a) / (r * length), a * b / (length * (r * r))

    # -- first order ------------------------------------------------------------------------
    @property
    def nodal(self) -> bool:
        """True when g1 is the nodal function (g1(b) = 0), i.e. m (b - a) > 1."""
        return uniform_branch(self.decay_constant * self.thickness > 1.0)

    def _reacting(self, r: Positions) -> tuple[Positions, ...]:
        n = self.exponent
        if n == 1:
            return self._cylinder_bessel(r)
        if self.solid:
            return self._solid_sphere(r)
        a, b, m = self.inner_edge, self.outer_edge, self.decay_constant
        g2, dg2 = self._sinh_ratio(r - a)
        if n == 2:
            weight = b / r
            g2, dg2 = weight * g2, weight * dg2 - weight * g2 / r
        if self.nodal:
            g1, dg1 = self._sinh_ratio(b - r)
            dg1 = -dg1
            if n == 2:
                weight = a / r
                g1, dg1 = weight * g1, weight * dg1 - weight * g1 / r
            return g1, g2, dg1, dg2
        x = m * (r - a)  # at most 1 here
        if n == 0:
            return np.cosh(x), g2, m * np.sinh(x), dg2
        # r C = a cosh(x) + sinh(x)/m: C(a) = 1, C'(a) = 0.
        g1 = (a * np.cosh(x) + np.sinh(x) / m) / r
        dg1 = (_x_cosh_minus_sinh(x) / m + a * r * m * np.sinh(x)) / (r * r)
        return g1, g2, dg1, dg2

    def _sinh_ratio(self, t: Positions) -> tuple[Positions, Positions]:
        """sinh(m t)/sinh(m L) and its t-derivative, 0 <= t <= L, in decaying-exponential form."""
        m, length = self.decay_constant, self.outer_edge - self.inner_edge
        denominator = -_expm1(-2.0 * m * length)
        decay = np.exp(-m * (length - t))
        twice = -2.0 * m * t
        value = decay * (-np.expm1(twice)) / denominator
        slope = m * decay * (1.0 + np.exp(twice)) / denominator
        return value, slope

    def _solid_sphere(self, r: Positions) -> tuple[Positions, ...]:
        """(b/r) sinh(m r)/sinh(m b), regular at the centre, and its derivative."""
        m, b = self.decay_constant, self.outer_edge
        x = m * r
        safe_r = np.where(r > 0.0, r, 1.0)
        # 2 exp(-m r) sinh(m r)/r = (1 - exp(-2 m r))/r, limit 2 m at r = 0.
        scaled_sinh_over_r = np.where(r > 0.0, -np.expm1(-2.0 * x) / safe_r, 2.0 * m)
        prefactor = b * np.exp(-m * (b - r)) / (-np.expm1(-2.0 * m * b))
        # d/dr [sinh(x)/r] = (x cosh x - sinh x)/r^2, likewise scaled by 2 exp(-x).
        small = np.minimum(x, 1.0)
        scaled_numerator = np.where(x < 1.0, 2.0 * np.exp(-small) * _x_cosh_minus_sinh(small),
                                    x * (1.0 + np.exp(-2.0 * x)) + np.expm1(-2.0 * x))
        scaled_slope = scaled_numerator / (safe_r * safe_r)
        zeros = _zeros(r)
        return zeros, prefactor * scaled_sinh_over_r, zeros, prefactor * scaled_slope

    def _cylinder_bessel(self, r: Positions) -> tuple[Positions, ...]:
        """Combinations of I0(m r) and K0(m r) in scaled form."""
        m, a, b = self.decay_constant, self.inner_edge, self.outer_edge
        x = m * r
        i0r, i1r = special.i0e(x), special.i1e(x)
        i0b = special.i0e(m * b)
        grow_from_outer = np.exp(-m * (b - r))  # exp(m r) / exp(m b)
        if self.solid:
            zeros = _zeros(r)
            return zeros, i0r / i0b * grow_from_outer, zeros, m * i1r / i0b * grow_from_outer
        k0r, k1r = special.k0e(x), special.k1e(x)
        i0a, k0a, k0b = special.i0e(m * a), special.k0e(m * a), special.k0e(m * b)
        decay_from_inner = np.exp(-m * (r - a))  # exp(-m r) / exp(-m a)
        cross = np.exp(-m * (b - a))
        denominator = 1.0 - i0a * k0b / (k0a * i0b) * cross**2
        g2 = (i0r / i0b * grow_from_outer
              - k0r * i0a / (i0b * k0a) * decay_from_inner * cross) / denominator
        dg2 = m * (i1r / i0b * grow_from_outer
                   + k1r * i0a / (i0b * k0a) * decay_from_inner * cross) / denominator
        if self.nodal:
            g1 = (k0r / k0a * decay_from_inner
                  - i0r * k0b / (k0a * i0b) * grow_from_outer * cross) / denominator
            dg1 = -m * (k1r / k0a * decay_from_inner
                        + i1r * k0b / (k0a * i0b) * grow_from_outer * cross) / denominator
            return g1, g2, dg1, dg2
        # m a [I0(m r) K1(m a) + K0(m r) I1(m a)]: value 1, slope 0 at r = a (Wronskian).
        i1a, k1a = special.i1e(m * a), special.k1e(m * a)
        grow_from_inner = np.exp(m * (r - a))  # at most e here
        g1 = m * a * (i0r * k1a * grow_from_inner + k0r * i1a * decay_from_inner)
        dg1 = m * m * a * (i1r * k1a * grow_from_inner - k1r * i1a * decay_from_inner)
        return g1, g2, dg1, dg2

    # -- zero order -------------------------------------------------------------------------
    def _particular(self, r: Positions) -> tuple[Positions, Positions]:
        """Zero-order particular solution vanishing at both edges, and its derivative."""
        q = self.zero_order_rate / self.diffusivity
        if not uniform_branch(q != 0.0):
            zeros = _zeros(r)
            return zeros, zeros
        a, b, n = self.inner_edge, self.outer_edge, self.exponent
        factor = q / (2.0 * (n + 1))
        if self.solid:
            return factor * (r * r - b**2), 2.0 * factor * r
        phi_out, dphi_out = self._plain_nodal(r)
        if n == 0:
            return factor * (r - a) * (r - b), factor * (2.0 * r - a - b)
        value = factor * ((r - a) * (r + a) - (b - a) * (b + a) * phi_out)
        slope = factor * (2.0 * r - (b - a) * (b + a) * dphi_out)
        return value, slope
