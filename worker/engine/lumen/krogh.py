"""The Krogh cylinder: a capillary of radius R_c (m) feeding a coaxial tissue annulus out to R_t
(m) that consumes the solute at a zero-order rate Q (mol/(m^3 s)), with no flux at R_t (the
neighbouring cylinders' symmetry) and no axial diffusion in the tissue.

Radial profile (the Krogh-Erlang solution; A. Krogh, "The number and distribution of
capillaries in muscles with calculations of the oxygen pressure head necessary for supplying
the tissue", J. Physiol. 52 (1919) 409-415, with K. Erlang's formula), from
``D (1/r) (r c')' = Q``, ``c(R_c) = c_0``, ``c'(R_t) = 0``:

    c(r) = c_0 + Q/(4 D) (r^2 - R_c^2) - Q R_t^2/(2 D) ln(r / R_c),       R_c <= r <= R_t,

valid while c >= 0 in the whole annulus (zero-order uptake stops where the solute runs out).

Axial depletion: every unit length of tissue takes ``Q pi (R_t^2 - R_c^2)`` (mol/(m s)) from the
capillary, whatever the concentration, so a mass balance on the flowing fluid (F, m^3/s) gives
the exact linear fall ``dC_m/dz = -Q pi (R_t^2 - R_c^2) / F`` of the mixing-cup concentration,
and the wall flux density ``j = Q (R_t^2 - R_c^2) / (2 R_c)`` is uniform. With the lumen's own
resistance, far from the inlet the fluid's wall concentration sits ``j D_h / (Sh D_f)`` below
the mixing cup with Sh = 48/11 (uniform wall flux; Shah & London 1978, ch. 5).
"""

from __future__ import annotations

import math

import numpy as np

from worker.engine.lumen.inputs import LumenInputError, positive

__all__ = [
    "krogh_erlang_profile",
    "krogh_mixing_cup",
    "krogh_tissue_minimum",
    "krogh_uptake_per_length",
    "krogh_wall_flux",
]


def _radii(capillary_radius: float, tissue_radius: float) -> tuple[float, float]:
    r_c = positive("capillary_radius", capillary_radius)
    r_t = positive("tissue_radius", tissue_radius)
    if r_t <= r_c:
        raise LumenInputError(
            f"tissue_radius: expected more than capillary_radius ({r_c!r} m), got {r_t!r}")
    return r_c, r_t


def krogh_uptake_per_length(capillary_radius: float, tissue_radius: float,
                            uptake: float) -> float:
    """``Q pi (R_t^2 - R_c^2)``, mol/(m s): what one metre of the annulus consumes."""
    r_c, r_t = _radii(capillary_radius, tissue_radius)
    return positive("uptake", uptake) * math.pi * (r_t**2 - r_c**2)


def krogh_wall_flux(capillary_radius: float, tissue_radius: float, uptake: float) -> float:
    """Outward flux density at the capillary wall, ``Q (R_t^2 - R_c^2) / (2 R_c)``,
    mol/(m^2 s)."""
    r_c, _ = _radii(capillary_radius, tissue_radius)
    return krogh_uptake_per_length(capillary_radius, tissue_radius, uptake) / (2.0 * math.pi * r_c)


def krogh_erlang_profile(r, capillary_radius: float, tissue_radius: float, diffusivity: float,
                         uptake: float, wall_concentration: float):
    """The Krogh-Erlang profile c(r) in the tissue (module docstring), mol/m^3.

    ``wall_concentration`` is the tissue's concentration at r = R_c (the fluid's times the
    tissue/fluid partition); ``diffusivity`` is the tissue's (m^2/s). Positions outside
    [R_c, R_t] are refused.
    """
    r_c, r_t = _radii(capillary_radius, tissue_radius)
    d = positive("diffusivity", diffusivity)
    q = positive("uptake", uptake)
    r = np.asarray(r, dtype=float)
    if np.any(~np.isfinite(r)) or np.any(r < r_c * (1 - 1e-12)) or np.any(r > r_t * (1 + 1e-12)):
        raise LumenInputError(f"r: expected positions from {r_c!r} to {r_t!r} m")
    return (float(wall_concentration) + q / (4.0 * d) * (r**2 - r_c**2)
            - q * r_t**2 / (2.0 * d) * np.log(r / r_c))


def krogh_tissue_minimum(capillary_radius: float, tissue_radius: float, diffusivity: float,
                         uptake: float, wall_concentration: float) -> float:
    """The profile at r = R_t, its minimum (the profile falls monotonically outward)."""
    return float(krogh_erlang_profile(tissue_radius, capillary_radius, tissue_radius,
                                      diffusivity, uptake, wall_concentration))


def krogh_mixing_cup(z, inlet: float, flow_rate: float, capillary_radius: float,
                     tissue_radius: float, uptake: float):
    """``C_m(z) = C_in - Q pi (R_t^2 - R_c^2) z / F`` (mol/m^3) at position(s) z (m) from the
    inlet; F the volume flow rate (m^3/s)."""
    f = positive("flow_rate", flow_rate)
    per_length = krogh_uptake_per_length(capillary_radius, tissue_radius, uptake)
    z = np.asarray(z, dtype=float)
    if np.any(~np.isfinite(z)) or np.any(z < 0.0):
        raise LumenInputError("z: expected non-negative finite positions (m)")
    return float(inlet) - per_length * z / f
