"""The figures a design requirement, a Monte Carlo run or a design limit can ask of a case.

One table (``quantities``) says, for a problem, which quantities exist, their dimension (a key of
``worker.engine.units.KINDS``, for the requirement's units) and whether a layer or a time goes
with them. The names are those of the record's quantities and series:

steady (``worker.engine.steady_check``)
    ``flux_inner``, ``flux_outer`` (flux density, outward positive), ``surface_inner``,
    ``surface_outer`` (material-side concentration at each face), ``concentration_min``,
    ``concentration_max`` (the true extremes; with a layer: within that layer),
    ``depletion_front`` (where a zero-order layer runs out; NaN for a trial without a front),
    ``biot_inner``/``biot_outer`` (mass-transfer faces); per unit size: cylinder
    ``rate_per_length_inner``/``rate_per_length_outer``/``consumption_per_length``, slab
    ``consumption_per_area``; totals ``rate_inner``, ``rate_outer``, ``consumption`` (sphere
    always, cylinder with ``length``, slab with ``area``).
transient (``worker.engine.transient.record``)
    ``t50``, ``t90`` (time to 50 % / 90 % release; NaN when not reached within the duration)
    and ``release_fraction_final``, for a body that releases (loaded, no face feeding it:
    ``worker.engine.transient.uptake.releases``); series quantities at a time ``at`` (s):
    ``release_fraction`` (a body that releases), ``uptake`` (otherwise: the net amount in
    through the faces), ``released_inner``, ``released_outer``, ``remaining`` (amounts in the
    record's measure: per m^2 of a slab without ``area``, per m of a cylinder without
    ``length``), and ``concentration_min`` (the true minimum over the body or a layer, at time
    ``at``).
dispersed drug (a layer loaded above its solubility, ``Layer.is_loaded_above_solubility``)
    ``time_depleted`` (s: when the last undissolved solute is gone; with a loaded layer, when
    that layer's is gone; absent when not within the duration) and the series
    ``front_position`` (m, at a time ``at``: the edge of a loaded layer's undissolved region;
    the layer must be named where several are loaded). Only loaded layers take these.
compartments (a face of kind ``compartment``)
    the series ``compartment_inner`` / ``compartment_outer`` (the stirred fluid's concentration
    at a time ``at``).
a lumen with flow (an inner boundary of kind ``flow``, ``worker.engine.lumen.run``)
    ``outlet_concentration`` (the mixing cup at the outlet), ``concentration_min`` (the
    lowest concentration of the fluid and the layers), ``peclet``, ``graetz``,
    ``sherwood_outlet``; nothing else of the steady list (its faces' figures vary along the
    lumen).
probes (a transient case with ``probes``)
    the series ``probe_concentration`` (the concentration at probe ``probe``, an index into the
    case's ``probes``, at a time ``at``): what a sensor or a sampled section measures.

Not offered: the list-valued ``thiele_modulus`` and the membrane ``time_lag``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from worker.engine.model import Problem
from worker.engine.transient.scales import size_factor
from worker.engine.transient.uptake import releases

#: The boundary kind of a well-stirred finite volume at a face (``worker.engine.boundaries``).
COMPARTMENT = "compartment"
#: The boundary kind of a lumen with flow along it (``worker.engine.boundaries.flow``).
FLOW = "flow"
#: The series quantity of one probe's concentration.
PROBE = "probe_concentration"

__all__ = ["COMPARTMENT", "FLOW", "PROBE", "QuantitySpec", "Target", "TargetError", "check_target",
           "quantities", "target_dimension"]


class TargetError(ValueError):
    """A target the problem cannot give; ``message`` names what was expected."""

    def __init__(self, key: str, message: str):
        super().__init__(f"{key}: {message}")
        self.key = key
        self.message = message


@dataclass(frozen=True)
class QuantitySpec:
    """A quantity a problem offers: its dimension (``units.KINDS`` key; ``"dimensionless"``
    for plain numbers), whether it may be limited to a layer, and whether it needs a time."""

    quantity: str
    dimension: str
    per_layer: bool = False
    at_time: bool = False
    #: The layers (indices) it may be limited to; None: any layer.
    layers: tuple[int, ...] | None = None
    #: True when a layer must be named (several layers hold the quantity, no case-wide value).
    layer_required: bool = False

    def layer_error(self, problem: Problem, layer: int | None) -> str | None:
        """Why ``layer`` (an index, or None for none named) does not suit this quantity in
        ``problem``; None when it does. The layer index is taken to be in range."""
        if layer is None:
            if self.layer_required:
                return (f"{self.quantity} is given per layer here: name one of the layers "
                        f"{self._layer_names(problem)}")
            return None
        if not self.per_layer:
            return f"{self.quantity} is not given per layer"
        if self.layers is not None and layer not in self.layers:
            return (f"{self.quantity} is given only for the layers {self._layer_names(problem)}"
                    f", not {problem.layers[layer].name!r}")
        return None

    def _layer_names(self, problem: Problem) -> str:
        indices = range(len(problem.layers)) if self.layers is None else self.layers
        return ", ".join(repr(problem.layers[j].name) for j in indices)


@dataclass(frozen=True)
class Target:
    """One figure of a case: ``quantity``, optionally limited to ``layer`` (index) and, for a
    series quantity, at time ``at`` (s). ``layer_name`` (filled by :func:`check_target`) is
    the name the key shows; it takes no part in equality."""

    quantity: str
    layer: int | None = None
    at: float | None = None
    layer_name: str | None = field(default=None, compare=False)
    #: The probe (index into the case's ``probes``) of a ``probe_concentration``.
    probe: int | None = None

    @property
    def key(self) -> str:
        """``concentration_min``, ``concentration_min[islet]``, ``release_fraction@604800s``,
        ``probe_concentration[probe 0]@86400s``."""
        text = self.quantity
        if self.layer is not None:
            text += f"[{self.layer_name if self.layer_name is not None else self.layer}]"
        if self.probe is not None:
            text += f"[probe {self.probe}]"
        if self.at is not None:
            text += f"@{self.at:.15g}s"
        return text


def _amount_dimension(problem: Problem) -> str:
    factor_unit = size_factor(problem)[1]
    if factor_unit.endswith("/m^2"):
        return "amount_per_area"
    if factor_unit.endswith("/m"):
        return "amount_per_length"
    return "amount"


def _steady(problem: Problem) -> list[QuantitySpec]:
    specs = [QuantitySpec("flux_inner", "flux"), QuantitySpec("flux_outer", "flux"),
             QuantitySpec("surface_inner", "concentration"),
             QuantitySpec("surface_outer", "concentration"),
             QuantitySpec("concentration_min", "concentration", per_layer=True),
             QuantitySpec("concentration_max", "concentration", per_layer=True)]
    if any(ly.reaction.law.depletes for ly in problem.layers):
        specs.append(QuantitySpec("depletion_front", "length"))
    for side in ("inner", "outer"):
        boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
        if boundary.condition.film_coefficient(boundary) is not None:
            specs.append(QuantitySpec(f"biot_{side}", "dimensionless"))
    if problem.geometry == "cylinder":
        specs += [QuantitySpec("rate_per_length_inner", "amount_rate_per_length"),
                  QuantitySpec("rate_per_length_outer", "amount_rate_per_length"),
                  QuantitySpec("consumption_per_length", "amount_rate_per_length")]
        size = problem.length
    elif problem.geometry == "slab":
        specs.append(QuantitySpec("consumption_per_area", "flux"))
        size = problem.area
    else:
        size = 1.0
    if size is not None:
        specs += [QuantitySpec(name, "amount_rate")
                  for name in ("rate_inner", "rate_outer", "consumption")]
    return specs


def _transient(problem: Problem) -> list[QuantitySpec]:
    amount = _amount_dimension(problem)
    specs = []
    if releases(problem):
        specs += [QuantitySpec("t50", "time"), QuantitySpec("t90", "time"),
                  QuantitySpec("release_fraction_final", "dimensionless"),
                  QuantitySpec("release_fraction", "dimensionless", at_time=True)]
    else:
        specs.append(QuantitySpec("uptake", amount, at_time=True))
    specs += [QuantitySpec("released_inner", amount, at_time=True),
              QuantitySpec("released_outer", amount, at_time=True),
              QuantitySpec("remaining", amount, at_time=True),
              QuantitySpec("concentration_min", "concentration", per_layer=True, at_time=True)]
    loaded = tuple(j for j, ly in enumerate(problem.layers) if ly.is_loaded_above_solubility)
    if loaded:
        specs += [QuantitySpec("time_depleted", "time", per_layer=True, layers=loaded),
                  QuantitySpec("front_position", "length", per_layer=True, at_time=True,
                               layers=loaded, layer_required=len(loaded) > 1)]
    for side in ("inner", "outer"):
        boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
        if boundary.kind == COMPARTMENT:
            specs.append(QuantitySpec(f"compartment_{side}", "concentration", at_time=True))
    if problem.probes:
        specs.append(QuantitySpec(PROBE, "concentration", at_time=True))
    return specs


def _flow(problem: Problem) -> list[QuantitySpec]:
    return [QuantitySpec("outlet_concentration", "concentration"),
            QuantitySpec("concentration_min", "concentration"),
            QuantitySpec("peclet", "dimensionless"),
            QuantitySpec("graetz", "dimensionless"),
            QuantitySpec("sherwood_outlet", "dimensionless")]


def quantities(problem: Problem) -> dict[str, QuantitySpec]:
    """Every quantity ``problem`` offers as a target, by name (the one list; see the module
    docstring)."""
    if problem.inner_boundary.kind == FLOW:
        specs = _flow(problem)
    elif problem.regime.kind == "transient":
        specs = _transient(problem)
    else:
        specs = _steady(problem)
    return {spec.quantity: spec for spec in specs}


def check_target(problem: Problem, target: Target) -> Target:
    """``target`` checked against ``problem`` (quantity offered, layer index in range, a time
    exactly where the quantity needs one, within the duration), with its ``layer_name``
    filled; TargetError naming what was expected otherwise."""
    offered = quantities(problem)
    spec = offered.get(target.quantity)
    if spec is None:
        raise TargetError(target.key, f"this {problem.regime.kind} case has no quantity "
                          f"{target.quantity!r}; it has: {', '.join(offered)}")
    name = None
    if target.layer is not None:
        if not spec.per_layer:
            raise TargetError(target.key, f"{target.quantity} is not given per layer")
        count = len(problem.layers)
        if not 0 <= target.layer < count:
            raise TargetError(target.key, f"layers[{target.layer}]: the case has {count} "
                              f"layer{'s' if count != 1 else ''}")
        name = problem.layers[target.layer].name
    wrong_layer = spec.layer_error(problem, target.layer)
    if wrong_layer is not None:
        raise TargetError(target.key, wrong_layer)
    if (target.quantity == PROBE) != (target.probe is not None):
        raise TargetError(target.key, f"a probe index goes with {PROBE} and only with it")
    if target.probe is not None and not 0 <= target.probe < len(problem.probes):
        raise TargetError(target.key, f"probe {target.probe}: the case has "
                          f"{len(problem.probes)} probes (indices from 0)")
    if spec.at_time:
        if target.at is None:
            raise TargetError(target.key, f"{target.quantity} is a series: give the time 'at'")
        duration = problem.regime.duration or 0.0
        if not (math.isfinite(target.at) and 0.0 <= target.at <= duration):
            raise TargetError(target.key, f"at: expected a time within the duration 0–"
                              f"{duration:.6g} s, got {target.at!r}")
    elif target.at is not None:
        raise TargetError(target.key, f"{target.quantity} is not a series: no time 'at'")
    return Target(target.quantity, target.layer, target.at, layer_name=name,
                  probe=target.probe)


def target_dimension(problem: Problem, target: Target) -> str:
    """The dimension of a target's values (a ``units.KINDS`` key)."""
    return quantities(problem)[check_target(problem, target).quantity].dimension
