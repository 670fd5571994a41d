"""The limits of the checks: documented defaults per regime and the case's overrides.

Every limit is dimensionless (a relative error, or an absolute error divided by the scale the
check names). A case's ``tolerances`` override a default by the check's full name
(``cross_check.flux_outer``) or by its family (``cross_check``); the family of a name is the
part before the first dot, except where :data:`FAMILY` names another one
(``convergence.space`` belongs to ``gci``).

Resolution, the same for every regime: the override by full name, else the override by family,
else the default for the full name, else the default of the family.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

from worker.engine.model import Problem

#: Default limits of the two checks of a case's inputs, the same in every regime: the unit
#: routes differ only by the rounding of their exact factors (a few units in the last place);
#: the two problems also by the cancellation of r_out^(n+1) - r_in^(n+1) in the primary's
#: initial load of a thin curved shell, hence the wider limit of the interpretation.
INPUT_LIMITS: Mapping[str, float] = {
    "inputs": 1e-12,  # relative difference of a value read two ways
    "inputs.interpretation": 1e-10,  # relative difference of a field of the two problems
}

#: Default limits of the steady checks.
STEADY_LIMITS: Mapping[str, float] = {
    "cross_check": 1e-4,  # flux and profile agreement between independent methods
    "cross_check.depletion_front": 2e-3,  # front position difference / total thickness
    "cross_check.dimensionless": 1e-12,  # Thiele/Biot vs their definitions: arithmetic only
    "mass_balance": 1e-6,  # (in - out - consumed) / throughput
    "boundary_residual": 1e-6,  # face condition residual / its scale
    "interface_residual": 1e-6,  # C/K jump and flux jump at interfaces / their scale
    "gci": 1e-3,  # GCI_fine of each face flux (fraction)
    "non_negativity": 1e-8,  # most negative concentration / concentration scale
    "bracket": 1e-4,  # Michaelis-Menten solution outside its comparison bracket / scale
    **INPUT_LIMITS,
}

#: Default limits of the transient checks. Integral quantities (release, event times, time lag)
#: are held to the steady engine's 1e-4; pointwise ones (face fluxes, probe concentrations) to
#: 1e-3, since right after a discontinuous start at a fixed face the flux of any finite mesh
#: converges more slowly than the released amount.
TRANSIENT_LIMITS: Mapping[str, float] = {
    "cross_check": 1e-3,  # face fluxes, probes, profile, amounts held and consumed
    "cross_check.initial_load": 1e-9,  # each route's own quadrature of a piecewise-constant state
    "cross_check.release_fraction": 1e-4,
    "cross_check.released": 1e-4,
    "cross_check.t50": 1e-4,
    "cross_check.t90": 1e-4,
    "cross_check.time_lag": 1e-4,
    "cross_check.limited_volume": 1e-4,  # vs Crank 1975: released / exact exchange, level
    "compartment": 1e-4,  # compartment.equilibrium: long-time state vs the exact partition
    "cross_check.front_position": 1e-3,  # fronts' difference / layer thickness
    "cross_check.time_depleted": 1e-3,  # relative to the primary's
    # release (relative) and front (over the thickness) against Paul & McSpadden's exact form
    "cross_check.dispersed_similarity": 1e-4,
    # the same against the pseudo-steady forms, beyond their own error bound in Cs/A
    "cross_check.pseudo_steady": 1e-3,
    "mass_balance": 1e-8,  # |initial - remaining - released - consumed| / amount scale
    "gci": 1e-3,  # GCI_fine of the release (worst requested time) / amount scale
    "convergence": 1e-5,  # change under a tighter time tolerance / amount scale
    "steady_limit": 1e-4,  # long-time state vs steady engine, flux / throughput and C / scale
    "non_negativity": 1e-8,  # most negative concentration / concentration scale
    **INPUT_LIMITS,
}

#: Check names whose family is not the part before their first dot.
FAMILY: Mapping[str, str] = {"convergence.space": "gci", "convergence.time": "convergence",
                             # the lumen's studies refined in r and in z (worker.engine.lumen.run)
                             "convergence.space_r": "gci", "convergence.space_z": "gci",
                             # the lumen's layers refined in r (worker.engine.lumen.layer_accuracy)
                             "convergence.space_layers": "gci"}

__all__ = ["FAMILY", "INPUT_LIMITS", "STEADY_LIMITS", "TRANSIENT_LIMITS", "check_limit", "family",
           "loosened_limits", "regime_defaults", "resolve_limit"]


def family(name: str) -> str:
    """The family of check ``name`` (``cross_check.t50`` -> ``cross_check``)."""
    return FAMILY.get(name, name.split(".")[0])


def resolve_limit(tolerances: Mapping[str, float], name: str,
                  defaults: Mapping[str, float]) -> float:
    """Limit of check ``name`` under ``tolerances`` (the case's overrides) and ``defaults``:
    the override by full name, else by family, else the default by name, else by family."""
    if name in tolerances:
        return float(tolerances[name])
    group = family(name)
    if group in tolerances:
        return float(tolerances[group])
    return float(defaults.get(name, defaults[group]))


def check_limit(problem: Problem, name: str) -> float:
    """Limit of check ``name`` for ``problem``, from the defaults of its regime."""
    return resolve_limit(problem.tolerances, name, regime_defaults(problem))


#: Where undissolved solute dissolves at a moving front (``Problem.can_saturate``), these
#: cross-checks take the pointwise limit: each cell the front leaves is a kink, the meshes
#: converge at a low and irregular apparent order there (first to second; J. Crank, *Free and
#: Moving Boundary Problems*, Oxford 1984, on fixed-domain methods), and two discretisations
#: of release from a sphere were measured 1.2e-4 apart in release fraction at 50/100/200 cells.
FRONT_LIMITS: Mapping[str, float] = MappingProxyType({
    "cross_check.release_fraction": 1e-3,
    "cross_check.t50": 1e-3,
    "cross_check.t90": 1e-3,
    # the primary's release against Paul & McSpadden: a 1 mm slab at 50/100/200 cells was
    # 2.4e-4 from the exact release at 1.5 d (front 17 % deep)
    "cross_check.dispersed_similarity": 1e-3,
})


def regime_defaults(problem: Problem) -> Mapping[str, float]:
    """The default limits of ``problem``'s regime (with :data:`FRONT_LIMITS` where a front
    moves)."""
    if problem.regime.kind != "transient":
        return STEADY_LIMITS
    if problem.can_saturate:
        return MappingProxyType({**TRANSIENT_LIMITS, **FRONT_LIMITS})
    return TRANSIENT_LIMITS


def loosened_limits(tolerances: Mapping[str, float], defaults: Mapping[str, float]
                    ) -> list[tuple[str, float, float]]:
    """``(name, default, value)`` for every override in ``tolerances`` above the default it
    replaces (the default by full name, else by family), in name order. An override naming
    a family is compared with the family's default; a tighter one is no deviation."""
    loosened = []
    for name in sorted(tolerances):
        default = float(defaults.get(name, defaults.get(family(name), float("inf"))))
        value = float(tolerances[name])
        if value > default:
            loosened.append((name, default, value))
    return loosened
