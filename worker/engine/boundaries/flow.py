"""Flow face: the inner face of a cylinder is the wall of a lumen carrying laminar flow.

The fluid enters the lumen (radius = the case's ``inner``) at ``inlet`` with volume flow rate
``flow_rate`` (m^3/s) and loses solute to the layers as it flows along the case's ``length``;
``diffusivity`` is the solute's in the fluid (m^2/s), ``partition`` overrides the first layer's
at the wall. The face has no single value: the concentration at the wall changes along the
lumen, so the radial solvers never take it directly; ``worker.engine.lumen.run`` marches the
lumen and solves the layers at each position with the wall as a ``concentration`` face
(``worker.engine.lumen.layer_walls``). Its solver forms therefore refuse, naming the route.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from worker.engine.boundaries.base import BoundaryKind, Combine, DepletionRole
from worker.engine.parameters import Parameter

if TYPE_CHECKING:
    from worker.engine.model import Boundary


def _not_radial() -> NotImplementedError:
    return NotImplementedError(
        "inner_boundary.kind: a flow face is solved by the lumen route "
        "(worker.engine.lumen.run), not by the radial solvers")


class FlowFace(BoundaryKind):
    name = "flow"
    noun = "a flow boundary"
    schema_name = "FlowBoundary"
    parameters = (
        Parameter("flow_rate", "volume_flow_rate", "positive"),
        Parameter("inlet", "concentration", "non_negative"),
        Parameter("diffusivity", "diffusivity", "positive"),
        Parameter("partition", None, "positive", required=False),
    )
    sets_level = True
    residual_label = "lumen"
    wording = "lumen flow {flow_rate}, inlet {inlet}"
    lumen = True

    def fixes_level(self, boundary: Boundary) -> bool:
        return True

    def depletion_role(self, boundary: Boundary) -> DepletionRole:
        return "fed"

    def face_residual(
        self, boundary: Boundary, concentration: float, inflow: float, k_face: float
    ) -> float:
        raise _not_radial()

    def fv_face(
        self, boundary: Boundary, side: str, k_face: float, area: float, gap: float,
        diffusivity: float,
    ) -> tuple[float, float, float]:
        raise _not_radial()

    def exact_row(
        self, boundary: Boundary, u_form: Any, flux_form: Any, inward: float, partition: float,
        face_partition: float, combine: Combine,
    ) -> tuple[Any, float]:
        raise _not_radial()

    def eigen_row(
        self, boundary: Boundary, outward: float, diffusivity: float, face_partition: float
    ) -> tuple[float, float, float]:
        raise _not_radial()

    def bvp_residual(
        self, boundary: Boundary, c: float, flux: float, into: float, k_face: float,
        c_ref: float, j_ref: float,
    ) -> float:
        raise _not_radial()


KIND = FlowFace()
