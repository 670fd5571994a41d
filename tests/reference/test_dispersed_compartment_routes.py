"""A layer loaded above its solubility releasing into a ``compartment`` (a stirred finite
volume), checked by two discretisations: the method of lines and the Galerkin route, every
figure of the record compared (``transient.compare``): the cases pass, a wrong fluid volume in
either route fails, either way, and the Galerkin route's face rate, whose nested meshes can
agree while a dissolution front steps it (``front_staircase``), carries that step in its band:
the band covers the closed form, and a face rate beyond it fails (the same coating into a
perfect sink, where the route already ran, shows the same step and the same cure).

Sources, beside each test:

* A solution in contact with undissolved solute is saturated: where the medium cannot dissolve
  the whole load, the stirred fluid ends at the solubility (K_face / K times the layer's
  solubility; common practice of dissolution testing, T. Higuchi, J. Pharm. Sci. 50 (1961)
  874 for the dispersed matrix).
* The compartment balance V dC_f/dt = A J_out (the definition of a stirred volume; common
  practice): a route that holds a wrong fluid volume moves the release and the face rate, and
  the comparison with the other route must see it, either way.
* A slab loaded at A above its solubility Cs, releasing into a perfect sink, follows the
  similarity solution of D.R. Paul, S.K. McSpadden, J. Membr. Sci. 1 (1976) 33 until its front
  reaches the sealed face: face flux D Cs / (erf(eta) sqrt(pi D t)), eta the root of
  sqrt(pi) eta exp(eta^2) erf(eta) = Cs / (A - Cs) (found here with mpmath). A stirred volume
  so large that its fluid stays below 1e-4 of the solubility is that sink to 1e-4.

Scenario values are invented.
"""

from __future__ import annotations

import dataclasses

import mpmath
import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.transient import galerkin, method_of_lines, run_transient
from worker.engine.transient import run as run_module
from worker.engine.transient.routes import add_front_flux_band, galerkin_route

DAY = 86400.0


def _coating():
    """A 20 um coating at 25 times its solubility releasing through its outer face into 3 mL
    over 30 d (the whole load dissolves in the medium)."""
    times = tuple(DAY * t for t in (0.5, 2.0, 5.0, 10.0, 20.0, 30.0))
    return Problem("slab", 0.0, (Layer("coating", 2e-5, 4e-15, 5.0, initial=100.0,
                                       solubility=4.0),),
                   Boundary("symmetry"), Boundary("compartment", volume=3e-6),
                   Regime("transient", 30 * DAY, times), area=1e-4)


def _bead():
    """A 1 mm bead at 10 times its solubility in 0.02 mL of medium: the medium saturates while
    undissolved solute remains."""
    times = tuple(DAY * t for t in (0.1, 0.5, 1.0, 2.0, 5.0, 10.0))
    return Problem("sphere", 0.0, (Layer("bead", 1e-3, 1e-11, 1.0, initial=20.0,
                                         solubility=2.0),),
                   Boundary("symmetry"), Boundary("compartment", volume=2e-8),
                   Regime("transient", 10 * DAY, times))


def _tube():
    """A tube wall at 10 times its solubility releasing into a 50 mL lumen (inner face),
    sealed outside."""
    times = tuple(DAY * t for t in (0.1, 0.5, 1.0, 2.0, 5.0, 10.0))
    return Problem("cylinder", 5e-4, (Layer("wall", 5e-4, 1e-11, 2.0, initial=30.0,
                                            solubility=3.0),),
                   Boundary("compartment", volume=5e-5), Boundary("flux"),
                   Regime("transient", 10 * DAY, times), length=1e-2)


def _checks(outcome):
    return {c.name: c for c in outcome.checks}


@pytest.mark.parametrize(("make", "side"), [(_coating, "outer"), (_bead, "outer"),
                                            (_tube, "inner")])
def test_dispersed_layer_behind_a_compartment_is_compared_by_two_routes(make, side):
    outcome = run_transient(make())
    names = [m["name"] for m in outcome.methods]
    assert any(name.startswith("Galerkin") for name in names)
    checks = _checks(outcome)
    for name in ("cross_check.release_fraction", "cross_check.remaining",
                 f"cross_check.flux_{side}", "cross_check.profile",
                 "cross_check.concentration_min"):
        assert name in checks, name
    failed = [(c.name, c.value, c.detail) for c in outcome.checks if not c.passed]
    assert not failed
    band = outcome.series[f"compartment_{side}"]["uncertainty"]
    assert all(u is not None for u in band)  # the second route compares the level
    # the fronts get their second route, and so does the depletion time where there is one
    assert "cross_check.front_position" in checks
    depleted = outcome.quantities["time_depleted_layers"]["value"]
    assert ("cross_check.time_depleted" in checks) == any(t is not None for t in depleted)


def test_the_medium_of_a_bead_ends_saturated_by_both_routes():
    """Exact: undissolved solute remains, so the stirred fluid ends at the solubility (K_face
    = K: the fluid at 2.0) in both routes, and the record's uncertainty of that level is the
    routes' difference."""
    outcome = run_transient(_bead())
    entry = outcome.series["compartment_outer"]
    assert entry["values"][-1] == pytest.approx(2.0, rel=1e-5)
    assert entry["uncertainty"][-1] < 1e-5 * 2.0
    assert outcome.quantities["time_depleted_layers"]["value"] == [None]


def _scaled(monkeypatch, module, name, factor):
    original = getattr(module, name)
    monkeypatch.setattr(module, name, lambda *args: factor * original(*args))


@pytest.mark.parametrize("factor", [1.02, 0.98])
@pytest.mark.parametrize(("module", "name"), [(galerkin, "_fluid_per_weight"),
                                              (method_of_lines, "compartment_capacity")])
def test_a_wrong_fluid_volume_in_either_route_fails_the_comparison(monkeypatch, module, name,
                                                                   factor):
    """An error of 2 % in one route's own compartment capacity (the Galerkin route's face
    node, or the method of lines' coupling), either way: the release, the amount held and the
    face rate of the two routes part beyond the limits."""
    _scaled(monkeypatch, module, name, factor)
    checks = _checks(run_transient(_bead()))
    for check in ("cross_check.release_fraction", "cross_check.remaining",
                  "cross_check.flux_outer"):
        assert not checks[check].passed, (check, checks[check].value)


def _early_coating(diffusivity: float = 4e-15, days: float = 10.0,
                   face: str = "compartment") -> Problem:
    """A coating at 40 times its solubility and partition 10, first reported at 6 h, when the
    front has crossed a few cells: where the Galerkin route's three meshes share the
    dissolving node. Over 30 d its undissolved drug runs out (near 24 d). ``face``: the
    stirred medium, a perfect sink, or a sink behind a film of 1e-4 m/s (at 6 h its resistance
    some 2e-4 of the 2 um dissolved layer's: nearly the sink, but the face node not held)."""
    times = tuple(DAY * t for t in (0.25, 1.0, 2.0, 5.0, 10.0, 20.0, 30.0) if t <= days)
    outer = {"compartment": Boundary("compartment", volume=3e-6),
             "sink": Boundary("concentration", 0.0),
             "film": Boundary("mass_transfer", coefficient=1e-4, bulk=0.0)}[face]
    return Problem("slab", 0.0, (Layer("coating", 2e-5, diffusivity, 10.0, initial=160.0,
                                       solubility=4.0),),
                   Boundary("symmetry"), outer, Regime("transient", days * DAY, times),
                   area=1e-4)


@pytest.mark.parametrize("diffusivity", [4e-15, 0.97 * 4e-15])
def test_right_after_the_front_leaves_the_face_both_routes_pass(diffusivity):
    """The case that held the route back (its face rates parted beyond the grid bands at 6 h)
    passes every check with the front step in the Galerkin route's band, and its fronts and
    depletion time get their second route."""
    outcome = run_transient(_early_coating(diffusivity))
    checks = _checks(outcome)
    failed = [(c.name, c.value, c.detail) for c in outcome.checks if not c.passed]
    assert not failed
    assert "cross_check.front_position" in checks
    assert "front step" in checks["cross_check.flux_outer"].detail


def _paul_mcspadden_flux(diffusivity: float, loading: float, solubility: float,
                         t: np.ndarray) -> np.ndarray:
    """Face flux of a slab loaded above its solubility into a perfect sink (Paul & McSpadden
    1976), amount/(m^2 s)."""
    ratio = mpmath.mpf(solubility) / (mpmath.mpf(loading) - solubility)
    eta = mpmath.findroot(lambda e: mpmath.sqrt(mpmath.pi) * e * mpmath.exp(e * e)
                          * mpmath.erf(e) - ratio, mpmath.sqrt(ratio / 2))
    return np.array([float(diffusivity * solubility
                           / (mpmath.erf(eta) * mpmath.sqrt(mpmath.pi * diffusivity * tk)))
                     for tk in t])


def _sink_coating(face: str) -> Problem:
    """The early coating behind 100 L per 1 cm^2 (the fluid stays below 1e-4 of its
    saturation over 10 d) or a perfect sink, while the front stays inside the coating (at 10 d
    it is 13 um deep of 20 um)."""
    times = tuple(DAY * t for t in (0.25, 0.5, 1.0, 2.0, 3.0, 5.0, 7.0, 10.0))
    outer = (Boundary("compartment", volume=1e-2) if face == "compartment"
             else Boundary("concentration", 0.0))
    return Problem("slab", 0.0, (Layer("coating", 2e-5, 4e-15, 10.0, initial=160.0,
                                       solubility=4.0),),
                   Boundary("symmetry"), outer, Regime("transient", 10 * DAY, times),
                   area=1e-4)


@pytest.mark.parametrize("face", ["compartment", "sink"])
def test_the_galerkin_face_rate_band_covers_the_closed_form(face):
    """The Galerkin route's fine-mesh face rate lies within its band (grid band plus the
    front step) of the Paul & McSpadden flux at every time, and the front step is the part
    that matters: at some time the fine rate is farther from the closed form than the grid
    band |fine - medium| alone (the nested meshes share the dissolving node)."""
    problem = _sink_coating(face)
    times = np.array(problem.regime.times)
    study = galerkin.galerkin_study(problem, times, end=problem.regime.duration)
    assert study.success
    if face == "compartment":
        level = study.fine.compartments["outer"][-1]
        assert level < 1e-4 * 4.0 / 10.0  # the fluid is the sink to 1e-4 (K = 10)
    route = galerkin_route(problem, study, times, problem.regime.duration)
    grid = route.flux_band["outer"].copy()
    assert add_front_flux_band(route, study)
    band = route.flux_band["outer"]
    exact = _paul_mcspadden_flux(4e-15, 160.0, 4.0, times)
    error = np.abs(route.flux_fine["outer"] - exact)
    assert np.all(error <= band), (error / band).tolist()
    assert np.any(error > grid + 1e-4 * exact), (error / exact, grid / exact)


def test_the_same_coating_into_a_perfect_sink_passes_the_face_rate_check():
    """The coating into a perfect sink with D 3 % higher: its three Galerkin meshes agree at
    6 h while a front step sets the fine rate; before the front step was in the band, the face
    rates parted beyond the bands there (8.1e-3 against 1e-3)."""
    check = _checks(run_transient(_early_coating(1.03 * 4e-15, 30.0, "sink")))[
        "cross_check.flux_outer"]
    assert check.passed, check.detail
    assert "front step" in check.detail


def test_the_same_coating_behind_a_film_passes_the_face_rate_check():
    """As into the perfect sink, through a mass-transfer film (the face node not held): the
    front step bounds that face too (``front_staircase``: the chain to the face node bounds
    the chain through the film). Before the film face had the band, 8.1e-3 against 1e-3 at
    6 h, as the sink had."""
    check = _checks(run_transient(_early_coating(1.03 * 4e-15, 30.0, "film")))[
        "cross_check.flux_outer"]
    assert check.passed, check.detail
    assert "front step" in check.detail


@pytest.mark.parametrize("face", ["compartment", "sink", "film"])
@pytest.mark.parametrize("factor", [1.03, 0.97])
def test_a_galerkin_face_rate_beyond_its_band_fails(factor, face):
    """The Galerkin route reading the coating's diffusivity 3 % off, either way: its face rate
    moves by about 1.5 %, beyond the two routes' bands (once the undissolved drug has run out
    the front step is gone), and cross_check.flux_outer fails: the bands do not swallow an
    error of that size."""
    problem = _early_coating(days=30.0, face=face)
    layer = problem.layers[0]
    wrong = dataclasses.replace(problem, layers=(dataclasses.replace(
        layer, diffusivity=factor * layer.diffusivity),))
    check = _checks(run_transient(problem, wrong))["cross_check.flux_outer"]
    assert not check.passed, check.detail


def test_without_its_time_band_the_late_face_rate_of_the_method_of_lines_fails(monkeypatch):
    """Why the method of lines' flux band holds its time error behind a compartment: once the
    bead's medium is saturated the face rate is near zero, and the method of lines' step error
    (not its mesh) sets it, measured by the same steps halved."""
    monkeypatch.setattr(run_module, "add_flux_time_band", lambda *args: False)
    check = _checks(run_transient(_bead()))["cross_check.flux_outer"]
    assert not check.passed
    assert "t = 864000.0 s" in check.detail
