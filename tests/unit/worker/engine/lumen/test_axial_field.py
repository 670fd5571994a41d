"""The record's picture of a lumen case (``series.axial_field``): the fluid part is the march's
own field, the layers' part agrees with direct steady solves of the layers at the fluid's wall
concentration there (the wall table's profile, held to the table's tolerance), and the lowest
value drawn is the record's ``concentration_min``. Check values: the layers' direct solves
(closed form or finite volumes), never the table itself."""

from __future__ import annotations

import copy

import numpy as np
import pytest

from schemas.build import validate_case
from tests.unit.schemas.test_flow_case import FIBRE
from worker.engine import check_case
from worker.engine.lumen.layer_walls import solve_layers_at
from worker.engine.lumen.run import layers_problem


@pytest.fixture(scope="module")
def record() -> dict:
    return check_case(copy.deepcopy(FIBRE))


def test_the_layers_in_the_picture_are_their_steady_state_at_the_wall(record):
    field = record["series"]["axial_field"]
    axial = record["series"]["axial"]
    cells = field["fluid_cells"]
    layers = layers_problem(validate_case(copy.deepcopy(FIBRE)).problem)
    radii = np.array(field["radius"][cells:])
    inlet = 0.2
    for k in (len(field["position"]) // 2, len(field["position"]) - 1):
        z = field["position"][k]
        wall = axial["wall"][axial["position"].index(z)]
        direct = solve_layers_at(layers, wall)
        expected = np.concatenate([
            direct.concentration_at(radii[j * 11:(j + 1) * 11], layer=j)
            for j in range(len(layers.layers))])
        drawn = np.array(field["concentration"][k][cells:])
        assert np.max(np.abs(drawn - expected)) < 1e-4 * inlet
        assert not np.allclose(drawn, expected * 1.01, atol=1e-6)  # a 1 % error would show


def test_the_fluid_part_and_the_lowest_value_match_the_record(record):
    field = record["series"]["axial_field"]
    rows = np.array(field["concentration"])
    assert rows.shape == (len(field["position"]), len(field["radius"]))
    assert field["position"][0] == 0.0
    assert field["position"][-1] == pytest.approx(0.1)
    lowest = record["quantities"]["concentration_min"]
    assert rows.min() == pytest.approx(lowest["value"], abs=max(lowest["uncertainty"], 1e-9))
    fluid = rows[:, :field["fluid_cells"]]
    # no fluid above the inlet beyond the march's discretisation error (its Richardson
    # combination of half and whole steps may overshoot by that much: 3.4e-7 seen here)
    assert np.all(fluid <= 0.2 * (1 + 1e-5))
