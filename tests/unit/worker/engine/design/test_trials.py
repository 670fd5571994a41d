"""The trial model against the full check's primary figures (a consistency test: run_problem
is the project's own check) and against published closed forms; injected errors both ways."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import special
from scipy.optimize import brentq

from worker.engine import fv_trials
from worker.engine.design import trials
from worker.engine.design.paths import with_values
from worker.engine.design.targets import Target, TargetError, check_target, quantities
from worker.engine.design.trials import TrialModel
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.run import run_problem

DAY = 86400.0

STEADY = {
    "linear two-layer slab with a film": Problem(
        "slab", 0.0, (Layer("wall", 4e-5, 1.5e-9, 0.8),
                      Layer("cells", 1.5e-4, 2e-9, 1.0,
                            Reaction("first_order", rate_constant=0.05))),
        Boundary("concentration", value=0.2),
        Boundary("mass_transfer", coefficient=1e-5, bulk=0.05), area=1e-4),
    "linear hollow cylinder": Problem(
        "cylinder", 1e-4, (Layer("wall", 4e-5, 1.5e-9, 0.8),
                           Layer("cells", 1.5e-4, 2e-9, 1.0,
                                 Reaction("first_order", rate_constant=0.5))),
        Boundary("concentration", value=0.2), Boundary("flux", value=0.0), length=0.12),
    "zero-order sphere without depletion": Problem(
        "sphere", 0.0, (Layer("core", 1e-3, 1e-9, 1.0, Reaction("zero_order", rate=1e-3)),),
        Boundary("symmetry"), Boundary("concentration", value=1.0)),
    "zero-order sphere with a depleted core": Problem(
        "sphere", 0.0, (Layer("core", 1e-3, 1e-9, 1.0, Reaction("zero_order", rate=1e-2)),),
        Boundary("symmetry"), Boundary("concentration", value=1.0)),
    "islet in a capsule, depleted core behind a film": Problem(
        "sphere", 0.0, (Layer("islet", 125e-6, 1.3e-9, 1.0, Reaction("zero_order", rate=0.034)),
                        Layer("capsule", 175e-6, 2.5e-9, 1.0)),
        Boundary("symmetry"), Boundary("mass_transfer", coefficient=1e-5, bulk=0.052)),
    "Michaelis-Menten two-layer slab": Problem(
        "slab", 0.0, (Layer("wall", 4e-5, 1.5e-9, 0.8),
                      Layer("cells", 1.5e-4, 2e-9, 1.0,
                            Reaction("michaelis_menten", vmax=4e-3, km=5e-3))),
        Boundary("concentration", value=0.2), Boundary("flux", value=0.0)),
}
TRANSIENT = {
    "single-layer sheet release into a sink": Problem(
        "slab", 0.0, (Layer("film", 2e-4, 1e-13, 1.0, initial=10.0),), Boundary("symmetry"),
        Boundary("concentration", value=0.0),
        regime=Regime("transient", 30 * DAY, (1 * DAY, 7 * DAY, 30 * DAY)), area=1e-4),
    "single-layer sheet release through a film": Problem(
        "slab", 0.0, (Layer("film", 2e-4, 1e-13, 1.0, initial=10.0),), Boundary("symmetry"),
        Boundary("mass_transfer", coefficient=1e-8, bulk=0.0),
        regime=Regime("transient", 30 * DAY, (1 * DAY, 7 * DAY, 30 * DAY))),
    "two-layer coated sheet": Problem(
        "slab", 0.0, (Layer("core", 2e-4, 1e-12, 1.0, initial=10.0),
                      Layer("coat", 5e-5, 2e-13, 0.5)),
        Boundary("symmetry"), Boundary("concentration", value=0.0),
        regime=Regime("transient", 30 * DAY, (1 * DAY, 7 * DAY, 30 * DAY))),
}


def _agrees(value: float, entry: dict) -> bool:
    """Within a hundredth of the record's numerical uncertainty (1e-11 relative at least, for
    figures both routes give to round-off)."""
    reference = entry["value"]
    u = entry.get("uncertainty") or 0.0
    return abs(value - reference) <= max(0.01 * u, 1e-11 * abs(reference), 1e-300)


@pytest.fixture(scope="module", params=list(STEADY))
def steady_case(request):
    problem = STEADY[request.param]
    return problem, run_problem(problem)


def _steady_targets(problem):
    return [Target(name) for name in quantities(problem) if name != "depletion_front"]


def test_steady_trials_agree_with_the_full_checks_primary(steady_case):
    problem, outcome = steady_case
    targets = _steady_targets(problem)
    model = TrialModel(problem, ["layers[0].diffusivity"], targets)
    values = model.nominal()
    for target, value in zip(model.targets, values, strict=True):
        entry = outcome.quantities[target.quantity]
        assert _agrees(value, entry), (target.key, value, entry)
    front = outcome.quantities.get("depletion_front")
    if front is not None:
        (found,) = TrialModel(problem, [], [Target("depletion_front")]).nominal()
        assert _agrees(found, front)


def test_per_layer_minima_are_the_full_checks_minimum_where_it_lies(steady_case):
    problem, outcome = steady_case
    targets = [Target("concentration_min", layer=i) for i in range(len(problem.layers))]
    values = TrialModel(problem, [], targets).nominal()
    assert _agrees(float(values.min()), outcome.quantities["concentration_min"])


def test_each_trial_is_its_own_case():
    """Trials solved together equal the same trials solved alone (no mixing of rows)."""
    problem = STEADY["linear two-layer slab with a film"]
    model = TrialModel(problem, ["layers[1].reaction.rate_constant", "layers[0].thickness"],
                       [Target("flux_inner"), Target("concentration_min")])
    x = np.array([[0.05, 4e-5], [0.5, 2e-5], [0.005, 8e-5], [5.0, 4e-5]])
    together = model(x)
    alone = np.vstack([model(row[None, :]) for row in x])
    np.testing.assert_allclose(together, alone, rtol=1e-13)
    assert len({round(v, 12) for v in together[:, 0] / together[0, 0]}) == 4


def _rows_mixed(monkeypatch):
    original = trials._solve_stack
    monkeypatch.setattr(trials, "_solve_stack",
                        lambda matrix, rhs: np.roll(original(matrix, rhs), 1, axis=0))


def test_the_no_mixing_check_fails_when_the_batched_solve_mixes_trials(monkeypatch):
    """Injected error: the stacked solve's unknowns shifted by one trial."""
    _rows_mixed(monkeypatch)
    with pytest.raises(AssertionError):
        test_each_trial_is_its_own_case()


def _both_trials_agree_with_their_full_checks() -> None:
    problem = STEADY["linear hollow cylinder"]
    model = TrialModel(problem, ["layers[0].diffusivity"], [Target("flux_inner")])
    x = np.array([[1.5e-9], [3e-9]])
    values = model(x)
    for row, value in zip(x, values[:, 0], strict=True):
        outcome = run_problem(with_values(problem, {model.fields[0]: row[0]}))
        assert _agrees(value, outcome.quantities["flux_inner"])


def test_two_trials_agree_with_their_own_full_checks():
    _both_trials_agree_with_their_full_checks()


def test_the_consistency_check_fails_when_the_batched_solve_mixes_trials(monkeypatch):
    """Injected error: the stacked solve's unknowns shifted by one trial."""
    _rows_mixed(monkeypatch)
    with pytest.raises(AssertionError):
        _both_trials_agree_with_their_full_checks()


def test_a_bad_trial_gives_nan_and_never_raises():
    problem = STEADY["linear two-layer slab with a film"]
    model = TrialModel(problem, ["layers[0].thickness", "layers[1].reaction.rate_constant"],
                       [Target("flux_inner")])
    x = np.array([[4e-5, 0.05], [-1e-5, 0.05], [np.nan, 0.05], [4e-5, -1.0], [4e-5, 0.0]])
    y = model(x)
    assert np.isfinite(y[[0, 4], 0]).all()
    assert np.isnan(y[1:4, 0]).all()
    with pytest.raises(ValueError, match=r"x: expected shape \(n, 2\)"):
        model(np.ones((3, 3)))


# -- published closed forms ----------------------------------------------------------------------

def _first_order(geometry: str, radius: float, k: float, diffusivity: float, cs: float):
    return Problem(geometry, 0.0,
                   (Layer("pellet", radius, diffusivity, 1.0,
                          Reaction("first_order", rate_constant=k)),),
                   Boundary("symmetry"), Boundary("concentration", value=cs),
                   area=1.0 if geometry == "slab" else None,
                   length=1.0 if geometry == "cylinder" else None)


@pytest.mark.parametrize("phi", [0.3, 1.0, 3.0, 20.0])
def test_effectiveness_factors_of_slab_cylinder_sphere(phi):
    """E.W. Thiele, Ind. Eng. Chem. 31 (1939) 916; R. Aris, The Mathematical Theory of
    Diffusion and Reaction in Permeable Catalysts, 1975, vol. 1, ch. 3: with phi = R sqrt(k/D),
    eta = tanh(phi)/phi (slab of half-thickness R), 2 I1(phi)/(phi I0(phi)) (cylinder),
    3 (phi coth(phi) - 1)/phi^2 (sphere); consumption = eta k Cs x volume."""
    diffusivity, cs, radius = 1e-9, 0.2, 1e-3
    k = phi**2 * diffusivity / radius**2
    expected = {
        "slab": (math.tanh(phi) / phi, radius),
        "cylinder": (2 * special.i1(phi) / (phi * special.i0(phi)), math.pi * radius**2),
        "sphere": (3 * (phi / math.tanh(phi) - 1) / phi**2, 4 / 3 * math.pi * radius**3),
    }
    for geometry, (eta, volume) in expected.items():
        model = TrialModel(_first_order(geometry, radius, k, diffusivity, cs),
                           ["layers[0].reaction.rate_constant"], [Target("consumption")])
        (consumption,) = model(np.array([[k]]))[0]
        assert consumption == pytest.approx(eta * k * cs * volume, rel=1e-10), geometry


def _zero_order_sphere(radius: float, q: float, diffusivity: float, cs: float) -> Problem:
    return Problem("sphere", 0.0,
                   (Layer("core", radius, diffusivity, 1.0, Reaction("zero_order", rate=q)),),
                   Boundary("symmetry"), Boundary("concentration", value=cs))


def test_zero_order_sphere_centre_and_critical_radius():
    """A.V. Hill, Proc. R. Soc. B 104 (1928) 39; J. Crank, The Mathematics of Diffusion, 1975,
    ch. 14: C(r) = Cs - Q (R^2 - r^2)/(6 D), so the centre falls to zero at the critical radius
    R_c = sqrt(6 D Cs / Q); beyond it a depleted core forms."""
    diffusivity, cs, q = 2e-9, 0.2, 4e-3
    critical = math.sqrt(6 * diffusivity * cs / q)
    model = TrialModel(_zero_order_sphere(0.5 * critical, q, diffusivity, cs),
                       ["layers[0].thickness"],
                       [Target("concentration_min"), Target("depletion_front"),
                        Target("flux_outer")])
    radii = np.array([0.5, 0.9, 0.999, 1.2, 2.0]) * critical
    y = model(radii[:, None])
    inside = radii < critical
    np.testing.assert_allclose(y[inside, 0], cs - q * radii[inside] ** 2 / (6 * diffusivity),
                               rtol=1e-9, atol=1e-12 * cs)
    np.testing.assert_allclose(y[inside, 2], -q * radii[inside] / 3, rtol=1e-12)
    assert np.isnan(y[inside, 1]).all()
    assert (y[~inside, 0] == 0.0).all()
    assert (y[~inside, 1] > 0.0).all() and (y[~inside, 1] < radii[~inside]).all()


def _crank_sheet_fraction(tau: float, terms: int = 200) -> float:
    """J. Crank, The Mathematics of Diffusion, 2nd ed., 1975, eq. 4.18: a sheet of thickness
    2l, both faces held at zero, M_t/M_inf = 1 - sum 8/((2n+1)^2 pi^2) exp(-(2n+1)^2 pi^2
    D t/(4 l^2)); here the half sheet, sealed at the mid-plane, tau = D t / l^2."""
    n = np.arange(terms)
    odd = (2 * n + 1) ** 2 * math.pi**2
    return float(1.0 - np.sum(8.0 / odd * np.exp(-odd * tau / 4.0)))


def test_sheet_release_fraction_and_t50_against_crank_4_18():
    problem = TRANSIENT["single-layer sheet release into a sink"]
    model = TrialModel(problem, ["layers[0].diffusivity", "layers[0].thickness"],
                       [Target("release_fraction", at=7 * DAY), Target("t50"), Target("t90")])
    x = np.array([[1e-13, 2e-4], [3e-13, 1e-4], [5e-14, 3e-4], [2e-13, 2e-4]])
    y = model(x)
    for (d, length), (fraction, t50, t90) in zip(x, y, strict=True):
        scale = length**2 / d
        assert fraction == pytest.approx(_crank_sheet_fraction(7 * DAY / scale), rel=1e-10)
        for found, level in ((t50, 0.5), (t90, 0.9)):
            tau = brentq(lambda t, level=level: _crank_sheet_fraction(t) - level, 1e-6, 10.0,
                         xtol=1e-15)
            expected = tau * scale
            if expected <= 30 * DAY:
                assert found == pytest.approx(expected, rel=1e-9)
            else:
                assert math.isnan(found)


@pytest.fixture(scope="module", params=list(TRANSIENT))
def transient_case(request):
    problem = TRANSIENT[request.param]
    return problem, run_problem(problem)


def test_transient_trials_agree_with_the_full_checks_primary(transient_case):
    problem, outcome = transient_case
    at = 7 * DAY
    offered = quantities(problem)
    targets = [Target(name) for name, spec in offered.items() if not spec.at_time]
    targets += [Target(name, at=at) for name, spec in offered.items()
                if spec.at_time and name in outcome.series]
    values = TrialModel(problem, ["layers[0].diffusivity"], targets).nominal()
    k = outcome.series["time"]["values"].index(at)
    for target, value in zip(targets, values, strict=True):
        if target.at is None:
            entry = outcome.quantities[target.quantity]
        else:
            series = outcome.series[target.quantity]
            band = (series.get("uncertainty") or [0.0] * (k + 1))[k]
            entry = {"value": series["values"][k], "uncertainty": band}
        if target.quantity == "concentration_min":
            # A minimum at a sink face is zero to round-off of the concentration scale.
            scale = max(layer.initial for layer in problem.layers)
            assert abs(value - entry["value"]) <= max(1e-11 * scale, 0.01 * entry["uncertainty"])
            continue
        assert _agrees(value, entry), (target.key, value, entry)


def test_targets_are_checked_against_the_case():
    steady = STEADY["Michaelis-Menten two-layer slab"]
    assert check_target(steady, Target("concentration_min", layer=1)).key == \
        "concentration_min[cells]"
    with pytest.raises(TargetError, match="layers\\[2\\]: the case has 2 layers"):
        check_target(steady, Target("concentration_min", layer=2))
    with pytest.raises(TargetError, match="has no quantity 't50'"):
        check_target(steady, Target("t50"))
    with pytest.raises(TargetError, match="flux_inner is not given per layer"):
        check_target(steady, Target("flux_inner", layer=0))
    release = TRANSIENT["single-layer sheet release into a sink"]
    assert check_target(release, Target("release_fraction", at=7 * DAY)).key == \
        "release_fraction@604800s"
    with pytest.raises(TargetError, match="is a series: give the time 'at'"):
        check_target(release, Target("remaining"))
    with pytest.raises(TargetError, match="within the duration"):
        check_target(release, Target("remaining", at=31 * DAY))
    assert quantities(release)["released_outer"].dimension == "amount"
    assert quantities(TRANSIENT["two-layer coated sheet"])["remaining"].dimension == \
        "amount_per_area"
    assert quantities(STEADY["linear hollow cylinder"])["rate_inner"].dimension == "amount_rate"


# -- batched finite volumes ----------------------------------------------------------------------

FV_CASES = {
    "Michaelis-Menten two-layer slab": ["layers[1].reaction.vmax", "layers[0].diffusivity"],
    "islet in a capsule, depleted core behind a film": ["layers[0].reaction.rate",
                                                        "layers[1].thickness",
                                                        "outer_boundary.coefficient"],
}


@pytest.mark.parametrize("name", list(FV_CASES))
def test_batched_finite_volume_trials_agree_with_each_trials_full_check(name):
    """Every trial of a batch against run_problem on that trial alone: each figure within a
    hundredth of the numerical uncertainty the full check records for it."""
    problem = STEADY[name]
    fields = FV_CASES[name]
    targets = _steady_targets(problem) + [Target("concentration_min", layer=i)
                                          for i in range(len(problem.layers))]
    model = TrialModel(problem, fields, targets)
    assert model.method in ("batched finite volumes", "batched closed form")
    rng = np.random.default_rng(7)
    nominal = model.nominal_inputs()
    x = nominal * rng.lognormal(0.0, 0.3, (3, nominal.size))
    y = model(x)
    for row, values in zip(x, y, strict=True):
        trial = with_values(problem, dict(zip(model.fields, row, strict=True)))
        outcome = run_problem(trial)
        for target, value in zip(model.targets, values, strict=True):
            entry = outcome.quantities[target.quantity]
            if target.layer is not None:
                entry = outcome.quantities[f"{target.quantity}_layers"]
                entry = {"value": entry["value"][target.layer],
                         "uncertainty": (entry.get("uncertainty") or [0.0] * 9)[target.layer]}
            assert _agrees(value, entry), (target.key, value, entry)


def test_batched_finite_volumes_equal_the_trial_by_trial_primary(monkeypatch):
    """The batch against ``steady_check.primary_figures`` trial by trial (the path it
    replaces), many trials at once, across chunks of the batch."""
    problem = STEADY["Michaelis-Menten two-layer slab"]
    model = TrialModel(problem, FV_CASES["Michaelis-Menten two-layer slab"],
                       [Target("flux_inner"), Target("concentration_min", layer=1),
                        Target("surface_outer")])
    monkeypatch.setattr(trials, "FV_CHUNK_CELLS", 5000)  # several chunks
    rng = np.random.default_rng(3)
    x = model.nominal_inputs() * rng.lognormal(0.0, 0.5, (12, 2))
    batched = model(x)
    alone = np.vstack([trials._steady_one(with_values(problem, dict(zip(model.fields, row,
                                                                          strict=True))),
                                          model.targets) for row in x])
    np.testing.assert_allclose(batched, alone, rtol=1e-8)


def _unconverged(monkeypatch):
    monkeypatch.setattr(fv_trials, "TRIAL_ITERATIONS", 1)


def test_trials_the_batch_leaves_unsolved_are_solved_alone(monkeypatch):
    """Injected: the batch stops after one Newton step; every trial then goes to the
    trial-by-trial path and the figures are unchanged."""
    problem = STEADY["Michaelis-Menten two-layer slab"]
    model = TrialModel(problem, ["layers[1].reaction.vmax"], [Target("flux_inner")])
    x = np.array([[4e-3], [8e-3]])
    before = model(x)
    calls = []
    original = trials._steady_one
    monkeypatch.setattr(trials, "_steady_one",
                        lambda p, t: calls.append(1) or original(p, t))
    _unconverged(monkeypatch)
    np.testing.assert_allclose(model(x), before, rtol=1e-9)
    assert len(calls) == 2


def test_a_batch_that_cannot_converge_gives_nan_never_raises(monkeypatch):
    problem = STEADY["Michaelis-Menten two-layer slab"]
    model = TrialModel(problem, ["layers[1].reaction.vmax"], [Target("flux_inner")])
    monkeypatch.setattr(trials, "_steady_one", lambda p, t: np.full(len(t), np.nan))
    _unconverged(monkeypatch)
    assert np.isnan(model(np.array([[4e-3], [-1.0]]))).all()


def test_the_agreement_check_fails_when_the_batch_is_off(monkeypatch):
    """Injected both ways: the fine grid's flux scaled by 1 +- 1e-6 (above the recorded
    uncertainty of the Michaelis-Menten flux) fails the agreement with the full check."""
    problem = STEADY["Michaelis-Menten two-layer slab"]
    outcome = run_problem(problem)
    original = fv_trials._face_flux_density
    for factor in (1 + 1e-6, 1 - 1e-6):
        monkeypatch.setattr(fv_trials, "_face_flux_density",
                            lambda *a, f=factor: original(*a) * f)
        (value,) = TrialModel(problem, ["layers[0].diffusivity"],
                              [Target("flux_inner")]).nominal()
        assert not _agrees(value, outcome.quantities["flux_inner"])
