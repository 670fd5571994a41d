"""The Graetz series (worker.engine.lumen.graetz) against an independent computation and the
published values.

Independent route: the power series of the eigenfunction about the axis summed in mpmath at 40
digits (tests/lumen_checks.py; G.M. Brown, AIChE J. 6 (1960) 179, for the method), its roots by
mpmath.findroot from the asymptotic guesses 4n + 8/3 (Dirichlet) and 4n + 4/3 (Neumann) of
J.R. Sellars, M. Tribus, J.S. Klein, Trans. ASME 78 (1956) 441 (from memory), the norms exactly
on the squared polynomial. The engine uses the Kummer form (scipy.special.hyp1f1), Gauss-Legendre
norms and Brent's method.

Recalled table values (marked "from memory"): R.K. Shah, A.L. London, *Laminar Flow Forced
Convection in Ducts*, 1978, ch. 5 (Graetz eigenvalues and constants G_n for the wall at one
temperature; Nu = 3.657 and 48/11 = 4.364 far from the inlet; Leveque's 1.077 and 1.615 with the
correction -0.7 at short lengths) and R. Siegel, E.M. Sparrow, T.M. Hallman, Appl. Sci. Res. A 7
(1958) 386 (eigenvalues of the impermeable wall, for the uniform wall flux).
"""

from __future__ import annotations

import math

import ht
import mpmath
import numpy as np
import pytest

from tests.lumen_checks import (
    assert_check_and_injection,
    series_norm,
    series_root,
    series_slope,
    series_value,
    within,
)
from worker.engine.convergence import grid_study
from worker.engine.lumen.graetz import (
    _norms,
    dimensionless_length,
    eigenfunction,
    eigenvalues,
    graetz_series,
    layered_wall_conductance,
    leveque_local_sherwood,
    leveque_mean_sherwood,
    peclet_number,
    quadrature_norms,
    uniform_flux_series,
    wall_biot_number,
)
from worker.engine.lumen.inputs import LumenInputError


@pytest.fixture(autouse=True)
def _mpmath_precision():
    with mpmath.workdps(40):
        yield


@pytest.fixture(scope="module")
def dirichlet():
    return graetz_series(60)


def _independent_roots(characteristic, first_guess, count):
    return [float(series_root(characteristic, first_guess + 4 * n)) for n in range(count)]


# Shah & London 1978, ch. 5, Graetz eigenvalues lambda_0..lambda_4 (from memory).
RECALLED_DIRICHLET = [2.7043644, 6.6790315, 10.6733795, 14.6710785, 18.6698719]
# Shah & London 1978, ch. 5, G_n = -(C_n/2) R_n'(1) (from memory).
RECALLED_G = [0.7487756, 0.5438280, 0.4628611, 0.4154185, 0.3829192]
# Siegel, Sparrow & Hallman 1958, eigenvalues of R'(1) = 0 (from memory, 4 decimals).
RECALLED_NEUMANN = [5.0675, 9.1576, 13.1972, 17.2202]


def test_dirichlet_eigenvalues_against_the_power_series_and_the_table():
    engine = eigenvalues(5)
    independent = _independent_roots(lambda lam: series_value(lam), 8 / 3, 5)
    check_independent = within(independent, 1e-12)
    assert_check_and_injection(check_independent, engine, 1e-9)
    check_table = within(RECALLED_DIRICHLET, 0.0, atol=2e-7)  # table to 7 decimals
    assert_check_and_injection(check_table, engine, 1e-6)


def test_dirichlet_constants_g_against_the_power_series_and_the_table(dirichlet):
    g_engine = -0.5 * dirichlet.coefficients[:5] * dirichlet.wall_slopes[:5]
    g_independent = []
    for lam in _independent_roots(lambda lam: series_value(lam), 8 / 3, 5):
        lam = mpmath.mpf(lam)
        slope = series_slope(lam)
        coefficient = (-slope / lam**2) / series_norm(lam)
        g_independent.append(float(-coefficient * slope / 2))
    assert_check_and_injection(within(g_independent, 1e-9), g_engine, 1e-7)
    assert_check_and_injection(within(RECALLED_G, 0.0, atol=2e-6), g_engine, 1e-4)


@pytest.mark.parametrize("biot", [math.inf, 0.0, 3.0])
def test_norms_against_the_power_series_and_quadrature(biot):
    """The engine's norms (from the wall values and their lambda-derivatives) against the
    squared power series integrated exactly (mpmath) for the first six roots, and against
    Gauss-Legendre quadrature of the Kummer form for the first sixty."""
    lams = eigenvalues(60, biot)
    engine = _norms(lams)
    independent = [float(series_norm(mpmath.mpf(lam))) for lam in lams[:6]]
    assert_check_and_injection(within(independent, 1e-10), engine[:6], 1e-8)
    assert_check_and_injection(within(quadrature_norms(lams), 1e-9), engine, 1e-7)


def test_neumann_eigenvalues_against_the_power_series_and_the_table():
    engine = eigenvalues(4, biot=0.0)
    independent = _independent_roots(lambda lam: series_slope(lam), 4 / 3 + 4, 4)
    assert_check_and_injection(within(independent, 1e-12), engine, 1e-9)
    assert_check_and_injection(within(RECALLED_NEUMANN, 0.0, atol=6e-5), engine, 1e-4)


@pytest.mark.parametrize("biot", [0.05, 0.7, 6.0])
def test_robin_eigenvalues_against_the_power_series(biot):
    """R'(1) + Bi R(1) = 0; guesses from the engine's own scan are not used: the first root
    lies between the Neumann and the Dirichlet ones, so findroot starts from their midpoint."""
    engine = eigenvalues(4, biot=biot)
    independent = []
    for n in range(4):
        low = 0.0 if n == 0 else float(series_root(lambda lam: series_slope(lam), 4 * n + 4 / 3))
        high = float(series_root(lambda lam: series_value(lam), 4 * n + 8 / 3))
        independent.append(float(mpmath.findroot(
            lambda lam: series_slope(lam) + biot * series_value(lam), (low + 1e-9, high),
            solver="anderson")))
    assert_check_and_injection(within(independent, 1e-11), engine, 1e-8)


def test_robin_wall_with_biot_two_has_a_closed_form_first_mode():
    """R = exp(-eta^2) solves (eta R')' + 4 eta (1 - eta^2) R = 0 and meets R'(1) + 2 R(1) = 0
    (by substitution: (eta R')' = (4 eta^3 - 4 eta) exp(-eta^2)), so at Bi = 2 the first root
    is lambda_0 = 2 and the fully developed fluid-side Sherwood number is
    2 (-R'(1)) / (4 (-R'(1))/lambda^2 - R(1)) = 4 exactly."""
    series = graetz_series(10, biot=2.0)
    assert_check_and_injection(within(2.0, 1e-13), series.eigenvalues[0], 1e-10)
    eta = np.linspace(0.0, 1.0, 11)
    assert_check_and_injection(within(np.exp(-eta**2), 1e-13, atol=1e-15),
                               eigenfunction(eta, series.eigenvalues[0]), 1e-10)
    assert_check_and_injection(within(4.0, 1e-12), series.fully_developed_sherwood(), 1e-9)
    assert_check_and_injection(within(4.0, 1e-12), series.local_sherwood(3.0)[0], 1e-9)


def test_eigenfunction_zero_count_orders_the_roots():
    """Sturm-Liouville: the n-th eigenfunction has n zeros in (0, 1) (common practice)."""
    eta = np.linspace(0.0, 1.0 - 1e-9, 4001)

    def zeros(lam):
        return np.count_nonzero(np.diff(np.sign(eigenfunction(eta, lam))) != 0)

    lams = eigenvalues(9)
    for n, lam in enumerate(lams[:8]):
        assert zeros(lam) == n
        assert zeros(lams[n + 1]) != n  # a root skipped by the scan would be seen


def test_fully_developed_sherwood_wall_at_one_concentration(dirichlet):
    """Large z*: the series' local Sherwood number tends to lambda_0^2/2 (its first term alone),
    3.657 in Shah & London 1978 (from memory)."""
    lam0 = float(series_root(lambda lam: series_value(lam), 8 / 3))
    far = float(dirichlet.local_sherwood(2.0)[0])
    assert_check_and_injection(within(lam0**2 / 2, 1e-12), far, 1e-9)
    assert_check_and_injection(within(3.657, 0.0, atol=5e-4), far, 1e-3)
    mean_far = float(dirichlet.mean_sherwood(50.0)[0])  # the log-mean tends to it too
    assert_check_and_injection(within(lam0**2 / 2, 2e-3), mean_far, 5e-3)


def test_fully_developed_sherwood_uniform_flux():
    """Large z*: 2 / (11/24) = 48/11 (Shah & London 1978, from the fully developed profile)."""
    series = uniform_flux_series(60)
    far = float(series.local_sherwood(2.0)[0])
    assert_check_and_injection(within(48 / 11, 1e-12), far, 1e-9)
    assert_check_and_injection(within(4.364, 0.0, atol=5e-4), far, 1e-3)


def test_uniform_flux_entrance_sum_tends_to_the_fully_developed_gap():
    """At the inlet the wall and mixing-cup concentrations coincide, so the entrance weights sum
    to 11/24 (Siegel, Sparrow & Hallman 1958). The partial sums of 40, 80 and 160 terms,
    extrapolated as a three-grid study in the number of terms (Celik et al. 2008 through
    convergence.grid_study; the remainder falls like n^(-2/3), measured order 0.658), land on
    11/24 within 0.1 % (measured 0.04 %)."""
    sums = [uniform_flux_series(count).weights.sum() for count in (160, 80, 40)]
    study = grid_study(sums, cells=(160, 80, 40))
    assert study.convergence == "monotonic" and abs(study.apparent_order - 2 / 3) < 0.05
    assert_check_and_injection(within(11 / 24, 1e-3), study.extrapolated, 5e-3)


def test_short_lengths_against_the_leveque_fits(dirichlet):
    """Shah & London 1978 quote Leveque's asymptote with a correction fitted for short lengths,
    Sh_x = 1.077 z*^(-1/3) - 0.7 (z* <= 0.01) and Sh_m = 1.615 z*^(-1/3) - 0.7 (z* <= 0.005)
    (from memory; a fit, so compared within 1.5 %). The leading constants are Leveque's closed
    form 2 / (9^(1/3) Gamma(4/3)) = 1.0767 and 3/2 of it."""
    z = np.array([3e-4, 6e-4, 1e-3])
    assert np.all(z > dirichlet.smallest_z_star())
    local = dirichlet.local_sherwood(z)
    assert_check_and_injection(within(1.077 * z ** (-1 / 3) - 0.7, 0.015), local, 0.03)
    mean = dirichlet.mean_sherwood(z)
    assert_check_and_injection(within(1.615 * z ** (-1 / 3) - 0.7, 0.015), mean, 0.03)
    leading = float(leveque_local_sherwood(1.0))
    assert_check_and_injection(within(2 / (9 ** (1 / 3) * math.gamma(4 / 3)), 1e-14), leading,
                               1e-12)
    assert_check_and_injection(within(1.077, 0.0, atol=5e-4), leading, 1e-3)
    assert_check_and_injection(within(1.5 * leading, 1e-14), leveque_mean_sherwood(1.0), 1e-12)


def test_robin_wall_without_resistance_is_the_dirichlet_wall(dirichlet):
    """Bi -> inf: the Robin series tends to the wall held at one concentration (a limit of the
    problem's statement)."""
    z = np.array([1e-3, 1e-2, 0.1, 0.5])
    reference = dirichlet.mixing_cup(z)
    differences = []
    for biot in (1e2, 1e4, 1e6):
        robin = graetz_series(60, biot=biot).mixing_cup(z)
        differences.append(np.max(np.abs(robin / reference - 1)))
    assert differences[0] > differences[1] > differences[2]
    close = graetz_series(60, biot=1e8).mixing_cup(z)
    assert_check_and_injection(within(reference, 1e-6), close, 1e-5)


def test_robin_mixing_cup_at_the_inlet_is_one_and_decreasing():
    """theta_m(0) = 1 (the inlet; the 60-term series reaches it to 2e-3, the truncation of a
    series for a discontinuous start), and theta_m falls along the tube."""
    series = graetz_series(60, biot=2.0)
    values = series.mixing_cup([0.0, 1e-3, 1e-2, 0.1, 1.0])
    assert_check_and_injection(within(1.0, 0.0, atol=2e-3), values[0], 1e-2)
    assert np.all(np.diff(values) < 0)


def test_layered_wall_conductance_against_ht_cylinder_resistance():
    """ht.R_cylinder(Di, Do, k, L) = ln(Do/Di) / (2 pi k L) (thermal resistance of a cylindrical
    wall; Carslaw & Jaeger 1959 §7.2), read for mass with k = D K and L = 1 m."""
    layers = [(20e-6, 1e-10, 0.5), (80e-6, 4e-10, 1.2)]
    r = 100e-6
    resistance = 0.0
    inner = r
    for thickness, d, k in layers:
        resistance += ht.R_cylinder(2 * inner, 2 * (inner + thickness), d * k, 1.0)
        inner += thickness
    reference = 1.0 / (2 * math.pi * r * resistance)
    assert_check_and_injection(within(reference, 1e-12), layered_wall_conductance(r, layers), 1e-9)
    assert_check_and_injection(within(2.0 * 1e-4 / 1e-9, 1e-14), wall_biot_number(2.0, 1e-4, 1e-9),
                               1e-12)


def test_dimensionless_groups_from_their_definitions():
    """z* = z / (D_h Pe), Pe = u_m D_h / D (Shah & London 1978, ch. 1)."""
    r, f, d, z = 1e-4, 3e-10, 2e-9, 0.05
    u_m = f / (math.pi * r**2)
    pe = u_m * 2 * r / d
    assert_check_and_injection(within(pe, 1e-14), peclet_number(r, f, d), 1e-12)
    assert_check_and_injection(within(z / (2 * r * pe), 1e-14), dimensionless_length(z, f, d),
                               1e-12)


@pytest.mark.parametrize("call, field", [
    (lambda: eigenvalues(0), "count"),
    (lambda: eigenvalues(3, biot=-1.0), "biot"),
    (lambda: graetz_series(5).mixing_cup(-1.0), "z_star"),
    (lambda: graetz_series(5).mean_sherwood(0.0), "z_star"),
    (lambda: peclet_number(0.0, 1.0, 1.0), "radius"),
    (lambda: dimensionless_length(1.0, -1.0, 1.0), "flow_rate"),
    (lambda: layered_wall_conductance(1e-4, [(1e-5, 0.0, 1.0)]), "layers[0].diffusivity"),
    (lambda: layered_wall_conductance(1e-4, []), "layers"),
    (lambda: wall_biot_number(float("nan"), 1.0, 1.0), "conductance"),
])
def test_bad_input_names_the_field(call, field):
    with pytest.raises(LumenInputError, match=field.replace("[", r"\[").replace("]", r"\]")):
        call()
