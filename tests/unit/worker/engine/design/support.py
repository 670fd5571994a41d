"""Problems the design tests share (plain helpers, not fixtures)."""

from __future__ import annotations

from worker.engine.model import Boundary, Layer, Problem, Reaction


def sphere_problem(radius: float = 100e-6, diffusivity: float = 1e-9, rate: float = 0.01,
                   surface: float = 0.2) -> Problem:
    """A solid sphere of zero-order uptake ``rate`` (mol/m^3/s) with its surface held at
    ``surface`` (mol/m^3), steady."""
    return Problem(
        geometry="sphere", inner=0.0,
        layers=(Layer("bead", radius, diffusivity, 1.0, Reaction("zero_order", rate=rate)),),
        inner_boundary=Boundary("symmetry"),
        outer_boundary=Boundary("concentration", value=surface))
