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
