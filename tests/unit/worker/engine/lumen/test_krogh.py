"""The Krogh cylinder (worker.engine.lumen.krogh): the Krogh-Erlang profile and the linear fall
of the mixing-cup concentration along a capillary feeding zero-order uptake.

Sources: A. Krogh, J. Physiol. 52 (1919) 409-415 (the tissue cylinder and K. Erlang's formula);
the profile is checked against scipy.integrate.solve_bvp on the same boundary-value problem and
its residual in the ODE by mpmath.diff; the linear fall is the mass balance F dC_m/dz = -Q pi
(R_t^2 - R_c^2), against the marching solver with that uniform wall flux; far from the inlet the
gap between mixing cup and wall is j D_h / (Sh D) with Sh = 48/11 (Shah & London 1978, ch. 5).
Dimensions are invented scenario values (a capillary of 4 um radius in a 25 um tissue
cylinder), not check values.
"""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest
from scipy.integrate import solve_bvp

from tests.lumen_checks import assert_check_and_injection, within
from worker.engine.lumen.inputs import LumenInputError
from worker.engine.lumen.krogh import (
    krogh_erlang_profile,
    krogh_mixing_cup,
    krogh_tissue_minimum,
    krogh_uptake_per_length,
    krogh_wall_flux,
)
from worker.engine.lumen.marching import Tube, UniformFluxWall, march

R_C, R_T = 4e-6, 25e-6          # m (invented)
D_TISSUE, D_FLUID = 1.5e-9, 2.0e-9  # m^2/s (invented)
Q = 2e-2                       # mol/(m^3 s) (invented)
C_WALL = 0.12                  # mol/m^3 (invented)


def test_krogh_erlang_profile_against_solve_bvp():
    """D (1/r)(r c')' = Q, c(R_c) = c_0, c'(R_t) = 0, solved by scipy's collocation BVP solver
    on its own, scaled: s = r/R_t, u = (c - c_0) D / (Q R_t^2), u'' + u'/s = 1."""
    def rhs(s, y):
        return np.vstack([y[1], 1.0 - y[1] / s])

    def bc(ya, yb):
        return np.array([ya[0], yb[1]])

    s = np.linspace(R_C / R_T, 1.0, 201)
    bvp = solve_bvp(rhs, bc, s, np.zeros((2, s.size)), tol=1e-10, max_nodes=100000)
    assert bvp.success, bvp.message
    scale = Q * R_T**2 / D_TISSUE
    independent = C_WALL + scale * bvp.sol(s)[0]
    profile = krogh_erlang_profile(s * R_T, R_C, R_T, D_TISSUE, Q, C_WALL)
    drop = C_WALL - profile[-1]
    assert_check_and_injection(within(independent - C_WALL, 1e-8, atol=1e-10 * drop),
                               profile - C_WALL, 1e-5)


def test_krogh_erlang_profile_satisfies_the_ode_by_mpmath():
    """Residual of D (1/r)(r c')' - Q by mpmath.diff at 30 digits, the zero gradient at R_t,
    and the engine's values against the same formula summed in mpmath."""
    with mpmath.workdps(30):
        q, d, r_c, r_t = (mpmath.mpf(x) for x in (Q, D_TISSUE, R_C, R_T))

        def c(r):
            return (C_WALL + q / (4 * d) * (r**2 - r_c**2)
                    - q * r_t**2 / (2 * d) * mpmath.log(r / r_c))

        for r in (R_C, 0.5 * (R_C + R_T), R_T):
            r = mpmath.mpf(r)
            laplacian = mpmath.diff(c, r, 2) + mpmath.diff(c, r) / r
            assert abs(d * laplacian - q) < 1e-15 * q
            # the same residual of a profile with its uptake term off by 1e-6, either way
            for sign in (1, -1):
                def wrong(r, sign=sign):
                    return c(r) + sign * mpmath.mpf("1e-6") * q / (4 * d) * r**2
                off = mpmath.diff(wrong, r, 2) + mpmath.diff(wrong, r) / r
                assert abs(d * off - q) > 1e-15 * q
            assert float(krogh_erlang_profile(float(r), R_C, R_T, D_TISSUE, Q, C_WALL)) == \
                pytest.approx(float(c(r)), rel=1e-13)
        assert abs(mpmath.diff(c, r_t)) < 1e-20 * q * r_t / d
        independent = float(c(r_t))
    engine_end = krogh_tissue_minimum(R_C, R_T, D_TISSUE, Q, C_WALL)
    assert_check_and_injection(within(independent, 1e-13), engine_end, 1e-9)
    r = np.linspace(R_C, R_T, 101)
    assert engine_end == pytest.approx(krogh_erlang_profile(r, R_C, R_T, D_TISSUE, Q,
                                                            C_WALL).min(), rel=1e-14)


def test_linear_fall_of_the_mixing_cup_against_the_marching_solver():
    """Uniform wall flux j = Q (R_t^2 - R_c^2)/(2 R_c): the marching solver's mixing cup falls
    linearly, C_m = C_in - Q pi (R_t^2 - R_c^2) z / F (mass balance, exact on any mesh since the
    scheme conserves), and far from the inlet c_m - c_w = j (2 R_c) / (Sh D) with Sh = 48/11."""
    flow = 5e-13  # m^3/s (invented; the mixing cup falls by about 60 %)
    length = 1.2e-3
    inlet = 0.15
    tube = Tube(R_C, length, flow, D_FLUID, inlet)
    j = krogh_wall_flux(R_C, R_T, Q)
    assert_check_and_injection(within(Q * math.pi * (R_T**2 - R_C**2), 1e-14),
                               krogh_uptake_per_length(R_C, R_T, Q), 1e-12)
    assert_check_and_injection(within(Q * (R_T**2 - R_C**2) / (2 * R_C), 1e-14), j, 1e-12)
    solution = march(tube, UniformFluxWall(j), 64, 64)
    exact = krogh_mixing_cup(solution.position, inlet, flow, R_C, R_T, Q)
    assert_check_and_injection(within(exact, 1e-12), solution.mixing_cup, 1e-9)
    assert tube.z_star(length) > 0.3  # long enough to be fully developed
    gap = solution.mixing_cup[-1] - solution.wall[-1]
    assert_check_and_injection(within(j * 2 * R_C / (48 / 11 * D_FLUID), 2e-3), gap, 1e-2)


@pytest.mark.parametrize("call, field", [
    (lambda: krogh_wall_flux(R_C, R_C, Q), "tissue_radius"),
    (lambda: krogh_wall_flux(0.0, R_T, Q), "capillary_radius"),
    (lambda: krogh_uptake_per_length(R_C, R_T, -1.0), "uptake"),
    (lambda: krogh_erlang_profile(R_T * 2, R_C, R_T, D_TISSUE, Q, C_WALL), "r"),
    (lambda: krogh_erlang_profile(R_C, R_C, R_T, 0.0, Q, C_WALL), "diffusivity"),
    (lambda: krogh_mixing_cup(-1.0, 1.0, 1e-15, R_C, R_T, Q), "z"),
    (lambda: krogh_mixing_cup(1.0, 1.0, 0.0, R_C, R_T, Q), "flow_rate"),
])
def test_bad_input_names_the_field(call, field):
    with pytest.raises(LumenInputError, match=field):
        call()
