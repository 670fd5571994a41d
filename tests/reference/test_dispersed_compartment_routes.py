"""A layer loaded above its solubility releasing into a ``compartment`` (a stirred finite
volume), checked by two discretisations: the method of lines and the Galerkin route, every
figure of the record compared (``transient.compare``). ``run_transient`` holds the Galerkin
route back for such a case (``run.GALERKIN_BEHIND_SATURATING_COMPARTMENT``); these tests turn
it on to show what holds (cases past the first front pass, and a wrong fluid volume in either
route fails, either way) and what does not yet (right after the front leaves the face).

Sources, beside each test:

* A solution in contact with undissolved solute is saturated: where the medium cannot dissolve
  the whole load, the stirred fluid ends at the solubility (K_face / K times the layer's
  solubility; common practice of dissolution testing, T. Higuchi, J. Pharm. Sci. 50 (1961)
  874 for the dispersed matrix).
* The compartment balance V dC_f/dt = A J_out (the definition of a stirred volume; common
  practice): a route that holds a wrong fluid volume moves the release and the face rate, and
  the comparison with the other route must see it, either way.

Scenario values are invented.
"""

from __future__ import annotations

import pytest

from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.transient import galerkin, method_of_lines, run_transient
from worker.engine.transient import run as run_module

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


@pytest.fixture(autouse=True)
def _galerkin_route_on(monkeypatch):
    monkeypatch.setattr(run_module, "GALERKIN_BEHIND_SATURATING_COMPARTMENT", True)


@pytest.mark.parametrize(("make", "side"), [(_coating, "outer"), (_bead, "outer"),
                                            (_tube, "inner")])
def test_dispersed_layer_behind_a_compartment_is_compared_by_two_routes(make, side):
    outcome = run_transient(make())
    names = [m["name"] for m in outcome.methods]
    assert any(name.startswith("Galerkin") for name in names)
    assert not any("Galerkin second discretisation is not run" in w for w in outcome.warnings)
    checks = _checks(outcome)
    for name in ("cross_check.release_fraction", "cross_check.remaining",
                 f"cross_check.flux_{side}", "cross_check.profile",
                 "cross_check.concentration_min"):
        assert name in checks, name
    failed = [(c.name, c.value, c.detail) for c in outcome.checks if not c.passed]
    assert not failed
    band = outcome.series[f"compartment_{side}"]["uncertainty"]
    assert all(u is not None for u in band)  # the second route compares the level


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


def test_right_after_the_front_leaves_the_face_the_face_rate_is_not_resolved():
    """Why the route is held back: a coating at 40 times its solubility and partition 10,
    first reported at 6 h, where the front has crossed a few cells: the two routes' face
    rates part beyond their grid bands there (on the demo coating each route against its own
    mesh four times finer was off by more than its band |fine - medium|: figures in
    ``run.GALERKIN_BEHIND_SATURATING_COMPARTMENT``'s comment)."""
    times = tuple(DAY * t for t in (0.25, 1.0, 2.0, 5.0, 10.0, 20.0, 30.0))
    problem = Problem("slab", 0.0, (Layer("coating", 2e-5, 1.03 * 4e-15, 10.0, initial=160.0,
                                          solubility=4.0),),
                      Boundary("symmetry"), Boundary("compartment", volume=3e-6),
                      Regime("transient", 30 * DAY, times), area=1e-4)
    check = _checks(run_transient(problem))["cross_check.flux_outer"]
    assert not check.passed
    assert "t = 21600.0 s" in check.detail


def test_without_its_time_band_the_late_face_rate_of_the_method_of_lines_fails(monkeypatch):
    """Why the method of lines' flux band holds its time error behind a compartment: once the
    bead's medium is saturated the face rate is near zero, and the method of lines' step error
    (not its mesh) sets it, measured by the same steps halved."""
    monkeypatch.setattr(run_module, "add_flux_time_band", lambda *args: False)
    check = _checks(run_transient(_bead()))["cross_check.flux_outer"]
    assert not check.passed
    assert "t = 864000.0 s" in check.detail
