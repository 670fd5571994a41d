"""Boundary kinds: one module per kind, and the registry ``BOUNDARIES`` (kind name → kind).

Adding a kind is one module here (a :class:`BoundaryKind` subclass and its ``KIND``), its line
in ``BOUNDARIES`` and its tests; the case schema, the model and the solvers read it from here.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

from worker.engine.boundaries import (
    compartment,
    concentration,
    flow,
    flux,
    mass_transfer,
    symmetry,
)
from worker.engine.boundaries.base import BoundaryKind

#: Every boundary kind by its ``kind`` string, in the order the schema lists them.
BOUNDARIES: Mapping[str, BoundaryKind] = MappingProxyType(
    {kind.name: kind for kind in (concentration.KIND, flux.KIND, mass_transfer.KIND,
                                  symmetry.KIND, compartment.KIND, flow.KIND)}
)
#: The kind a solid cylinder's or sphere's centre must have.
SYMMETRY = symmetry.KIND


def boundary_kind(name: str) -> BoundaryKind:
    """The kind called ``name``; ValueError for an unknown one."""
    try:
        return BOUNDARIES[name]
    except KeyError:
        raise ValueError(f"unknown boundary kind {name!r}") from None


__all__ = ["BOUNDARIES", "SYMMETRY", "BoundaryKind", "boundary_kind"]
