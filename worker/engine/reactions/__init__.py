"""Reaction kinds: one module per kind, and the registry ``REACTIONS`` (kind name → kind).

Adding a kind is one module here (a :class:`ReactionKind` subclass and its ``KIND``), its line in
``REACTIONS`` and its tests; the case schema, the model and the solvers read it from here.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

from worker.engine.reactions import first_order, michaelis_menten, none, zero_order
from worker.engine.reactions.base import ReactionKind

#: Every reaction kind by its ``kind`` string, in the order the schema lists them.
REACTIONS: Mapping[str, ReactionKind] = MappingProxyType(
    {kind.name: kind for kind in (none.KIND, zero_order.KIND, first_order.KIND,
                                  michaelis_menten.KIND)}
)


def reaction_kind(name: str) -> ReactionKind:
    """The kind called ``name``; ValueError for an unknown one."""
    try:
        return REACTIONS[name]
    except KeyError:
        raise ValueError(f"unknown reaction kind {name!r}") from None


__all__ = ["REACTIONS", "ReactionKind", "reaction_kind"]
