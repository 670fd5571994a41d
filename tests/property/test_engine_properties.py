"""Properties every steady solution must have, whatever the scenario (hypothesis).

* Linearity: for linear kinetics (none, first order) the solution is linear in the boundary
  data, so flux(a*C1, b*C2) = a*flux(C1, 0) + b*flux(0, C2) (superposition; Crank 1975 ch. 1,
  common practice for linear boundary-value problems).
* Similarity: lengths scaled by s with D scaled by s^2 (and film coefficients by s, rate
  constants unchanged) leave the concentration field unchanged at scaled positions and scale
  the flux density by s (dimensional analysis, common practice).
* Conservation: in - out - consumed closes for every method (the mass_balance check passes).
* Every record validates against ``schemas/json/result-v1.schema.json``.
"""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import jsonschema
import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from worker.engine import check_case
from worker.engine.exact_steady import solve_exact
from worker.engine.fv_mesh import default_cells_per_layer
from worker.engine.fv_steady import solve_fv
from worker.engine.model import Boundary, Layer, Problem, Reaction

RESULT_SCHEMA = json.loads(
    (Path(__file__).parents[2] / "schemas" / "json" / "result-v1.schema.json").read_text()
)

log_uniform = st.floats(min_value=-1.0, max_value=1.0).map(lambda e: 10.0**e)


@st.composite
def linear_problems(draw):
    geometry = draw(st.sampled_from(["slab", "cylinder", "sphere"]))
    n_layers = draw(st.integers(1, 3))
    layers = []
    for i in range(n_layers):
        reacts = draw(st.booleans())
        thickness = 1e-4 * draw(log_uniform)
        diffusivity = 1e-9 * draw(log_uniform)
        k = diffusivity / thickness**2 * draw(log_uniform) if reacts else 0.0
        layers.append(Layer(
            name=f"layer {i}", thickness=thickness, diffusivity=diffusivity,
            partition=draw(log_uniform),
            reaction=Reaction("first_order", rate_constant=k) if reacts else Reaction(),
        ))
    inner = 0.0 if geometry == "slab" else 1e-4 * draw(log_uniform)
    c1, c2 = draw(log_uniform), draw(log_uniform)
    return Problem(
        geometry=geometry, inner=inner, layers=tuple(layers),
        inner_boundary=Boundary("concentration", value=c1),
        outer_boundary=Boundary("concentration", value=c2),
    )


def _with_values(problem: Problem, c1: float, c2: float) -> Problem:
    return dataclasses.replace(
        problem,
        inner_boundary=dataclasses.replace(problem.inner_boundary, value=c1),
        outer_boundary=dataclasses.replace(problem.outer_boundary, value=c2),
    )


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(linear_problems(), st.floats(-3, 3), st.floats(-3, 3))
def test_fluxes_are_linear_in_boundary_concentrations(problem, a, b):
    c1, c2 = problem.inner_boundary.value, problem.outer_boundary.value
    for solve in (solve_exact, solve_fv):
        both = solve(_with_values(problem, a * c1, b * c2))
        first = solve(_with_values(problem, c1, 0.0))
        second = solve(_with_values(problem, 0.0, c2))
        scale = max(abs(first.flux_outer), abs(second.flux_outer), abs(first.flux_inner),
                    abs(second.flux_inner)) * (abs(a) + abs(b) + 1e-3)
        for attr in ("flux_inner", "flux_outer"):
            expected = a * getattr(first, attr) + b * getattr(second, attr)
            assert abs(getattr(both, attr) - expected) <= 1e-9 * scale


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(linear_problems(), st.floats(min_value=-2, max_value=2).map(lambda e: 10.0**e))
def test_similarity_under_length_rescaling(problem, s):
    scaled = dataclasses.replace(
        problem,
        inner=problem.inner * s,
        layers=tuple(dataclasses.replace(ly, thickness=ly.thickness * s,
                                         diffusivity=ly.diffusivity * s * s)
                     for ly in problem.layers),
    )
    # Fluxes from nearly equal face concentrations carry an absolute round-off of about
    # eps * D * C / L, so the absolute tolerance is set on that diffusive scale.
    c_max = max(problem.inner_boundary.value, problem.outer_boundary.value) * max(
        ly.partition for ly in problem.layers)
    diffusive = c_max * max(ly.diffusivity / ly.thickness for ly in problem.layers)
    # Both problems on the same mesh: the default mesh rule rounds resistance shares up to
    # whole cells, and a share that lands on a whole number can round either way after the
    # rescaling (one cell more or less, a difference at the discretisation-error level).
    cells = default_cells_per_layer(problem)
    for solve in (solve_exact, lambda p: solve_fv(p, cells)):
        base, big = solve(problem), solve(scaled)
        np.testing.assert_allclose(big.flux_outer, s * base.flux_outer, rtol=1e-8,
                                   atol=1e-10 * s * diffusive)
        r = np.linspace(problem.edges[0], problem.edges[-1], 17)[1:-1]
        # At a layer interface the concentration is two-valued (the partition jump), and r * s
        # can round to either side of the scaled interface: compare away from interfaces only.
        interfaces = np.asarray(problem.edges[1:-1])
        if interfaces.size:
            span = problem.edges[-1] - problem.edges[0]
            gap = np.min(np.abs(r[:, None] - interfaces[None, :]), axis=1)
            r = r[gap > 1e-9 * span]
        np.testing.assert_allclose(big.concentration_at(r * s), base.concentration_at(r),
                                   rtol=1e-8, atol=1e-12)


@st.composite
def case_documents(draw):
    geometry = draw(st.sampled_from(["slab", "cylinder", "sphere"]))
    solid = geometry != "slab" and draw(st.booleans())
    n_layers = draw(st.integers(1, 3))
    layers = []
    for i in range(n_layers):
        kind = draw(st.sampled_from(["none", "first_order", "zero_order", "michaelis_menten"]))
        thickness = 100e-6 * draw(log_uniform)
        diffusivity = 1e-9 * draw(log_uniform)
        layer = {"name": f"layer {i}", "thickness": f"{thickness!r} m",
                 "diffusivity": f"{diffusivity!r} m^2/s", "partition": draw(log_uniform)}
        tau = thickness**2 / diffusivity
        if kind == "first_order":
            layer["reaction"] = {"kind": kind, "rate_constant": f"{draw(log_uniform) / tau!r} 1/s"}
        elif kind == "zero_order":
            rate = 0.2 * draw(log_uniform) / tau
            layer["reaction"] = {"kind": kind, "rate": f"{rate!r} mol/m^3/s"}
        elif kind == "michaelis_menten":
            layer["reaction"] = {"kind": kind, "vmax": f"{draw(log_uniform) / tau!r} mol/m^3/s",
                                 "km": f"{0.1 * draw(log_uniform)!r} mol/m^3"}
        layers.append(layer)
    fed = draw(st.sampled_from(["concentration", "mass_transfer"]))
    outer = ({"kind": "concentration", "value": "1 mol/m^3"} if fed == "concentration" else
             {"kind": "mass_transfer", "coefficient": f"{1e-5 * draw(log_uniform)!r} m/s",
              "bulk": "1 mol/m^3"})
    if solid:
        inner_b = {"kind": "symmetry"}
    else:
        inner_b = draw(st.sampled_from([{"kind": "symmetry"},
                                        {"kind": "flux", "value": "0 mol/m^2/s"},
                                        {"kind": "concentration", "value": "0.5 mol/m^3"}]))
    return {
        "schema_version": 1, "title": "property-based scenario",
        "geometry": geometry, "inner": "0 m" if solid or geometry == "slab" else "200 um",
        "layers": layers, "inner_boundary": inner_b, "outer_boundary": outer,
        "regime": {"kind": "steady"},
    }


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(case_documents())
def test_record_validates_and_mass_balance_closes(case):
    record = check_case(case)
    jsonschema.Draft202012Validator(RESULT_SCHEMA).validate(record)
    assert record["status"] == "succeeded", record["error"]
    balance = next(c for c in record["checks"] if c["name"] == "mass_balance")
    assert balance["passed"], balance
