"""Field paths on the SI Problem: parsing, the errors and their messages, dimensions and
domains (read off the kinds' declared parameters), reading and replacing values."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from worker.engine.design import paths
from worker.engine.design.paths import (
    FieldPathError,
    FieldRef,
    field_dimension,
    field_domain,
    parse_field,
    resolve,
    value_of,
    with_values,
)
from worker.engine.model import Boundary, Layer, Problem, Reaction

PROBLEM = Problem(
    "slab", 0.0,
    (Layer("wall", 4e-5, 1.5e-9, 0.8),
     Layer("cells", 1.5e-4, 2e-9, 1.0, Reaction("zero_order", rate=1e-3))),
    Boundary("concentration", value=0.2), Boundary("mass_transfer", coefficient=1e-5, bulk=0.05),
    area=2e-4)


@pytest.mark.parametrize(("path", "ref"), [
    ("inner", FieldRef("problem", "inner")),
    ("area", FieldRef("problem", "area")),
    ("layers[1].thickness", FieldRef("layer", "thickness", 1)),
    ("layers[0].partition", FieldRef("layer", "partition", 0)),
    ("layers[1].reaction.rate", FieldRef("reaction", "rate", 1)),
    ("outer_boundary.bulk", FieldRef("outer_boundary", "bulk")),
    ("inner_boundary.value", FieldRef("inner_boundary", "value")),
])
def test_paths_parse_and_print_back(path, ref):
    assert parse_field(path) == ref
    assert resolve(PROBLEM, path) == ref
    assert ref.path == path


@pytest.mark.parametrize(("path", "message"), [
    ("layers[3].thickness", "layers[3]: the case has 2 layers"),
    ("layers[1].reaction.vmax", "a zero-order reaction has no vmax; it has: rate"),
    ("layers[0].reaction.rate", "layers[0] has no reaction (kind 'none'): no reaction "
                                "parameters"),
    ("outer_boundary.value", "a mass_transfer boundary has no value; it has: coefficient, "
                             "bulk, partition"),
    ("inner_boundary.coefficient", "a concentration boundary has no coefficient; it has: "
                                   "value, partition"),
    ("inner_boundary.partition", "the case gives no inner_boundary.partition (the layer's "
                                 "partition applies there); vary the layer's partition "
                                 "instead"),
    ("length", "length applies to a cylinder; the case is a slab"),
    ("layers[0].name", "a layer has no numeric field 'name'; expected one of: thickness, "
                       "diffusivity, partition, initial, loading, solubility or "
                       "reaction.<parameter>"),
    ("layers[0].thickness.value", "layers[0].thickness has no fields; expected "
                                  "layers[0].reaction.<parameter>"),
    ("inner_boundary", "expected inner_boundary.<parameter of its kind>"),
])
def test_every_error_names_the_path_and_what_was_expected(path, message):
    with pytest.raises(FieldPathError) as caught:
        resolve(PROBLEM, path)
    assert (caught.value.path, caught.value.message) == (path, message)
    assert str(caught.value) == f"{path}: {message}"


@pytest.mark.parametrize("path", ["geometry", "layers[x].thickness", "layers[0]", ""])
def test_a_path_of_no_known_form_lists_the_forms(path):
    with pytest.raises(FieldPathError, match="expected a field path: inner, length, area, "
                                             r"layers\[i\]"):
        parse_field(path)


def test_a_slab_without_area_is_refused():
    no_area = dataclasses.replace(PROBLEM, area=None)
    with pytest.raises(FieldPathError, match="area: the case gives no area"):
        resolve(no_area, "area")


@pytest.mark.parametrize(("path", "dimension", "domain"), [
    ("layers[0].thickness", "length", (0.0, True)),
    ("layers[0].diffusivity", "diffusivity", (0.0, True)),
    ("layers[0].partition", None, (0.0, True)),
    ("layers[0].initial", "concentration", (0.0, False)),
    ("layers[1].reaction.rate", "volumetric_rate", (0.0, False)),
    ("inner_boundary.value", "concentration", (0.0, False)),
    ("outer_boundary.coefficient", "velocity", (0.0, True)),
    ("area", "area", (0.0, True)),
    ("inner", "length", (-math.inf, True)),
])
def test_dimension_and_domain_follow_the_declared_parameters(path, dimension, domain):
    ref = resolve(PROBLEM, path)
    assert field_dimension(PROBLEM, ref) == dimension
    assert field_domain(PROBLEM, ref) == domain


def test_a_flux_face_value_may_have_either_sign():
    flux = dataclasses.replace(PROBLEM, outer_boundary=Boundary("flux", value=-1e-6))
    assert field_domain(flux, resolve(flux, "outer_boundary.value")) == (-math.inf, True)


def _holds_replacement(problem: Problem, replace) -> None:
    """The check a with_values must pass: the named field changed, nothing else, and the
    cached edges those of the new thicknesses."""
    ref = resolve(problem, "layers[1].thickness")
    before = problem.edges.copy()  # fill the cache of the original
    changed = replace(problem, {ref: 3e-4})
    assert value_of(changed, ref) == 3e-4
    assert changed.layers[0] == problem.layers[0]
    assert changed.layers[1].diffusivity == problem.layers[1].diffusivity
    np.testing.assert_array_equal(changed.edges, [0.0, 4e-5, 4e-5 + 3e-4])
    np.testing.assert_array_equal(problem.edges, before)
    assert changed.outer == pytest.approx(3.4e-4, rel=1e-15)


def test_with_values_round_trips_and_updates_the_edges():
    _holds_replacement(PROBLEM, with_values)
    refs = [resolve(PROBLEM, p) for p in ("layers[1].reaction.rate", "outer_boundary.bulk",
                                          "layers[0].partition", "area")]
    values = {ref: value_of(PROBLEM, ref) * 1.5 for ref in refs}
    changed = with_values(PROBLEM, values)
    assert {ref: value_of(changed, ref) for ref in refs} == values
    assert with_values(changed, {ref: value_of(PROBLEM, ref) for ref in refs}) == PROBLEM


def test_the_check_fails_when_the_layer_index_is_off_by_one(monkeypatch):
    """Injected error: with_values writing into the neighbouring layer."""
    original = paths.replaced

    def shifted(problem, values):
        moved = {dataclasses.replace(ref, layer=ref.layer - 1) if ref.layer else ref: v
                 for ref, v in values.items()}
        return original(problem, moved)

    monkeypatch.setattr(paths, "replaced", shifted)
    with pytest.raises(AssertionError):
        _holds_replacement(PROBLEM, paths.with_values)


def test_the_check_fails_when_the_edges_are_stale():
    """Injected error: a replacement that keeps the old cached edges."""
    def stale(problem, values):
        changed = with_values(problem, values)
        object.__setattr__(changed, "edges", problem.edges)
        return changed

    with pytest.raises(AssertionError):
        _holds_replacement(PROBLEM, stale)
