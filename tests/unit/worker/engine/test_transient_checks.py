"""The transient checks (``worker.engine.transient.checks``): cross-checks, the release GCI, and
the checks a solid or a two-face body gets.

Two kinds of test. The first feeds the route cross-checks (``transient.compare.compare_routes``,
a stand-in series as the primary route and stand-in numerical amounts as the other) and
``checks.space_check`` stand-in series and meshes with an error injected at one requested time,
and holds the reported value to the measure's definition: for the cross-checks
``relative_errors`` in ``worker.engine.transient.scales``, ``|a - b| / max(|b|, 0.01 * scale)``,
worst over the times where the series has converged; for the GCI, Celik et al. (2008), written
out above its tests.
Which times are judged and which face sets the flux scale are what these tests pin. The second
runs whole cases whose release has a published closed form (Crank, *The Mathematics of
Diffusion*, 2nd ed., 1975, eqs. 4.18 and 6.20, written out below) and asserts which checks a
solid or a two-face body gets and the reported release figures.

Scenario values are invented.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import checks, compare, run_transient
from worker.engine.transient.solution import Route

SINK = Boundary("concentration", 0.0)
SEALED = Boundary("symmetry")
D = 1.0e-11  # m^2/s

# Requested times of the stand-in tests: t = 0, two early times, and a last time at which the
# stand-in series has not converged (its values there are garbage and must not be judged).
TIMES = np.array([0.0, 0.5, 60.0, 600.0])
CONVERGED = np.array([True, True, True, False])
GARBAGE = 10.0  # factor applied to the numerical values at the unconverged time


def _floor_error(a, b, scale):
    """The cross-check error measure by its definition: relative to b (the method of lines for
    amounts and fluxes, the series for probes), absolute (a fraction 0.01 of ``scale``) where
    |b| is below that fraction."""
    return abs(a - b) / max(abs(b), 0.01 * scale)


def _problem(probes=()):
    return Problem("slab", 0.0, (Layer("film", 0.3e-3, D, 1.0, initial=1.0),), SINK, SINK,
                   Regime("transient", 600.0, tuple(TIMES)), probes=probes)


def _series(**arrays):
    base = {"released_inner": np.zeros(4), "released_outer": np.zeros(4),
            "remaining": np.zeros(4), "flux_inner": np.zeros(4), "flux_outer": np.zeros(4),
            "release_converged": CONVERGED.copy(), "converged": CONVERGED.copy(),
            "concentration_at": None}
    base.update(arrays)
    return SimpleNamespace(**base)


def _numerical(series, **changes):
    values = {name: np.array(getattr(series, name), dtype=float)
              for name in ("released_inner", "released_outer", "remaining", "flux_inner",
                           "flux_outer")}
    for name in values:
        values[name][~series.converged] *= GARBAGE
    values.update(changes)
    return values


def _run(series, numerical, *, problem=None, initial_load=1.0, amount_scale=1.0, c_scale=1.0,
         fine=None, diagnostics=None):
    """The stand-in series as the primary route, the stand-in numerical amounts (and ``fine``'s
    probe rows) as the other; events and the time lag from ``diagnostics`` as the run records
    them."""
    outcome = Outcome()
    outcome.diagnostics.update(diagnostics or {})
    problem = problem or _problem()
    events = (diagnostics or {}).get("events", {})
    amounts = {"consumed": np.zeros(TIMES.size),
               **{name: getattr(series, name) for name in
                  ("released_inner", "released_outer", "remaining", "flux_inner",
                   "flux_outer")}}
    everywhere = np.ones(TIMES.size, dtype=bool)
    primary = Route(
        "series", "", amounts, initial_load, series.release_converged | (TIMES == 0.0),
        series.converged,
        lambda r, k, layer: np.asarray(series.concentration_at(r, TIMES))[k][:np.size(r)]
        if series.concentration_at is not None else np.zeros(np.size(r)),
        {name: found["series"] for name, found in events.items()})
    other = Route(
        "lines", "", {"consumed": np.zeros(TIMES.size), **numerical}, initial_load,
        everywhere, everywhere,
        lambda r, k, layer: np.asarray(fine.profile_at(k)[0](r))[:np.size(r)]
        if fine is not None else np.zeros(np.size(r)),
        {name: found["numerical"] for name, found in events.items()})
    compare.compare_routes(outcome, problem, primary, [other], TIMES,
                           [(0, np.linspace(0.0, 0.3e-3, 3))], TIMES.size - 1, c_scale,
                           amount_scale)
    checks.time_lag_check(outcome, problem)
    return outcome


def _only(outcome, name):
    found = [c for c in outcome.checks if c.name == name]
    assert len(found) == 1, [c.name for c in outcome.checks]
    return found[0]


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_release_fraction_error_at_an_early_time_is_caught_either_way(sign):
    # Released per face: a fraction 0.0075 of the load each at t = 0.5 s (0.015 in all, between
    # the absolute floor 0.01 and twice it), 0.15 each at 60 s, 0.3 each at 600 s.
    outer = np.array([0.0, 0.0075, 0.15, 0.3])
    series = _series(released_inner=outer.copy(), released_outer=outer.copy())
    numerical = _numerical(series)
    numerical["released_outer"][1] += sign * 4.5e-6
    check = _only(_run(series, numerical), "cross_check.release_fraction")
    assert check.value == pytest.approx(_floor_error(0.015, 0.015 + sign * 4.5e-6, 1.0),
                                        rel=1e-9)
    assert check.value == pytest.approx(3e-4, rel=1e-3)
    assert not check.passed  # limit 1e-4
    assert "at 2 times" in check.detail and "worst at t = 0.5 s" in check.detail


def test_release_fraction_of_a_sound_case_passes_and_skips_the_unconverged_time():
    outer = np.array([0.0, 0.0075, 0.15, 0.3])
    series = _series(released_inner=outer.copy(), released_outer=outer.copy())
    numerical = _numerical(series)
    numerical["released_outer"][2] *= 1.0 + 1e-6
    check = _only(_run(series, numerical), "cross_check.release_fraction")
    assert check.value == pytest.approx(_floor_error(0.3, 0.3 + 0.15e-6, 1.0), rel=1e-6)
    assert check.passed


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_amounts_of_an_initially_empty_body_take_the_worst_of_the_three_per_time(sign):
    # No initial load: released at each face and the amount held are compared on the amount
    # scale; the worst of the three at each converged time, then the worst time.
    amount_scale = 2.0
    series = _series(released_inner=np.array([0.0, 0.1, 0.4, 0.6]),
                     released_outer=np.array([0.0, 0.2, 0.5, 0.9]),
                     remaining=np.array([0.0, 0.3, 0.9, 1.4]))
    numerical = _numerical(series)
    numerical["released_inner"][1] += sign * 2e-5  # 2e-5 / max(0.1, 0.02) = 2e-4 at t = 0.5 s
    numerical["remaining"][2] += sign * 9e-5  # 1e-4 at t = 60 s
    check = _only(_run(series, numerical, initial_load=0.0, amount_scale=amount_scale),
                  "cross_check.released")
    assert check.value == pytest.approx(_floor_error(0.1, 0.1 + sign * 2e-5, amount_scale),
                                        rel=1e-9)
    assert not check.passed
    assert "worst at t = 0.5 s" in check.detail


@pytest.mark.parametrize("large", ["inner", "outer"])
def test_face_flux_scale_is_the_largest_rate_of_either_face(large):
    # One face carries rates of order 1, the other of order 1e-3: an absolute error of 1e-6 on
    # the small face is judged against 0.01 of the largest face rate (1.0), not its own.
    small = "outer" if large == "inner" else "inner"
    fluxes = {f"flux_{large}": np.array([0.0, 1.0, 0.8, 0.5]),
              f"flux_{small}": np.array([0.0, 1e-3, 1e-3, 1e-3])}
    series = _series(**fluxes)
    numerical = _numerical(series)
    numerical[f"flux_{small}"][2] += 1e-6
    outcome = _run(series, numerical)
    check = _only(outcome, f"cross_check.flux_{small}")
    assert check.value == pytest.approx(_floor_error(1e-3, 1e-3 + 1e-6, 1.0), rel=1e-9)
    assert check.value == pytest.approx(1e-4, rel=1e-6)
    assert check.passed  # limit 1e-3
    assert "worst at t = 60.0 s" in check.detail
    assert _only(outcome, f"cross_check.flux_{large}").value == 0.0


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_face_flux_error_is_caught_and_the_unconverged_time_is_skipped(sign):
    series = _series(flux_outer=np.array([0.0, 2.0, 1.0, 0.5]))
    numerical = _numerical(series)
    numerical["flux_outer"][1] += sign * 4e-3  # 2e-3 of 2.0
    check = _only(_run(series, numerical), "cross_check.flux_outer")
    assert check.value == pytest.approx(_floor_error(2.0, 2.0 + sign * 4e-3, 2.0), rel=1e-9)
    assert check.value == pytest.approx(2e-3, rel=3e-3)
    assert not check.passed


def test_face_flux_check_with_no_converged_time_fails_instead_of_crashing():
    series = _series(flux_outer=np.array([0.0, 2.0, 1.0, 0.5]),
                     converged=np.zeros(4, dtype=bool))
    check = _only(_run(series, _numerical(series)), "cross_check.flux_outer")
    assert check.value is None  # no time to judge: failed, not skipped
    assert not check.passed


class _Fine:
    """Method-of-lines stand-in: ``profile_at(k)`` returns the interpolant of time k."""

    def __init__(self, rows):
        self.rows = np.asarray(rows, dtype=float)

    def profile_at(self, k):
        return (lambda r: self.rows[k],)


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_probe_error_in_the_initial_state_is_caught(sign):
    # At t = 0 the series is exact (the initial state) and the probe rows are compared even
    # though no flux is judged there; the unconverged last time is not compared.
    exact = np.array([[1.0, 1.0], [0.9, 1.0], [0.5, 0.8], [0.3, 0.5]])
    fv = exact.copy()
    fv[0, 1] += sign * 5e-3  # 5e-3 of the concentration scale 1.0 at t = 0
    fv[3] *= GARBAGE
    series = _series(concentration_at=lambda probes, times: exact)
    problem = _problem(probes=(0.1e-3, 0.2e-3))
    check = _only(_run(series, _numerical(series), problem=problem, fine=_Fine(fv)),
                  "cross_check.probes")
    assert check.value == pytest.approx(_floor_error(1.0 + sign * 5e-3, 1.0, 1.0), rel=1e-9)
    assert not check.passed
    assert "worst at t = 0.0 s" in check.detail


def test_probe_check_takes_the_worst_probe_of_each_converged_time():
    exact = np.array([[1.0, 1.0], [0.9, 1.0], [0.5, 0.8], [0.3, 0.5]])
    fv = exact.copy()
    fv[2, 0] += 2e-4  # 4e-4 of 0.5 at t = 60 s
    fv[3] *= GARBAGE
    series = _series(concentration_at=lambda probes, times: exact)
    problem = _problem(probes=(0.1e-3, 0.2e-3))
    check = _only(_run(series, _numerical(series), problem=problem, fine=_Fine(fv)),
                  "cross_check.probes")
    assert check.value == pytest.approx(4e-4, rel=1e-9)
    assert check.passed
    assert "worst at t = 60.0 s" in check.detail


@pytest.mark.parametrize("event", ["t50", "t90"])
@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_event_times_are_cross_checked_relative_to_the_series(event, sign):
    events = {"t50": {"series": 1000.0, "numerical": 1000.0},
              "t90": {"series": 4000.0, "numerical": 4000.0}}
    events[event]["numerical"] += sign * 0.8  # 8e-4 of t50, 2e-4 of t90: both above 1e-4
    series = _series()
    outcome = _run(series, _numerical(series), diagnostics={"events": events})
    check = _only(outcome, f"cross_check.{event}")
    expected = 0.8 / events[event]["series"]
    assert check.value == pytest.approx(expected, rel=1e-9)
    assert not check.passed
    assert f"{event} {events[event]['series']:.9g} s vs" in check.detail
    other = "t90" if event == "t50" else "t50"
    assert _only(outcome, f"cross_check.{other}").value == 0.0


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_time_lag_is_cross_checked_relative_to_the_series(sign):
    series = _series()
    lag = {"series": 1500.0, "numerical": 1500.0 + sign * 0.3}
    check = _only(_run(series, _numerical(series), diagnostics={"time_lag": lag}),
                  "cross_check.time_lag")
    assert check.value == pytest.approx(2e-4, rel=1e-9)
    assert not check.passed
    assert "series 1500 s" in check.detail


# Crank 1975 eq. 4.18: sheet -l < x < l, uniform C0, both faces held at zero:
# M_t/M_inf = 1 - sum_n 8/((2n+1)^2 pi^2) exp(-D (2n+1)^2 pi^2 t / (4 l^2)).
def crank_sheet_fraction(t, half):
    odd = 2 * np.arange(0, 2000) + 1
    return 1.0 - np.sum(8.0 / (odd**2 * np.pi**2) * np.exp(-(odd**2) * np.pi**2 * D * t
                                                             / (4 * half**2)))


# Crank 1975 eq. 6.20: sphere of radius a, uniform C0, surface held at zero:
# M_t/M_inf = 1 - (6/pi^2) sum_n (1/n^2) exp(-D n^2 pi^2 t / a^2).
def crank_sphere_fraction(t, radius):
    n = np.arange(1, 2000)
    return 1.0 - 6.0 / np.pi**2 * np.sum(np.exp(-D * n**2 * np.pi**2 * t / radius**2) / n**2)


def test_sheet_releasing_from_both_faces_checks_both_fluxes_and_the_release_gci():
    half = 0.3e-3
    duration = 12000.0
    sheet = Problem("slab", 0.0, (Layer("sheet", 2 * half, D, 1.0, initial=2.0),), SINK, SINK,
                    Regime("transient", duration, (0.0, 600.0, 3000.0, duration)),
                    probes=(0.2e-3,))
    outcome = run_transient(sheet)
    for name in ("cross_check.flux_inner", "cross_check.flux_outer", "cross_check.t50",
                 "cross_check.t90", "cross_check.probes", "convergence.space"):
        assert outcome.check(name) is not None, name
        assert outcome.check(name).passed, outcome.check(name).as_dict()
    # The GCI study is of the release through both faces: its extrapolated final value is the
    # amount Crank's eq. 4.18 gives (per m^2: load 2 * 2l * C0).
    load = 2.0 * 2 * half
    study = outcome.diagnostics["grid_study_final"]
    assert study["extrapolated"] == pytest.approx(load * crank_sheet_fraction(duration, half),
                                                  rel=1e-5)
    assert "GCI_fine of the release" in outcome.check("convergence.space").detail
    fraction = outcome.series["release_fraction"]["values"]
    assert fraction[-1] == pytest.approx(crank_sheet_fraction(duration, half), rel=1e-5)


@pytest.mark.parametrize("geometry", ["sphere", "cylinder"])
def test_solid_body_has_no_centre_flux_check_and_keeps_its_surface_check(geometry):
    radius = 0.5e-3
    duration = 9000.0
    body = Problem(geometry, 0.0, (Layer("core", radius, D, 1.0, initial=1.0),), SEALED, SINK,
                   Regime("transient", duration, (0.0, 500.0, 3000.0, duration)),
                   probes=(0.25e-3,))
    outcome = run_transient(body)
    names = [c.name for c in outcome.checks]
    assert "cross_check.flux_inner" not in names
    for name in ("cross_check.release_fraction", "cross_check.flux_outer",
                 "cross_check.probes", "cross_check.t50", "cross_check.t90"):
        assert name in names, names
        assert outcome.check(name).passed, outcome.check(name).as_dict()
    if geometry == "sphere":
        fraction = outcome.series["release_fraction"]["values"]
        assert fraction[1] == pytest.approx(crank_sphere_fraction(500.0, radius), rel=1e-5)
        assert fraction[-1] == pytest.approx(crank_sphere_fraction(duration, radius), rel=1e-5)


# The release GCI (``checks.space_check``) on stand-in meshes of 50, 100 and 200 cells. With
# values phi = phi* + c h^2 the three-grid study of Celik et al., "Procedure for estimation and
# reporting of uncertainty due to discretization in CFD applications", J. Fluids Eng. 130 (2008)
# 078001, gives the apparent order p = ln(eps32/eps21)/ln 2 = 2 exactly and
# GCI_fine = 1.25 e_a / (2^p - 1) with e_a = |eps21 / phi1| = 3c/phi1, so 1.25 c / phi1: the
# check reports it times |phi1| over the amount scale, i.e. 1.25 c / amount_scale.
GCI_TIMES = np.array([0.0, 0.5, 1000.0])
AMOUNT_SCALE = 2.0


def _meshes(exact, c, *, inner_share=0.25, held=False, unit=1.0):
    """Coarse, medium, fine stand-ins whose release (or amount held) is exact + c h^2, in
    ``unit`` times the amount scale's unit."""
    exact, c = unit * np.asarray(exact, dtype=float), unit * np.asarray(c, dtype=float)
    meshes = []
    for cells, h_squared in ((50, 16.0), (100, 4.0), (200, 1.0)):
        amount = exact + c * h_squared
        zero = np.zeros_like(amount)
        meshes.append(SimpleNamespace(
            diagnostics={"cells_per_layer": [cells]},
            released_inner=zero if held else inner_share * amount,
            released_outer=zero if held else (1.0 - inner_share) * amount,
            remaining=amount if held else unit * AMOUNT_SCALE - amount))
    return meshes


def _space(meshes, unit=1.0):
    outcome = Outcome()
    checks.space_check(outcome, _problem(), meshes, GCI_TIMES, GCI_TIMES.size - 1,
                       unit * AMOUNT_SCALE)
    return outcome, _only(outcome, "convergence.space")


@pytest.mark.parametrize("unit", [1.0, 1e-6])  # amounts of order 1 and of micromoles
@pytest.mark.parametrize("held", [False, True])
def test_release_gci_is_celik_gci_fine_on_the_amount_scale(held, unit):
    # Nothing released (a sealed body that consumes): the study is of the amount held.
    outcome, check = _space(_meshes([0.0, 0.5, 1.0], [0.0, 1e-5, 4e-5], held=held, unit=unit),
                            unit)
    assert check.value == pytest.approx(1.25 * 4e-5 / AMOUNT_SCALE, rel=1e-9)
    assert check.passed
    quantity = "amount held" if held else "release"
    assert f"GCI_fine of the {quantity} on meshes of [200, 100, 50] cells" in check.detail
    assert "worst at t = 1000 s" in check.detail
    study = outcome.diagnostics["grid_study_final"]
    assert study["apparent_order"] == pytest.approx(2.0, rel=1e-12)
    assert study["extrapolated"] == pytest.approx(unit, rel=1e-12)


@pytest.mark.parametrize("c_final", [4e-3, -4e-3])
def test_release_gci_above_its_limit_fails_either_sign(c_final):
    check = _space(_meshes([0.0, 0.5, 1.0], [0.0, 1e-5, c_final]))[1]
    assert check.value == pytest.approx(1.25 * 4e-3 / AMOUNT_SCALE, rel=1e-9)
    assert not check.passed  # limit 1e-3


def test_meshes_agreeing_to_round_off_have_no_discretisation_error():
    # Differences of 1e-12 of the value are round-off for the study (its band is 1e-8).
    check = _space(_meshes([0.0, 0.5, 1.0], [0.0, 1e-13, 1e-13]))[1]
    assert check.value == 0.0
    assert check.passed is True


def _wobbled(wobble, at, c_final=4e-5):
    # the meshes alternate by +-wobble at the times ``at``: eps32 = -eps21, no apparent order
    meshes = _meshes([0.0, 0.5, 1.0], [0.0, 0.0, c_final])
    for mesh, sign in zip(meshes, (1.0, -1.0, 1.0), strict=True):
        shift = np.zeros(GCI_TIMES.size)
        shift[list(at)] = sign * wobble
        mesh.released_outer = mesh.released_outer + shift
    return meshes


@pytest.mark.parametrize("wobble, passed", [(1e-5, True), (1e-3, False)])
def test_a_time_without_an_order_among_converging_times_gets_roaches_band(wobble, passed):
    # At t = 0.5 s the meshes oscillate without shrinking; t = 1000 s converges at order 2.
    # The band there is Roache's (J. Fluids Eng. 116 (1994) 405) safety factor 3 on the larger
    # mesh difference (2 wobble), relative to the amount scale; limit 1e-3.
    check = _space(_wobbled(wobble, [1]))[1]
    assert check.value == pytest.approx(3.0 * 2.0 * wobble / AMOUNT_SCALE, rel=1e-6)
    assert check.passed is passed
    assert "1 of 2 times without an observed order" in check.detail


def test_most_times_without_an_order_fail_the_check_and_are_named():
    # Both requested times oscillate without shrinking: no band is formed.
    check = _space(_wobbled(1e-6, [1, 2], c_final=0.0))[1]
    assert check.value is None
    assert check.passed is False
    assert check.limit == pytest.approx(1e-3)
    assert check.detail.startswith("grid study gave no error band at t = 0.5 s")


# ``checks.time_check``: the amounts on the coarse mesh against a run whose integrator tolerance
# is TIME_TIGHTENING (10) times tighter; the value is the largest change of any amount over the
# amount scale (its definition in the module).
def _coarse(**amounts):
    base = {"remaining": np.array([2.0, 1.5, 1.0]), "released_inner": np.zeros(3),
            "released_outer": np.array([0.0, 0.5, 1.0]), "consumed": np.zeros(3)}
    base.update(amounts)
    # the mesh as the re-solve builds it again (``Mesh.spec``: cells per layer, or a grading)
    return SimpleNamespace(rtol=1e-6, diagnostics={"cells_per_layer": [50]},
                           mesh=SimpleNamespace(spec=(50,)), **base)


def _time_check(monkeypatch, tight):
    calls = []

    def tightened(problem, times, cells, *, end, rtol):
        calls.append({"cells": cells, "end": end, "rtol": rtol})
        return tight

    monkeypatch.setattr(checks.method_of_lines, "solve_transient_fv", tightened)
    outcome = Outcome()
    checks.time_check(outcome, _problem(), _coarse(), GCI_TIMES, 1000.0, AMOUNT_SCALE)
    return _only(outcome, "convergence.time"), calls


@pytest.mark.parametrize("change", [3e-5, -3e-5])
def test_time_check_is_the_largest_change_under_a_tenfold_tighter_tolerance(monkeypatch,
                                                                           change):
    coarse = _coarse()
    tight = SimpleNamespace(success=True, rtol=1e-7, remaining=coarse.remaining.copy(),
                            released_inner=coarse.released_inner.copy(),
                            released_outer=coarse.released_outer + np.array([0, change, 0]),
                            consumed=coarse.consumed.copy())
    check, calls = _time_check(monkeypatch, tight)
    assert calls == [{"cells": (50,), "end": 1000.0, "rtol": pytest.approx(1e-7, rel=1e-12)}]
    assert check.value == pytest.approx(3e-5 / AMOUNT_SCALE, rel=1e-9)
    assert not check.passed  # limit 1e-5
    assert "worst at t = 0.5 s" in check.detail


def test_time_check_fails_when_the_tightened_run_fails(monkeypatch):
    tight = SimpleNamespace(success=False, message="step size fell below its floor")
    check, _ = _time_check(monkeypatch, tight)
    assert check.value is None
    assert check.limit == pytest.approx(1e-5)
    assert check.passed is False
    assert check.detail == "tightened integration failed: step size fell below its floor"


# ``checks.steady_limit_check`` when it cannot compare: a check that compared nothing fails and
# says why; a body with no steady state (sealed faces, no first-order loss) gets a warning only.
def _steady_limit(monkeypatch, late, reference, problem=None):
    monkeypatch.setattr(checks.solve, "late_state", lambda problem, fine, duration: late)
    monkeypatch.setattr(checks.solve, "steady_reference", lambda problem: reference)
    outcome = Outcome()
    checks.steady_limit_check(outcome, problem or _problem(), SimpleNamespace(), 600.0, 1.0,
                              AMOUNT_SCALE)
    return outcome


@pytest.mark.parametrize(("late", "reference", "reason"), [
    (SimpleNamespace(success=False, message="late run failed"),
     SimpleNamespace(success=True, message="exact"), "late run failed"),
    (SimpleNamespace(success=True, message="ok"), None, "none"),
    (SimpleNamespace(success=True, message="ok"),
     SimpleNamespace(success=False, message="no steady solution"), "no steady solution"),
])
def test_steady_limit_that_cannot_compare_fails_and_says_why(monkeypatch, late, reference,
                                                               reason):
    check = _only(_steady_limit(monkeypatch, late, reference), "steady_limit")
    assert check.value is None
    assert check.limit == pytest.approx(1e-4)
    assert check.passed is False
    assert check.detail == f"could not compare with the steady state: {reason}"


def test_body_without_a_steady_state_gets_a_warning_and_no_steady_limit(monkeypatch):
    sealed = Problem("slab", 0.0, (Layer("film", 0.3e-3, D, 1.0, initial=1.0),), SEALED, SEALED,
                     Regime("transient", 600.0, tuple(TIMES)))
    outcome = _steady_limit(monkeypatch, None, None, problem=sealed)
    assert outcome.checks == []
    assert outcome.warnings == ["steady_limit: no steady state (no concentration or "
                                "mass-transfer face and no first-order loss): not checked"]


# ``checks.steady_limit_check`` when it compares (its docstring): face rates r^n J at the last
# late time against the steady engine, over the throughput = the largest of |r_in^n J_in|,
# |r_out^n J_out|, |consumption| and amount_scale / measure_factor / tau; cell concentrations
# over the concentration scale; the value is the larger. A hollow sphere (n = 2) of one layer,
# inner radius 1 mm, wall 1 mm, D = 1e-11 m^2/s: tau = L^2/D = 1e5 s (capacity K L times
# resistance L/(K D)), measure factor 4 pi.
SHELL_INNER, SHELL_OUTER, TAU = 1e-3, 2e-3, 1e5


def _shell():
    return Problem("sphere", SHELL_INNER, (Layer("shell", SHELL_OUTER - SHELL_INNER, D, 1.0,
                                                 initial=1.0),),
                   Boundary("concentration", 1.0), SINK, Regime("transient", 600.0, (600.0,)))


def _late_and_reference(j_in, j_out, late_j_in, late_j_out, c_offsets):
    centres = np.array([1.25e-3, 1.75e-3])
    steady = np.array([0.7, 0.3])

    def concentration_at(r, *, layer):
        assert layer == 0 and isinstance(layer, int)
        return steady[np.searchsorted(centres, r)]

    garbage = np.array([50.0, 50.0])
    late = SimpleNamespace(
        success=True, times=np.array([1e3, 2e3, 5e6]),
        flux_inner=np.array([99.0, 99.0, late_j_in]), flux_outer=np.array([99.0, 99.0, late_j_out]),
        mesh=SimpleNamespace(centres=centres, layer_index=np.array([0, 0])),
        cells=np.array([garbage, garbage, steady + np.asarray(c_offsets)]))
    reference = SimpleNamespace(success=True, method="exact", flux_inner=j_in, flux_outer=j_out,
                                consumption=0.0, concentration_at=concentration_at)
    return late, reference


def _compare(monkeypatch, late, reference, amount_scale, c_scale):
    monkeypatch.setattr(checks.solve, "late_state", lambda problem, fine, duration: late)
    monkeypatch.setattr(checks.solve, "steady_reference", lambda problem: reference)
    outcome = Outcome()
    checks.steady_limit_check(outcome, _shell(), SimpleNamespace(), 600.0, c_scale, amount_scale)
    return _only(outcome, "steady_limit")


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_steady_limit_rates_are_weighted_by_r_squared_over_the_throughput(monkeypatch, sign):
    # Throughput max(1e-6 * 2, 4e-6 * 1) = 4e-6 (the amount term is 1e-3/(4 pi)/1e5 ~ 8e-10).
    # Inner face off by 0.5: 1e-6 * 0.5 / 4e-6 = 0.125; outer off by 0.01: 0.01; cells off
    # by 0.02 on a scale of 2: 0.01.
    late, reference = _late_and_reference(-2.0, 1.0, -2.0 + sign * 0.5, 1.0 + sign * 0.01,
                                          [0.0, sign * 0.02])
    check = _compare(monkeypatch, late, reference, amount_scale=1e-3, c_scale=2.0)
    assert check.value == pytest.approx(SHELL_INNER**2 * 0.5 / (SHELL_OUTER**2 * 1.0), rel=1e-9)
    assert not check.passed
    assert check.detail.startswith("state at t = 5e+06 s")
    assert "face rates 0.125 of the throughput, cell concentrations 0.01 of the scale" \
        in check.detail


def test_steady_limit_of_a_state_carrying_nothing_uses_the_relaxation_rate(monkeypatch):
    # Steady fluxes zero: the throughput is amount_scale / (4 pi) / tau = 1e-6 here, the outer
    # rate off by 4e-6 * 0.01 = 4e-8 gives 0.04; cells off by 0.09 of a scale of 3: 0.03.
    amount_scale = 4.0 * np.pi * TAU * 1e-6
    late, reference = _late_and_reference(0.0, 0.0, 0.0, 0.01, [-0.09, 0.0])
    check = _compare(monkeypatch, late, reference, amount_scale=amount_scale, c_scale=3.0)
    assert check.value == pytest.approx(0.04, rel=1e-9)
    assert "face rates 0.04 of the throughput, cell concentrations 0.03 of the scale" \
        in check.detail
    late, reference = _late_and_reference(0.0, 0.0, 0.0, 1e-6, [-0.09, 0.0])
    check = _compare(monkeypatch, late, reference, amount_scale=amount_scale, c_scale=3.0)
    assert check.value == pytest.approx(0.03, rel=1e-9)  # the cells decide
    assert not check.passed


# ``checks.mass_balance_check``: |initial - remaining - released (both faces) - consumed| over
# the larger of the initial load and the largest throughput |in| + |out| + |consumed|.
def _balance(initial_load, remaining, released_inner, released_outer, consumed, tolerances=None):
    fine = SimpleNamespace(initial_load=initial_load, remaining=np.asarray(remaining),
                           released_inner=np.asarray(released_inner),
                           released_outer=np.asarray(released_outer),
                           consumed=np.asarray(consumed))
    problem = _problem()
    if tolerances:
        problem = Problem(problem.geometry, problem.inner, problem.layers, problem.inner_boundary,
                          problem.outer_boundary, problem.regime, tolerances=tolerances)
    outcome = Outcome()
    checks.mass_balance_check(outcome, problem, fine, np.array([0.0, 10.0, 20.0]))
    return _only(outcome, "mass_balance")


@pytest.mark.parametrize("unit", [1.0, 1e-6])  # amounts of order 1 and of micromoles
@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_mass_balance_of_an_empty_body_is_relative_to_its_throughput(sign, unit):
    # No initial load: 2.0 taken up at the inner face (a negative release), 1.0 released at the
    # outer face, 0.3 consumed, so 0.7 is held; the record holds 0.7 -/+ 3e-6.
    amounts = [[0.0, 0.6, 0.7 - sign * 3e-6], [0.0, -1.0, -2.0], [0.0, 0.3, 1.0], [0.0, 0.1, 0.3]]
    check = _balance(0.0, *(unit * np.array(a) for a in amounts))
    assert check.value == pytest.approx(3e-6 / (2.0 + 1.0 + 0.3), rel=1e-6)
    assert not check.passed  # limit 1e-8
    assert "worst at t = 20.0 s" in check.detail


def test_mass_balance_of_a_body_with_nothing_in_it_is_zero():
    check = _balance(0.0, [0.0, 0.0, 0.0], [0.0, 0.0, 0.0], [0.0, 0.0, 0.0], [0.0, 0.0, 0.0])
    assert check.value == 0.0
    assert check.passed


def test_a_check_exactly_at_its_limit_passes():
    # The limit is the largest value allowed: 0.125 of a load of 1 is exactly at it.
    check = _balance(1.0, [1.0, 0.5, 0.125], [0.0, 0.0, 0.0], [0.0, 0.5, 0.75], [0.0, 0.0, 0.0],
                     tolerances={"mass_balance": 0.125})
    assert check.value == 0.125
    assert check.limit == 0.125
    assert check.passed


@pytest.mark.parametrize(("lowest", "value"), [(-0.05, 0.025), (0.0, 0.0), (0.3, 0.0)])
def test_non_negativity_is_the_most_negative_cell_over_the_concentration_scale(lowest, value):
    cells = np.array([[1.0, 0.8], [0.6, lowest], [0.5, 0.4]])
    outcome = Outcome()
    compare.reported_series_sign_check(outcome, _problem(), float(np.min(cells)), 2.0, 1.0, 1.0)
    check = _only(outcome, "non_negativity")
    assert check.value == pytest.approx(value, rel=1e-12)
    assert check.passed is (value == 0.0)  # limit 1e-8
    assert f"numerical cells at {min(lowest, 0.4) / 2.0:.3g}" in check.detail


def test_mass_balance_with_no_load_and_no_throughput_is_the_absolute_amount_held():
    # Nothing loaded, released or consumed, yet 3e-8 held: there is no scale to divide by.
    check = _balance(0.0, [0.0, 0.0, 3e-8], [0.0, 0.0, 0.0], [0.0, 0.0, 0.0], [0.0, 0.0, 0.0])
    assert check.value == pytest.approx(3e-8, rel=1e-12)
    assert not check.passed
