"""A stand-in for the ``compartment`` boundary kind while its module is not merged (issue 14).

The case rules, the independent reading, the cost estimate and the design targets name the kind
``compartment`` and read the ``Boundary`` fields ``volume``, ``initial``, ``clearance`` and
``partition``; the engine's tests of those parts need the kind's registry entry only to look the
kind up (``Boundary.condition``). :func:`compartment_kind` yields the registered kind when
``worker.engine.boundaries`` has one, else this stand-in, registered for the test only. The
stand-in declares the fields of the shared contract and nothing of the physics: no test may
read a solution from it.
"""

from __future__ import annotations

from collections.abc import Iterator
from types import MappingProxyType

import pytest

from worker.engine import boundaries
from worker.engine.boundaries.base import BoundaryKind
from worker.engine.parameters import Parameter


class _StandInCompartment(BoundaryKind):
    name = "compartment"
    noun = "a compartment boundary"
    schema_name = "CompartmentBoundary"
    parameters = (
        Parameter("volume", "volume", "positive"),
        Parameter("initial", "concentration", "non_negative", required=False),
        Parameter("partition", None, "positive", required=False),
        Parameter("clearance", "rate_constant", "non_negative", required=False),
    )

    def fluid_concentration(self, boundary):  # the contract: the compartment's starting level
        return boundary.initial


def merged() -> bool:
    """True once the real compartment kind is in the registry."""
    return "compartment" in boundaries.BOUNDARIES


@pytest.fixture
def compartment_kind(monkeypatch: pytest.MonkeyPatch) -> Iterator[BoundaryKind]:
    """The compartment kind: the registry's, or the stand-in registered for this test."""
    if merged():
        yield boundaries.BOUNDARIES["compartment"]
        return
    kind = _StandInCompartment()
    monkeypatch.setattr(boundaries, "BOUNDARIES",
                        MappingProxyType({**boundaries.BOUNDARIES, kind.name: kind}))
    yield kind
