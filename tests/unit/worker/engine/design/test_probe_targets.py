"""A probe's concentration as a figure of the design runs and of measured data: the record's
probe rows carry a numerical uncertainty, the fast trial solve reads them as the full check
does, and both follow Crank's series for a plane sheet."""

from __future__ import annotations

import math

import numpy as np
import pytest

from schemas.build import validate_case
from worker.engine import check_case
from worker.engine.design.requirements import read_figure
from worker.engine.design.targets import PROBE, Target, TargetError, check_target
from worker.engine.design.trials import TrialModel

THICKNESS, DIFFUSIVITY, C0 = 100e-6, 1e-13, 1.0
DAY = 86400.0
SHEET = {
    "schema_version": 1, "title": "plane sheet release", "geometry": "slab", "inner": "0 m",
    "layers": [{"name": "film", "thickness": "100 um", "diffusivity": "1e-13 m^2/s",
                "initial": "1 mol/m^3"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
    "regime": {"kind": "transient", "duration": "2 d", "times": ["6 h", "1 d", "2 d"]},
    "probes": ["0 m", "50 um"],
}


def crank_sheet(x: float, t: float, terms: int = 200) -> float:
    """C/C0 in a sheet -l < x < l, initially C0, both faces held at 0: J. Crank, The
    Mathematics of Diffusion, 2nd ed. (1975), eq. 4.17 (our sheet is its half 0 < x < l with
    the mid-plane sealed)."""
    total = 0.0
    for n in range(terms):
        k = 2 * n + 1
        total += (-1) ** n / k * math.exp(-DIFFUSIVITY * k * k * math.pi ** 2 * t
                                          / (4 * THICKNESS ** 2)) \
            * math.cos(k * math.pi * x / (2 * THICKNESS))
    return 4.0 / math.pi * total


@pytest.fixture(scope="module")
def record() -> dict:
    return check_case(SHEET)


def test_probe_rows_carry_their_numerical_uncertainty(record):
    probes = record["series"]["probes"]
    rows, bands = np.array(probes["concentration"]), np.array(probes["uncertainty"])
    assert bands.shape == rows.shape
    assert np.all(bands >= 0.0) and np.all(bands < 1e-3 * C0)
    for k, t in enumerate(probes["time"]):
        for j, x in enumerate(probes["position"]):
            assert rows[k, j] == pytest.approx(C0 * crank_sheet(x, t), abs=max(bands[k, j],
                                                                               1e-6))


def test_the_trial_solve_reads_a_probe_as_the_record_does(record):
    case = validate_case(SHEET)
    targets = [Target(PROBE, at=t * DAY, probe=j) for t in (1.0, 2.0) for j in (0, 1)]
    model = TrialModel(case.problem, ["layers[0].diffusivity"], targets)
    fast = model.nominal()
    for value, target in zip(fast, model.targets, strict=True):
        reading = read_figure(target, record["quantities"], record["series"], 2 * DAY)
        assert reading.value is not None
        assert abs(value - reading.value) <= max(reading.uncertainty or 0.0, 1e-9)
        assert value == pytest.approx(C0 * crank_sheet(case.problem.probes[target.probe],
                                                       target.at), rel=1e-6)
    doubled = model(np.array([[2 * DIFFUSIVITY]]))[0]
    assert np.all(doubled < fast)  # a faster sheet empties sooner


def test_a_probe_target_names_a_probe_of_the_case():
    case = validate_case(SHEET)
    with pytest.raises(TargetError, match="the case has 2 probes"):
        check_target(case.problem, Target(PROBE, at=DAY, probe=2))
    with pytest.raises(TargetError, match="probe index goes with"):
        check_target(case.problem, Target(PROBE, at=DAY))
    with pytest.raises(TargetError, match="probe index goes with"):
        check_target(case.problem, Target("release_fraction", at=DAY, probe=0))
