"""Event times that fall before the first requested time (and before the scan that finds
them starts) are found where they are, not at the scan's start."""

from __future__ import annotations

import math

import numpy as np
import pytest

from worker.engine import check_case
from worker.engine.transient.scales import first_crossing


@pytest.mark.parametrize("start", [0.01, 0.5, 2.0, 40.0])
def test_first_crossing_is_found_before_or_after_the_grid_start(start):
    """f(t) = 1 − exp(−t) reaches 0.5 at ln 2, wherever the grid starts."""
    grid = np.geomspace(start, 100.0, 50)
    found = first_crossing(lambda t: 1.0 - np.exp(-np.asarray(t)), grid, 0.5)
    assert found == pytest.approx(math.log(2.0), rel=1e-10)


def test_first_crossing_not_reached_is_none():
    assert first_crossing(lambda t: np.asarray(t) * 0.0, np.geomspace(1.0, 10.0, 5), 0.5) is None


def test_t50_before_the_first_requested_time_is_the_published_half_time():
    """A plane sheet of thickness l, sealed at the back, releasing into a sink from a uniform
    load: M_t/M_inf = 1/2 at D t / l² = 0.04919 × 4 = 0.19674 (Crank 1975, *The Mathematics of
    Diffusion*, 2nd ed., §4.3.1, eq. 4.18 and its half-time for a sheet of thickness 2l)."""
    thickness, diffusivity = 100e-6, 1e-13
    case = {"schema_version": 1, "title": "sheet", "geometry": "slab", "inner": "0 m",
            "layers": [{"name": "film", "thickness": "100 um", "diffusivity": "1e-13 m^2/s",
                        "initial": "1 mol/m^3"}],
            "inner_boundary": {"kind": "symmetry"},
            "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
            "regime": {"kind": "transient", "duration": "30 d",
                       "times": ["1 d", "10 d", "30 d"]}}
    record = check_case(case)
    expected = 0.19674 * thickness**2 / diffusivity  # 19,674 s, before the first time (1 d)
    assert record["quantities"]["t50"]["value"] == pytest.approx(expected, rel=2e-4)
    t50 = next(c for c in record["checks"] if c["name"] == "cross_check.t50")
    assert t50["passed"], t50["detail"]
    assert record["verdict"] == "pass"
