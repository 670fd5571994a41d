"""The Graetz problem: eigenfunction series for fully developed laminar flow in a tube.

Steady transport of a solute of diffusivity D (m^2/s) in Poiseuille flow ``u = 2 u_m (1 - eta^2)``
in a tube of radius R (m), ``eta = r/R``, axial diffusion neglected, the fluid entering at a
uniform concentration. With ``z* = z / (D_h Pe) = D z / (4 u_m R^2) = pi D z / (4 F)``
(dimensionless; F the volume flow rate, m^3/s) the equation is

    (1 - eta^2) d(theta)/dz* = (2/eta) d/d(eta) (eta d(theta)/d(eta)),

separated as ``theta = sum_n C_n R_n(eta) exp(-2 lambda_n^2 z*)`` with

    (eta R')' + lambda^2 eta (1 - eta^2) R = 0,   R'(0) = 0,

whose solution regular at the axis is the Kummer form

    R(eta; lambda) = exp(-lambda eta^2 / 2) M(1/2 - lambda/4, 1, lambda eta^2)

(M = 1F1, ``scipy.special.hyp1f1``). Wall conditions: a wall held at one concentration,
``R(1) = 0`` (Dirichlet; L. Graetz, Ann. Phys. 254 (1883) 79; W. Nusselt, Z. VDI 54 (1910)
1154); a wall of finite conductance k_w (m/s) to an outside concentration, ``R'(1) + Bi R(1) =
0`` with ``Bi = k_w R / D`` (Robin; Shah & London's T3 condition), which contains the Neumann
problem ``Bi = 0`` used for the uniform wall flux (R. Siegel, E.M. Sparrow, T.M. Hallman, Appl.
Sci. Res. A 7 (1958) 386). Coefficients follow from the orthogonality of the R_n with weight
``eta (1 - eta^2)`` and, integrating the equation once, ``lambda^2 int_0^1 eta (1-eta^2) R deta =
-R'(1)``. Mixing-cup concentration ``theta_m = 4 int_0^1 eta (1-eta^2) theta deta``; Sherwood
numbers on the hydraulic diameter ``Sh = k D_h / D`` (R.K. Shah, A.L. London, *Laminar Flow
Forced Convection in Ducts*, Academic Press, 1978, ch. 5, heat transfer read as mass transfer).

Short lengths: the Leveque asymptote (M.A. Leveque, Ann. Mines 13 (1928) 201), derived for the
linear velocity near the wall, ``Sh_x = 2 / (9^(1/3) Gamma(4/3)) z*^(-1/3)`` and the mean
``Sh_m = 3/2 Sh_x``.

Eigenvalues are found by Brent's method on brackets where the characteristic function changes
sign, on a scan finer than the spacing of the roots (about 4 for large n).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq
from scipy.special import gamma, hyp1f1

from worker.engine.lumen.inputs import LumenInputError, non_negative, positive

__all__ = [
    "FULLY_DEVELOPED_SH_UNIFORM_FLUX",
    "GraetzSeries",
    "UniformFluxSeries",
    "dimensionless_length",
    "eigenfunction",
    "eigenfunction_slope",
    "eigenvalues",
    "graetz_series",
    "layered_wall_conductance",
    "leveque_local_sherwood",
    "leveque_mean_sherwood",
    "peclet_number",
    "quadrature_norms",
    "uniform_flux_series",
    "wall_biot_number",
]

#: Sherwood number far from the inlet for a uniform wall flux, 48/11 (Shah & London 1978,
#: ch. 5; follows in closed form from the fully developed profile, see ``UniformFluxSeries``).
FULLY_DEVELOPED_SH_UNIFORM_FLUX = 48.0 / 11.0
#: Scan step for sign changes of the characteristic function (dimensionless lambda); the roots
#: are about 4 apart (n-th root near 4n + 8/3 for the Dirichlet wall: J.R. Sellars, M. Tribus,
#: J.S. Klein, Trans. ASME 78 (1956) 441, from memory, and seen in the roots found), so one step
#: holds at most one root.
SCAN_STEP = 0.5
#: Brent tolerances on lambda.
ROOT_XTOL = 1e-13
ROOT_RTOL = 4.0 * np.finfo(float).eps
#: Step in lambda of the five-point derivative in ``_norms`` (truncation ~ h^4, round-off
#: ~ 1e-16 / h): measured within 1.3e-10 of Gauss-Legendre quadrature for the first hundred
#: roots and within 1e-10 of an mpmath computation for the first six (the tests).
NORM_STEP = 1e-3
#: Gauss-Legendre points for ``quadrature_norms``: this many plus ``QUADRATURE_PER_LAMBDA``
#: per unit of the largest eigenvalue (the n-th eigenfunction squared has about 2n oscillations).
QUADRATURE_BASE = 64
QUADRATURE_PER_LAMBDA = 4


def dimensionless_length(z, flow_rate: float, diffusivity: float):
    """``z* = pi D z / (4 F)`` (dimensionless) at axial position(s) z (m), for a volume flow
    rate F (m^3/s) and diffusivity D in the fluid (m^2/s).

    Equals ``z / (D_h Pe)`` with ``Pe = u_m D_h / D`` (Shah & London 1978, ch. 1); the radius
    cancels. The inverse at the tube's length is the Graetz number in that convention.
    """
    positive("flow_rate", flow_rate)
    positive("diffusivity", diffusivity)
    return math.pi * diffusivity * np.asarray(z, dtype=float) / (4.0 * flow_rate)


def peclet_number(radius: float, flow_rate: float, diffusivity: float) -> float:
    """``Pe = u_m D_h / D = 2 F / (pi R D)`` (dimensionless); u_m = F / (pi R^2) the mean
    velocity (m/s), D_h = 2R (m). Axial diffusion is negligible against convection where Pe is
    large (Shah & London 1978, ch. 5, on neglecting axial conduction; common practice: Pe > 100).
    """
    radius = positive("radius", radius)
    flow_rate = positive("flow_rate", flow_rate)
    diffusivity = positive("diffusivity", diffusivity)
    return 2.0 * flow_rate / (math.pi * radius * diffusivity)


def wall_biot_number(conductance: float, radius: float, diffusivity: float) -> float:
    """``Bi = k_w R / D`` (dimensionless) of a wall of conductance k_w (m/s, flux per unit
    inner wall area per unit concentration difference) around a lumen of radius R (m) holding a
    fluid of diffusivity D (m^2/s). The wall Sherwood number on the diameter is ``2 Bi``."""
    conductance = non_negative("conductance", conductance)
    return conductance * positive("radius", radius) / positive("diffusivity", diffusivity)


def layered_wall_conductance(lumen_radius: float, layers) -> float:
    """Conductance k_w (m/s) per unit lumen-wall area of concentric layers without reaction.

    ``layers`` is a sequence of ``(thickness, diffusivity, partition)`` from the lumen outward
    (m, m^2/s, layer/fluid partition K). Each layer's resistance per unit tube length is
    ``ln(r_o / r_i) / (2 pi D K)`` (steady radial diffusion in a cylinder wall; J. Crank, *The
    Mathematics of Diffusion*, 2nd ed., 1975, eq. 5.5, and the thermal resistance of a
    cylindrical wall in H.S. Carslaw, J.C. Jaeger, *Conduction of Heat in Solids*, 1959, §7.2,
    by analogy); resistances in series, concentrations referred to the fluid (C/K continuous).
    ``k_w = 1 / (2 pi R_lumen sum_i resistance_i)``.
    """
    radius = positive("lumen_radius", lumen_radius)
    total = 0.0
    inner = radius
    for index, layer in enumerate(layers):
        try:
            thickness, diffusivity, partition = (float(v) for v in layer)
        except (TypeError, ValueError) as error:
            raise LumenInputError(
                f"layers[{index}]: expected (thickness, diffusivity, partition)") from error
        thickness = positive(f"layers[{index}].thickness", thickness)
        diffusivity = positive(f"layers[{index}].diffusivity", diffusivity)
        partition = positive(f"layers[{index}].partition", partition)
        outer = inner + thickness
        total += math.log(outer / inner) / (2.0 * math.pi * diffusivity * partition)
        inner = outer
    if total == 0.0:
        raise LumenInputError("layers: expected at least one layer")
    return 1.0 / (2.0 * math.pi * radius * total)


def eigenfunction(eta, lam: float):
    """``R(eta; lambda) = exp(-lambda eta^2/2) M(1/2 - lambda/4, 1, lambda eta^2)``, R(0) = 1
    (dimensionless); the solution of (eta R')' + lambda^2 eta (1-eta^2) R = 0 regular at the
    axis (Shah & London 1978, ch. 5, Kummer form)."""
    x = lam * np.asarray(eta, dtype=float) ** 2
    return np.exp(-0.5 * x) * hyp1f1(0.5 - 0.25 * lam, 1.0, x)


def eigenfunction_slope(eta, lam: float):
    """dR/d(eta) of :func:`eigenfunction`, from d/dx M(a, 1, x) = a M(a+1, 2, x) (M. Abramowitz,
    I.A. Stegun, *Handbook of Mathematical Functions*, 1964, eq. 13.4.8)."""
    eta = np.asarray(eta, dtype=float)
    a = 0.5 - 0.25 * lam
    x = lam * eta**2
    return lam * eta * np.exp(-0.5 * x) * (2.0 * a * hyp1f1(a + 1.0, 2.0, x)
                                           - hyp1f1(a, 1.0, x))


def _characteristic(lam: float, biot: float) -> float:
    value = float(eigenfunction(1.0, lam))
    if math.isinf(biot):
        return value
    slope = float(eigenfunction_slope(1.0, lam))
    if biot >= 1.0:
        return value + slope / biot
    return slope + biot * value


def eigenvalues(count: int, biot: float = math.inf) -> np.ndarray:
    """The first ``count`` positive eigenvalues lambda_0 < lambda_1 < ... (dimensionless) of
    the Graetz problem with the wall condition ``R'(1) + Bi R(1) = 0``.

    ``biot = inf`` is the wall held at one concentration (R(1) = 0), ``biot = 0`` the
    impermeable wall (R'(1) = 0; its root lambda = 0, the constant, is left out).
    Each root is bracketed on a scan of step ``SCAN_STEP`` and refined by ``brentq``.
    """
    if not isinstance(count, int | np.integer) or count < 1:
        raise LumenInputError(f"count: expected a whole number >= 1, got {count!r}")
    biot = float(biot)
    if math.isnan(biot) or biot < 0.0:
        raise LumenInputError(f"biot: expected a non-negative number or inf, got {biot!r}")
    roots: list[float] = []
    lower = 0.1 if biot == 0.0 else 0.0
    f_lower = _characteristic(lower, biot)
    while len(roots) < count:
        upper = lower + SCAN_STEP
        f_upper = _characteristic(upper, biot)
        if f_lower == 0.0:
            roots.append(lower)
        elif f_lower * f_upper < 0.0:
            roots.append(brentq(_characteristic, lower, upper, args=(biot,),
                                xtol=ROOT_XTOL, rtol=ROOT_RTOL))
        lower, f_lower = upper, f_upper
    return np.array(roots[:count])


def _norms(lams: np.ndarray) -> np.ndarray:
    """``N_n = int_0^1 eta (1 - eta^2) R_n^2 d(eta)`` from the eigenfunction at the wall:
    ``N = (dR/dlambda R' - R d(R')/dlambda) / (2 lambda)`` at eta = 1 (differentiate the
    equation in lambda, multiply by R, subtract, integrate; the identity used for Graetz norms by
    J.R. Sellars, M. Tribus, J.S. Klein, Trans. ASME 78 (1956) 441), the lambda-derivatives by
    the five-point central difference of step ``NORM_STEP``."""
    h = NORM_STEP
    offsets = np.array([-2.0, -1.0, 1.0, 2.0])
    stencil = np.array([1.0, -8.0, 8.0, -1.0]) / (12.0 * h)
    norms = []
    for lam in lams:
        shifted = lam + h * offsets
        d_value = stencil @ np.array([float(eigenfunction(1.0, x)) for x in shifted])
        d_slope = stencil @ np.array([float(eigenfunction_slope(1.0, x)) for x in shifted])
        value = float(eigenfunction(1.0, lam))
        slope = float(eigenfunction_slope(1.0, lam))
        norms.append((d_value * slope - value * d_slope) / (2.0 * lam))
    return np.array(norms)


def quadrature_norms(lams: np.ndarray) -> np.ndarray:
    """The same norms by Gauss-Legendre quadrature of ``eta (1 - eta^2) R^2`` (a second route;
    slower for many terms)."""
    points = QUADRATURE_BASE + QUADRATURE_PER_LAMBDA * int(math.ceil(float(np.max(lams))))
    nodes, weights = np.polynomial.legendre.leggauss(points)
    eta = 0.5 * (nodes + 1.0)
    weights = 0.5 * weights * eta * (1.0 - eta**2)
    return np.array([np.dot(weights, eigenfunction(eta, lam) ** 2) for lam in lams])


@dataclass(frozen=True)
class GraetzSeries:
    """The series for an inlet at uniform concentration and a wall held at, or conducting to,
    one outside concentration: ``theta = (c - c_out) / (c_in - c_out)`` (dimensionless).

    Attributes
    ----------
    biot : float
        Wall Biot number k_w R / D (inf: wall held at c_out).
    eigenvalues : numpy.ndarray
        lambda_n.
    coefficients : numpy.ndarray
        C_n = (-R_n'(1) / lambda_n^2) / N_n (projection of theta = 1 at the inlet).
    wall_values, wall_slopes : numpy.ndarray
        R_n(1) and R_n'(1).
    """

    biot: float
    eigenvalues: np.ndarray
    coefficients: np.ndarray
    wall_values: np.ndarray
    wall_slopes: np.ndarray

    def _decay(self, z_star) -> np.ndarray:
        z = np.atleast_1d(np.asarray(z_star, dtype=float))
        if np.any(~np.isfinite(z)) or np.any(z < 0.0):
            raise LumenInputError(f"z_star: expected non-negative finite values, got {z_star!r}")
        return np.exp(-2.0 * np.outer(z, self.eigenvalues**2))

    def mixing_cup(self, z_star) -> np.ndarray:
        """theta_m(z*) = 4 sum_n C_n (-R_n'(1) / lambda_n^2) exp(-2 lambda_n^2 z*)."""
        weights = 4.0 * self.coefficients * (-self.wall_slopes) / self.eigenvalues**2
        return self._decay(z_star) @ weights

    def wall(self, z_star) -> np.ndarray:
        """theta at the fluid side of the wall, sum_n C_n R_n(1) exp(...) (0 for Dirichlet)."""
        return self._decay(z_star) @ (self.coefficients * self.wall_values)

    def wall_gradient(self, z_star) -> np.ndarray:
        """-d(theta)/d(eta) at the wall: the wall flux as ``j R / (D (c_in - c_out))``."""
        return self._decay(z_star) @ (self.coefficients * (-self.wall_slopes))

    def local_sherwood(self, z_star) -> np.ndarray:
        """Local Sherwood number on the fluid side, ``2 (-theta_eta(1)) / (theta_m - theta_w)``
        (referred to the mixing-cup minus the fluid's wall concentration)."""
        return (2.0 * self.wall_gradient(z_star)
                / (self.mixing_cup(z_star) - self.wall(z_star)))

    def overall_local_sherwood(self, z_star) -> np.ndarray:
        """Local Sherwood number referred to the mixing-cup minus the outside concentration,
        ``2 (-theta_eta(1)) / theta_m`` (equals ``local_sherwood`` for a Dirichlet wall)."""
        return 2.0 * self.wall_gradient(z_star) / self.mixing_cup(z_star)

    def mean_sherwood(self, z_star) -> np.ndarray:
        """Mean (log-mean) Sherwood number over [0, z*] referred to the outside concentration,
        ``-ln(theta_m) / (4 z*)`` (from F dc_m/dz = -2 pi R k (c_m - c_out); Shah & London 1978,
        ch. 5)."""
        z = np.atleast_1d(np.asarray(z_star, dtype=float))
        if np.any(z <= 0.0):
            raise LumenInputError("z_star: expected positive values for a mean Sherwood number")
        return -np.log(self.mixing_cup(z)) / (4.0 * z)

    def fully_developed_sherwood(self) -> float:
        """Large-z* limit of ``local_sherwood``: the first term alone."""
        lam, value, slope = self.eigenvalues[0], self.wall_values[0], self.wall_slopes[0]
        mixing = 4.0 * (-slope) / lam**2
        return float(2.0 * (-slope) / (mixing - value))

    def smallest_z_star(self, tolerance: float = 1e-12) -> float:
        """z* above which the first omitted term, with a unit coefficient, is below
        ``tolerance``: ``ln(1/tolerance) / (2 lambda_next^2)``, lambda_next taken 4 above the
        last root (their spacing). Below it the truncated series is not to be trusted."""
        lam_next = self.eigenvalues[-1] + 4.0
        return math.log(1.0 / tolerance) / (2.0 * lam_next**2)


def graetz_series(count: int = 40, biot: float = math.inf) -> GraetzSeries:
    """The first ``count`` terms of the Graetz series for the wall ``R'(1) + Bi R(1) = 0``."""
    lams = eigenvalues(count, biot)
    values = np.array([float(eigenfunction(1.0, lam)) for lam in lams])
    slopes = np.array([float(eigenfunction_slope(1.0, lam)) for lam in lams])
    if math.isinf(float(biot)):
        values = np.zeros_like(values)
    coefficients = (-slopes / lams**2) / _norms(lams)
    return GraetzSeries(float(biot), lams, coefficients, values, slopes)


@dataclass(frozen=True)
class UniformFluxSeries:
    """Uniform wall flux j (mol/(m^2 s), into the fluid) from the inlet on, inlet at c_in:
    ``phi = (c - c_in) D / (j R)`` (dimensionless).

    Fully developed part: ``phi = 8 z* + psi(eta)``, ``psi = eta^2 - eta^4/4 - 7/24`` (mixing-cup
    of psi zero, psi'(1) = 1, psi(1) = 11/24, hence Sh = 2 / (11/24) = 48/11). Entrance part on
    the Neumann eigenfunctions (biot = 0): ``phi_w - phi_m = 11/24 - sum_n R_n(1)^2 /
    (lambda_n^2 N_n) exp(-2 lambda_n^2 z*)`` (Siegel, Sparrow & Hallman 1958; the projection
    of -psi on R_n is -R_n(1) / (lambda_n^2 N_n), by two integrations by parts).
    """

    eigenvalues: np.ndarray
    weights: np.ndarray

    def mixing_cup(self, z_star) -> np.ndarray:
        """phi_m = 8 z* (the mass balance, exactly)."""
        return 8.0 * np.atleast_1d(np.asarray(z_star, dtype=float))

    def wall_minus_mixing_cup(self, z_star) -> np.ndarray:
        z = np.atleast_1d(np.asarray(z_star, dtype=float))
        if np.any(~np.isfinite(z)) or np.any(z < 0.0):
            raise LumenInputError(f"z_star: expected non-negative finite values, got {z_star!r}")
        return 11.0 / 24.0 - np.exp(-2.0 * np.outer(z, self.eigenvalues**2)) @ self.weights

    def wall(self, z_star) -> np.ndarray:
        return self.mixing_cup(z_star) + self.wall_minus_mixing_cup(z_star)

    def local_sherwood(self, z_star) -> np.ndarray:
        """Sh_x = 2 / (phi_w - phi_m)."""
        return 2.0 / self.wall_minus_mixing_cup(z_star)


def uniform_flux_series(count: int = 40) -> UniformFluxSeries:
    """The first ``count`` entrance terms of the uniform-wall-flux series."""
    lams = eigenvalues(count, 0.0)
    values = np.array([float(eigenfunction(1.0, lam)) for lam in lams])
    return UniformFluxSeries(lams, values**2 / (lams**2 * _norms(lams)))


def leveque_local_sherwood(z_star):
    """Leveque 1928, wall held at one concentration, short lengths:
    ``Sh_x = 2 / (9^(1/3) Gamma(4/3)) z*^(-1/3)`` (about 1.077 z*^(-1/3); Shah & London 1978,
    ch. 5, quote 1.077)."""
    z = np.asarray(z_star, dtype=float)
    return 2.0 / (9.0 ** (1.0 / 3.0) * gamma(4.0 / 3.0)) * z ** (-1.0 / 3.0)


def leveque_mean_sherwood(z_star):
    """Mean over [0, z*] of :func:`leveque_local_sherwood`: 3/2 of the local value (about
    1.615 z*^(-1/3))."""
    return 1.5 * leveque_local_sherwood(z_star)
