"""Shared by the lumen tests: the checks they make, each a function of the computed value, and
the proof that a check fails when an error is injected into that value, in both directions."""

from __future__ import annotations

import mpmath
import numpy as np


def within(reference, rtol: float, atol: float = 0.0):
    """A check: |value - reference| <= atol + rtol |reference| everywhere."""
    reference = np.asarray(reference, dtype=float)

    def check(value) -> bool:
        value = np.asarray(value, dtype=float)
        return bool(np.all(np.abs(value - reference) <= atol + rtol * np.abs(reference)))

    return check


def assert_check_and_injection(check, value, error: float) -> None:
    """``check(value)`` passes, and fails on value * (1 + error) and value * (1 - error)."""
    value = np.asarray(value, dtype=float)
    assert check(value), f"the check fails on the computed value {value!r}"
    for sign in (1.0, -1.0):
        injected = value * (1.0 + sign * error)
        assert not check(injected), f"the check passes with an injected error {sign * error:+g}"


#: Relative closure of the lumen's global mass balance: the marching scheme conserves exactly,
#: so only round-off remains (measured: at most 8e-14 over 300 drawn cases on 24 x 24 meshes).
BALANCE_RTOL = 1e-10


def balance_closes(tube, outlet_mixing_cup: float, through_wall: float) -> bool:
    """F c_in - F c_m(L) = what crossed the wall (mol/s), within ``BALANCE_RTOL``; the rates
    at the ends from the tube's F, not from the solver's cell weights."""
    entering = tube.flow_rate * tube.inlet
    leaving = tube.flow_rate * outlet_mixing_cup
    scale = max(abs(entering), abs(leaving), abs(through_wall))
    return abs(entering - leaving - through_wall) <= BALANCE_RTOL * scale


# --- an independent route to the Graetz eigenfunctions: the power series about the axis ------
# R(eta) = sum_k c_k eta^(2k), c_0 = 1, c_k = lambda^2 (c_(k-2) - c_(k-1)) / (4 k^2), from
# (eta R')' + lambda^2 eta (1 - eta^2) R = 0 term by term (Frobenius; the route of G.M. Brown,
# AIChE J. 6 (1960) 179), summed in mpmath at 40 digits, not the Kummer form the engine uses.

def _terms(lam) -> int:
    """Terms enough for eta <= 1: the coefficients fall like lambda^k / (2^k k!) once k passes
    about lambda/2, so 2 lambda + 60 reach far below 40 digits."""
    return int(2 * abs(float(lam))) + 60


def series_coefficients(lam, terms: int | None = None):
    lam2 = mpmath.mpf(lam) ** 2
    c = [mpmath.mpf(1), -lam2 / 4]
    for k in range(2, terms or _terms(lam)):
        c.append(lam2 * (c[k - 2] - c[k - 1]) / (4 * k * k))
    return c


def series_value(lam, eta=1, terms: int | None = None):
    with mpmath.workdps(mpmath.mp.dps + int(abs(float(lam)))):
        eta2 = mpmath.mpf(eta) ** 2
        total = mpmath.fsum(ck * eta2**k for k, ck in enumerate(series_coefficients(lam, terms)))
    return +total


def series_slope(lam, eta=1, terms: int | None = None):
    with mpmath.workdps(mpmath.mp.dps + int(abs(float(lam)))):
        eta = mpmath.mpf(eta)
        total = mpmath.fsum(2 * k * ck * eta ** (2 * k - 1)
                            for k, ck in enumerate(series_coefficients(lam, terms)) if k > 0)
    return +total


def series_root(characteristic, guess):
    """A root of ``characteristic(lambda)`` (mpmath.findroot, secant from ``guess``)."""
    return mpmath.findroot(characteristic, mpmath.mpf(guess))


def series_norm(lam, terms: int | None = None):
    """int_0^1 eta (1 - eta^2) R^2 d(eta), exactly on the squared polynomial:
    int_0^1 eta (1 - eta^2) eta^(2m) d(eta) = 1/(2m + 2) - 1/(2m + 4). The largest terms grow
    like e^lambda and cancel, so lambda/2 more digits are carried (the caller's precision
    plus the cancellation)."""
    with mpmath.workdps(mpmath.mp.dps + int(abs(float(lam)))):
        c = series_coefficients(lam, terms or _terms(lam))
        total = mpmath.mpf(0)
        for i, ci in enumerate(c):
            for k, ck in enumerate(c):
                m = i + k
                total += ci * ck * (mpmath.mpf(1) / (2 * m + 2) - mpmath.mpf(1) / (2 * m + 4))
    return +total


# --- Hill's depletion front in a fibre wall and a layer of cells around a lumen ---------------
#: Lumen radius, wall and cell-layer thicknesses (m) of the layered-front checks (invented).
R, T1, T2 = 100e-6, 50e-6, 300e-6


def _hill_shape(r, s):
    r, s = mpmath.mpf(r), mpmath.mpf(s)
    return s**2 / 2 * mpmath.log(s / r) - (s**2 - r**2) / 4


def hill_level(q, s, d1, d2, k1, k2, first_reacts=True):
    """C(R)/K_1 for a front at s (A.V. Hill, Proc. R. Soc. B 104 (1928) 39; J. Crank, *The
    Mathematics of Diffusion*, 2nd ed., 1975, ch. 14): the integral of J / (D K) from R to s,
    with r J(r) = Q (s^2 - r^2) / 2 where both layers consume Q, each layer's part
    (Q / (D K)) [F(a; s) - F(b; s)], F(r; s) = (s^2 / 2) ln(s / r) - (s^2 - r^2) / 4. With
    ``first_reacts`` False only the cells consume: r J in the wall is Q (s^2 - r1^2) / 2."""
    q, r1 = mpmath.mpf(q), mpmath.mpf(R + T1)
    s = mpmath.mpf(s)
    if s <= r1:
        return q / (d1 * k1) * _hill_shape(R, s)
    cells = q / (d2 * k2) * _hill_shape(r1, s)
    if first_reacts:
        return q / (d1 * k1) * (_hill_shape(R, s) - _hill_shape(r1, s)) + cells
    return q * (s**2 - r1**2) / (2 * d1 * k1) * mpmath.log(r1 / R) + cells


def hill_front(q, c_wall, d1=1e-10, d2=1.5e-9, k1=1.0, k2=1.0, first_reacts=True):
    """(front s, outward flux at R, consumption per radian) from the front equation, solved at
    60 digits whatever the caller's precision (F cancels to about 1e-16 of itself when the
    front lies within 1e-11 m of the face)."""
    with mpmath.workdps(60):
        low = mpmath.mpf(R) * (1 + mpmath.mpf(10) ** -12) if first_reacts else mpmath.mpf(R + T1)
        s = mpmath.findroot(
            lambda x: hill_level(q, x, d1, d2, k1, k2, first_reacts) - c_wall,
            (low, mpmath.mpf(R + T1 + T2)), solver="anderson", maxsteps=400)
        # the consumption from the front; the flux at R from r J = Q (s^2 - r^2)/2 (or less
        # the wall's share when the wall does not consume)
        q = mpmath.mpf(q)
        consumed = q * (s**2 - (R**2 if first_reacts else (R + T1) ** 2)) / 2
        return float(s), float(consumed / R), float(consumed)
