"""Release at a very early first requested time against Crank's closed forms: the meshes graded
towards the releasing face (``fv_grading``, ``transient.early_mesh``; the Galerkin route's own
``transient.galerkin_grading``).

Check values (computed here from the formulas, not by the engine):

* sphere of radius a releasing into a sink, M_t/M_inf = 1 - (6/pi^2) sum 1/n^2
  exp(-D n^2 pi^2 t / a^2) (J. Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, eq. 6.20,
  from memory; the same series in H.S. Carslaw, J.C. Jaeger, *Conduction of Heat in Solids*,
  2nd ed., 1959, §9.3);
* solid cylinder of radius a into a sink, M_t/M_inf = 1 - sum 4/(a^2 alpha_n^2)
  exp(-D alpha_n^2 t), J0(a alpha_n) = 0 (Crank 1975 eq. 5.23, from memory);
* plane sheet, the short-time form M_t/M_inf = 2 (D t / l^2)^(1/2) {pi^(-1/2) + 2 sum (-1)^n
  ierfc(n l / (2 (D t)^(1/2)))} (Crank 1975 eq. 4.18) for a sheet -l < x < l releasing from both
  faces, the same for a sheet of thickness l sealed on one side (its mirror image); for the
  times here the ierfc terms are below 1e-300, so M_t/M_inf = 2 (D t / l^2)^(1/2) / pi^(1/2),
  i.e. 4 (D t / L^2)^(1/2) / pi^(1/2) with L = 2 l the full thickness of the sheet releasing
  from both faces.

Scenario values (a 0.1 mm body, D = 1e-10 m^2/s, first time at D t1 / a^2 = 1e-6) are invented.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import jn_zeros

from worker.engine import fv_mesh
from worker.engine.fv_grading import GradedCells
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient import early_mesh, galerkin_grading, run_transient, solve

D = 1.0e-10  # m^2/s
A = 1.0e-4  # m
TAU_FIRST = 1.0e-6  # D t1 / a^2
T1 = TAU_FIRST * A * A / D  # s
DURATION = 0.3 * A * A / D  # s
TIMES = (0.0, T1, 1e-4 * A * A / D, 1e-2 * A * A / D, DURATION)
SINK = Boundary("concentration", 0.0)
SEALED = Boundary("symmetry")


def _case(geometry, inner=SEALED, reaction=None):
    layer = Layer("matrix", A, D, 1.0, initial=1.0,
                  reaction=reaction if reaction is not None else Reaction())
    return Problem(geometry, 0.0, (layer,), inner, SINK, Regime("transient", DURATION, TIMES),
                   area=1.0e-4 if geometry == "slab" else None)


def _sphere_fraction(tau: float) -> float:
    """Crank 1975 eq. 6.20, summed to n = 40000 (the tail past it is below 1e-12 of the sum's
    terms at tau >= 1e-6: exp(-n^2 pi^2 tau) < exp(-15000))."""
    n = np.arange(1, 40001, dtype=float)
    return float(1.0 - 6.0 / math.pi**2 * np.sum(np.exp(-n * n * math.pi**2 * tau) / (n * n)))


def _cylinder_fraction(tau: float) -> float:
    """Crank 1975 eq. 5.23 with the first 6000 zeros of J0 (a alpha_6000 ~ 18850: the
    neglected terms are below exp(-355) at tau = 1e-6); the tail sum of 4/(a alpha)^2 past
    them, about 4/(pi^2 6000) = 6.8e-5, is added back as 1 - sum over the kept zeros is what
    the series subtracts: M = sum_{kept} 4/(a alpha)^2 (1 - exp(-alpha^2 a^2 tau)) + tail."""
    roots = jn_zeros(0, 6000)
    weights = 4.0 / roots**2
    kept = float(np.sum(weights * -np.expm1(-roots**2 * tau)))
    tail = 1.0 - float(np.sum(weights))  # sum over all zeros of 4/(a alpha)^2 is 1
    return kept + tail


def _sheet_fraction(tau: float) -> float:
    """Crank 1975 eq. 4.18's leading term for a sheet of thickness a sealed on one side."""
    return 2.0 * math.sqrt(tau) / math.sqrt(math.pi)


EXACT = {"sphere": _sphere_fraction, "cylinder": _cylinder_fraction, "slab": _sheet_fraction}


def test_the_check_values_agree_with_each_others_short_time_forms():
    # the series against their own short-time expansions (Crank 1975 eqs. 6.21 and 5.24,
    # from memory): sphere 6 sqrt(tau/pi) - 3 tau, cylinder 4 sqrt(tau/pi) - tau
    tau = TAU_FIRST
    assert _sphere_fraction(tau) == pytest.approx(6.0 * math.sqrt(tau / math.pi) - 3.0 * tau,
                                                  rel=1e-9)
    assert _cylinder_fraction(tau) == pytest.approx(
        4.0 * math.sqrt(tau / math.pi) - tau - tau**1.5 / (3.0 * math.sqrt(math.pi)), rel=1e-7)


@pytest.fixture(scope="module", params=["sphere", "cylinder", "slab"])
def early(request):
    problem = _case(request.param)
    return request.param, problem, run_transient(problem)


def test_every_own_check_passes(early):
    geometry, _, outcome = early
    failed = [(c.name, c.value, c.limit) for c in outcome.checks if not c.passed]
    assert failed == [], geometry
    names = {c.name for c in outcome.checks}
    assert {"convergence.space", "cross_check.release_fraction", "cross_check.flux_outer",
            "mass_balance"} <= names
    grading = outcome.diagnostics["mesh_grading"]
    assert grading == [{"cells": 250, "towards": "outer",
                        "stretch": pytest.approx(4.6706, rel=1e-4)}]


def test_method_of_lines_on_graded_meshes_matches_crank(early):
    geometry, problem, _ = early
    internal = np.asarray(TIMES)
    fvs = solve.fv_on_meshes(problem, internal, DURATION)
    assert all(isinstance(f.mesh.grading, GradedCells) for f in fvs)
    best = solve.extrapolated(fvs, internal)
    for k, t in enumerate(TIMES[1:4], start=1):
        exact = EXACT[geometry](D * t / A**2)
        released = (best["released_outer"][k] + best["released_inner"][k]) / fvs[-1].initial_load
        # the release cross-check's limit (1e-4 of the value)
        assert released == pytest.approx(exact, rel=1e-4), (geometry, t)
        fine = fvs[-1].released_outer[k] / fvs[-1].initial_load
        assert fine == pytest.approx(exact, rel=1e-3), (geometry, t)
    # second order on the smoothly graded meshes (Ferziger & Peric 2002, section 3.3.4): the
    # observed order of the release at t1 from the three meshes
    coarse, medium, fine = (f.released_outer[1] for f in fvs)
    order = math.log2((coarse - medium) / (medium - fine))
    assert 1.8 < order < 2.2, order


def test_early_release_follows_the_square_root_law():
    # a sheet of thickness a sealed on one side, and one of full thickness a releasing from both
    # faces: 2 sqrt(D t / a^2 / pi) and 4 sqrt(D t / a^2 / pi) (Crank 1975 eq. 4.18)
    internal = np.asarray(TIMES)
    for inner, factor in ((SEALED, 2.0), (SINK, 4.0)):
        problem = _case("slab", inner=inner)
        fvs = solve.fv_on_meshes(problem, internal, DURATION)
        assert fvs[0].mesh.grading.sides == (("both",) if inner is SINK else ("outer",))
        best = solve.extrapolated(fvs, internal)
        released = (best["released_outer"] + best["released_inner"]) / fvs[-1].initial_load
        for k in (1, 2):
            law = factor * math.sqrt(D * TIMES[k] / A**2 / math.pi)
            assert released[k] == pytest.approx(law, rel=1e-4), (factor, TIMES[k])


def test_without_the_grading_the_same_case_fails_its_own_checks(monkeypatch):
    # the defect the grading mends (issue 14): the capped uniform coarse mesh
    monkeypatch.setattr(early_mesh, "GRADING_TRIGGER", math.inf)
    outcome = run_transient(_case("sphere"))
    failed = {c.name for c in outcome.checks if not c.passed}
    assert {"convergence.space", "cross_check.release_fraction"} <= failed


@pytest.mark.parametrize("factor", [1.0 + 1e-3, 1.0 - 1e-3])
def test_a_wrong_cell_volume_on_the_graded_mesh_fails_a_check(monkeypatch, factor):
    original = fv_mesh.cell_geometry

    def wrong(faces, n):
        centres, areas, volumes, west, east = original(faces, n)
        widths = np.diff(faces)
        # the cells of a graded layer: neighbours of unequal width (uniform cells are equal to
        # round-off; the spacer cells between stacked meshes are not cells of a layer)
        graded = np.zeros(widths.size, dtype=bool)
        graded[1:] |= ~np.isclose(widths[1:], widths[:-1], rtol=1e-9, atol=0.0)
        return centres, areas, np.where(graded, volumes * factor, volumes), west, east

    monkeypatch.setattr(fv_mesh, "cell_geometry", wrong)
    outcome = run_transient(_case("sphere"))
    failed = {c.name for c in outcome.checks if not c.passed}
    assert {"cross_check.initial_load", "cross_check.release_fraction"} <= failed


def test_galerkin_route_on_its_graded_elements_agrees_at_the_first_time(monkeypatch):
    # zero-order consumption: no exact route, the Galerkin elements are the second one
    zero = Reaction("zero_order", rate=1e-3)
    outcome = run_transient(_case("slab", reaction=zero))
    assert [c.name for c in outcome.checks if not c.passed] == []
    assert outcome.diagnostics["galerkin_grading"][0]["towards"] == "outer"
    fraction = outcome.series["release_fraction"]["values"][1]
    # consumption over t1 takes at most rate t1 / C0 = 1e-7 of the load: the square-root law
    assert fraction == pytest.approx(_sheet_fraction(TAU_FIRST), rel=1e-3)
    monkeypatch.setattr(galerkin_grading, "GRADING_TRIGGER", math.inf)
    uniform = run_transient(_case("slab", reaction=zero))
    assert "cross_check.release_fraction" in {c.name for c in uniform.checks if not c.passed}


@pytest.mark.parametrize("kind", ["compartment", "dispersed"])
def test_compartment_and_dispersed_cases_pass_their_published_checks(kind):
    # a stirred compartment of limited volume (checked against Crank 1975 §6.3.4's
    # limited-volume sphere) and a dispersed load three times the solubility (checked against
    # Paul & McSpadden, J. Membr. Sci. 1 (1976) 33, the moving front's similarity solution)
    if kind == "compartment":
        problem = Problem("sphere", 0.0, (Layer("matrix", A, D, 1.0, initial=1.0),), SEALED,
                          Boundary("compartment", volume=4e-12), Regime("transient", DURATION,
                                                                        TIMES))
        published = "cross_check.limited_volume"
    else:
        problem = Problem("slab", 0.0, (Layer("matrix", A, D, 1.0, initial=3.0,
                                              solubility=1.0),), SEALED, SINK,
                          Regime("transient", DURATION, TIMES), area=1.0e-4)
        published = "cross_check.dispersed_similarity"
    outcome = run_transient(problem)
    assert [c.name for c in outcome.checks if not c.passed] == []
    assert published in {c.name for c in outcome.checks}
    assert outcome.diagnostics["mesh_grading"][0]["towards"] == "outer"
