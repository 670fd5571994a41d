"""The implicit steps of kinked method-of-lines systems (zero-order depletion, drug dispersed
above its solubility) against published closed forms, their mass balance and observed orders,
and the implicit time check failing when its error is injected.

References (beside each check):
* A.V. Hill, Proc. R. Soc. B 104 (1928) 39; J. Crank, The Mathematics of Diffusion, 2nd ed.,
  1975, ch. 14: the steady depleted zone of zero-order uptake fed through a face.
* D.R. Paul, S.K. McSpadden, "Diffusional release of a solute from a polymer matrix",
  J. Membr. Sci. 1 (1976) 33-48: semi-infinite planar matrix loaded at A above its solubility
  Cs into a perfect sink; the front is at s = 2 lambda sqrt(D t) from the face, the released
  amount per area Q = 2 Cs sqrt(D t / pi) / erf(lambda), lambda the root of
  sqrt(pi) lambda exp(lambda^2) erf(lambda) = Cs / (A - Cs) (the Neumann-type similarity
  solution of the moving dissolution front; equation from memory, re-derived in the test
  docstring below).
The scenario values are invented.
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import mpmath
import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import sparse
from scipy.sparse.linalg import splu

from worker.engine import convergence
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import checks, dispersed, method_of_lines
from worker.engine.transient.method_of_lines import solve_transient_fv, solve_transient_fv_meshes

SINK = Boundary("concentration", 0.0)
SEALED = Boundary("symmetry")
DAY = 86400.0


def _problem(layers, inner=SEALED, outer=SINK, times=(0.0, 1e5, 1e6), geometry="slab",
             start=0.0):
    return Problem(geometry, start, tuple(layers), inner, outer,
                   Regime("transient", max(times), tuple(times)))


def _paul_mcspadden_lambda(load: float, solubility: float) -> float:
    """Root of sqrt(pi) x exp(x^2) erf(x) = Cs/(A - Cs) (Paul & McSpadden 1976).

    Derivation (check of the remembered form): in 0 < x < s the dissolved solute obeys
    C_t = D C_xx with C(0) = 0, C(s) = Cs, so C = Cs erf(x / 2 sqrt(D t)) / erf(lambda) with
    s = 2 lambda sqrt(D t); at the front the undissolved excess A - Cs is used up at the rate the
    gradient carries it off, (A - Cs) ds/dt = D C_x(s), which gives the equation above.
    """
    ratio = solubility / (load - solubility)
    root = mpmath.findroot(
        lambda x: mpmath.sqrt(mpmath.pi) * x * mpmath.exp(x * x) * mpmath.erf(x) - ratio, 0.3)
    return float(root)


# --- zero-order depletion: steady depleted zone (Hill 1928) -------------------------------

def test_zero_order_slab_reaches_hills_depleted_zone():
    # Slab fed at its outer face at Cs, sealed inner face, zero-order uptake Q: at steady state
    # the live zone is delta = sqrt(2 D Cs / Q) deep, C = Q (x - s)^2 / (2 D) there and the
    # influx is Q delta (Hill 1928; Crank 1975 ch. 14).
    d, q, cs, thickness = 1e-10, 2e-4, 0.5, 1e-3
    delta = math.sqrt(2.0 * d * cs / q)  # 0.707 mm
    problem = _problem([Layer("tissue", thickness, d, reaction=Reaction("zero_order", rate=q),
                              initial=0.0)], SEALED, Boundary("concentration", cs),
                       times=(0.0, 2e5))
    solution = solve_transient_fv(problem, None, 200)
    assert solution.success
    assert solution.diagnostics["integrator"].startswith("implicit Euler")
    influx = -solution.flux_outer[-1]
    assert_allclose(influx, q * delta, rtol=2e-3)
    front = thickness - delta
    centres = solution.mesh.centres
    expected = np.where(centres > front, q * (centres - front) ** 2 / (2.0 * d), 0.0)
    assert np.max(np.abs(solution.cells[-1] - expected)) < 2e-3 * cs
    # the dead zone holds nothing at all, and nothing negative anywhere
    assert np.all(solution.cells[-1][centres < front - 2 * (centres[1] - centres[0])] == 0.0)
    assert solution.cells.min() >= 0.0


def test_zero_order_sphere_reaches_hills_depleted_zone():
    # Sphere fed at its surface: C = (Q/D)(r - s)^2 (r + 2s)/(6 r) in s < r < R with the front
    # s fixed by C(R) = Cs; influx per area Q (R^3 - s^3)/(3 R^2) (Hill 1928).
    d, q, cs, radius = 1e-9, 5e-3, 0.2, 1e-3
    s = float(mpmath.findroot(lambda x: q / d * (radius - x) ** 2 * (radius + 2 * x)
                              / (6 * radius) - cs, 0.5e-3))
    problem = _problem([Layer("spheroid", radius, d, reaction=Reaction("zero_order", rate=q),
                              initial=cs)], SEALED, Boundary("concentration", cs),
                       times=(0.0, 5e4), geometry="sphere")
    solution = solve_transient_fv(problem, None, 200)
    influx = -solution.flux_outer[-1]
    assert_allclose(influx, q * (radius**3 - s**3) / (3 * radius**2), rtol=3e-3)


def test_zero_order_mass_balance_and_time_order():
    # Depletion of a slab into a sink with zero-order consumption (the slow case):
    # initial = remaining + released + consumed to round-off on every mesh, and halving the
    # steps changes the amounts at about second order (Richardson-combined implicit Euler).
    problem = _problem([Layer("gel", 1e-3, 1e-10, reaction=Reaction("zero_order", rate=2e-4),
                              initial=1.0)], times=tuple(np.linspace(0.0, 30 * DAY, 21)))
    solutions = solve_transient_fv_meshes(problem, [25, 50])
    for solution in solutions:
        residual = solution.initial_load - solution.remaining - solution.released_outer \
            - solution.released_inner - solution.consumed
        assert np.max(np.abs(residual)) < 1e-12 * solution.initial_load
    coarse = solutions[0]
    halved = method_of_lines.time_refinement(problem, coarse, 2)
    quartered = method_of_lines.time_refinement(problem, coarse, 4)
    assert halved is not None and quartered is not None
    e1 = np.max(np.abs(coarse.consumed - halved["consumed"]))
    e2 = np.max(np.abs(halved["consumed"] - quartered["consumed"]))
    assert e1 < 1e-4 * coarse.initial_load
    assert math.log2(e1 / e2) > 1.0  # better than first order


# --- dispersed drug: Paul & McSpadden similarity solution ---------------------------------

def _dispersed_slab(times, thickness=1e-3, d=1e-12, load=10.0, solubility=1.0):
    return _problem([Layer("matrix", thickness, d, initial=load, solubility=solubility)],
                    times=times)


def test_dispersed_slab_follows_paul_mcspadden():
    load, cs, d, thickness = 10.0, 1.0, 1e-12, 1e-3
    lam = _paul_mcspadden_lambda(load, cs)
    assert lam == pytest.approx(0.2315138, abs=1e-6)
    times = np.array([0.0, 5 * DAY, 15 * DAY, 30 * DAY])
    # front at 30 days: 2 lambda sqrt(D t) = 0.75 mm < 1 mm: still a semi-infinite matrix
    assert 2 * lam * math.sqrt(d * times[-1]) < 0.8 * thickness
    problem = _dispersed_slab(tuple(times), thickness, d, load, cs)
    solutions = solve_transient_fv_meshes(problem, [50, 100, 200])
    released_exact = 2 * cs * np.sqrt(d * times / math.pi) / math.erf(lam)
    front_exact = thickness - 2 * lam * np.sqrt(d * times)
    errors, front_errors = [], []
    for solution in solutions:
        assert solution.success
        residual = solution.initial_load - solution.remaining - solution.released_outer
        assert np.max(np.abs(residual)) < 1e-12 * solution.initial_load
        assert np.all(solution.cells <= cs * (1 + 1e-12))  # dissolved never above solubility
        errors.append(np.max(np.abs(solution.released_outer - released_exact)))
        outer, _ = dispersed.front_positions(solution.mesh, problem, solution.contents)
        front_errors.append(np.max(np.abs(outer[1:, 0] - front_exact[1:])))
    fine = solutions[-1]
    assert errors[-1] < 2e-5 * fine.initial_load
    assert front_errors[-1] < 1e-4 * thickness  # 2% of a fine cell
    # refinement: errors fall with the cell size; observed orders
    assert errors[0] > errors[1] > errors[2]
    assert front_errors[0] > front_errors[2]
    assert math.log2(errors[0] / errors[1]) > 1.0
    # undissolved reserve: A - Cs over the loaded length at each time (Paul & McSpadden)
    assert_allclose(fine.undissolved[1:], (load - cs) * front_exact[1:],
                    rtol=2e-3)


def test_dispersed_space_study_reports_an_order():
    problem = _dispersed_slab((0.0, 10 * DAY, 30 * DAY))
    solutions = solve_transient_fv_meshes(problem, [25, 50, 100])
    released = [float(s.released_outer[-1]) for s in reversed(solutions)]
    study = convergence.grid_study(released, [100, 50, 25])
    assert study.convergence == "monotonic"
    assert study.apparent_order > 1.0


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
def test_dispersed_mass_balance_layers_partition_and_reaction(geometry):
    # Two loaded layers with a partition jump, a first-order loss in one and zero order in the
    # other: initial = dissolved + undissolved + released + consumed in every geometry.
    layers = [Layer("core", 0.4e-3, 2e-12, 1.0, reaction=Reaction("first_order",
                                                                  rate_constant=1e-7),
                    initial=8.0, solubility=1.0),
              Layer("shell", 0.2e-3, 5e-13, 2.0, reaction=Reaction("zero_order", rate=1e-6),
                    initial=5.0, solubility=3.0)]
    problem = Problem(geometry, 0.0 if geometry == "slab" else 0.0, tuple(layers), SEALED,
                      SINK, Regime("transient", 20 * DAY, (0.0, 5 * DAY, 20 * DAY)))
    solution = solve_transient_fv(problem, None, (20, 10))
    assert solution.success
    residual = solution.initial_load - solution.remaining - solution.released_outer \
        - solution.released_inner - solution.consumed
    assert np.max(np.abs(residual)) < 1e-10 * solution.initial_load
    assert np.all(solution.undissolved >= 0.0)
    assert solution.undissolved[0] == pytest.approx(
        problem.measure_factor * sum(
            (ly.initial - ly.solubility) * v for ly, v in zip(
                layers, [solution.mesh.volumes[solution.mesh.layer_cells(j)].sum()
                         for j in range(2)], strict=True)), rel=1e-12)


def test_depletion_time_of_a_thin_dispersed_slab():
    # Thin slab on a sealed base: the Paul & McSpadden solution stays exact until the front
    # reaches the sealed face (the saturated region ahead of it does not change), so the
    # undissolved solute is gone at t = L^2 / (4 lambda^2 D); the pseudo-steady estimate of
    # Higuchi (1961), L^2 (2A - Cs) / (4 D Cs), lies within 2 % of it at A = 10 Cs.
    thickness, d, load, cs = 0.3e-3, 1e-12, 10.0, 1.0
    lam = _paul_mcspadden_lambda(load, cs)
    exact = thickness**2 / (4 * lam**2 * d)
    higuchi = thickness**2 * (2 * load - cs) / (4 * d * cs)
    assert abs(higuchi / exact - 1.0) < 0.02
    problem = _dispersed_slab(tuple(np.linspace(0.0, 30 * DAY, 7)), thickness, d, load, cs)
    solutions = solve_transient_fv_meshes(problem, [20, 40, 80])
    found = [dispersed.depletion_times(s.mesh, problem, s.history.ts, s.history.contents)[0]
             for s in solutions]
    assert all(t is not None for t in found)
    errors = [abs(t - exact) / exact for t in found if t is not None]
    assert errors[-1] < 1e-3
    assert errors[-1] < errors[0]


# --- the implicit time check fails when its error is injected (both directions) -----------

def _coarse_for_check():
    problem = _dispersed_slab((0.0, 5 * DAY, 10 * DAY))
    coarse = solve_transient_fv(problem, None, 20)
    return problem, coarse


@pytest.mark.parametrize("change", [3e-5, -3e-5])
def test_implicit_time_check_fails_when_halving_moves_the_release(monkeypatch, change):
    problem, coarse = _coarse_for_check()
    real = method_of_lines.time_refinement

    def shifted(problem, solution, parts):
        found = real(problem, solution, parts)
        found["released_outer"] = found["released_outer"] + np.array([0.0, change, 0.0]) * \
            solution.initial_load
        return found

    monkeypatch.setattr(method_of_lines, "time_refinement", shifted)
    outcome = Outcome()
    checks.time_check(outcome, problem, coarse, coarse.times, 10 * DAY, coarse.initial_load)
    check = next(c for c in outcome.checks if c.name == "convergence.time")
    assert not check.passed and check.value == pytest.approx(3e-5, rel=0.05)
    # and it passes unshifted
    monkeypatch.setattr(method_of_lines, "time_refinement", real)
    outcome = Outcome()
    checks.time_check(outcome, problem, coarse, coarse.times, 10 * DAY, coarse.initial_load)
    check = next(c for c in outcome.checks if c.name == "convergence.time")
    assert check.passed and "observed order" in check.detail


def test_implicit_time_check_fails_when_the_replay_fails(monkeypatch):
    problem, coarse = _coarse_for_check()
    monkeypatch.setattr(method_of_lines, "time_refinement", lambda *a: None)
    outcome = Outcome()
    checks.time_check(outcome, problem, coarse, coarse.times, 10 * DAY, coarse.initial_load)
    check = next(c for c in outcome.checks if c.name == "convergence.time")
    assert check.value is None and not check.passed


def test_mass_balance_check_sees_a_lost_undissolved_reserve():
    # The existing mass_balance check covers the undissolved reserve: dropping it from the
    # amount held (or counting it twice) fails the check.
    problem, coarse = _coarse_for_check()
    for sign in (-1.0, 1.0):
        broken = SimpleNamespace(**{k: getattr(coarse, k) for k in (
            "initial_load", "released_inner", "released_outer", "consumed")})
        broken.remaining = coarse.remaining + sign * coarse.undissolved
        outcome = Outcome()
        checks.mass_balance_check(outcome, problem, broken, coarse.times)
        assert not outcome.checks[-1].passed
    outcome = Outcome()
    checks.mass_balance_check(outcome, problem, coarse, coarse.times)
    assert outcome.checks[-1].passed


# --- the tridiagonal Newton correction against scipy's sparse LU --------------------------

@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
def test_chain_steps_match_sparse_lu(geometry):
    # The chain solver (dgtsv on the cells and compartment levels, substitution for the
    # amounts) takes the same implicit Euler step as scipy's sparse LU of the whole Newton
    # matrix (scipy.sparse.linalg.splu, the reference), on a case with every kind of row: two
    # layers with a partition, both faces compartments (one with clearance), zero-order
    # consumption and a dispersed load; from a state where some cells have run out.
    from worker.engine.transient import implicit_steps

    layers = (Layer("core", 4e-4, 2e-11, initial=5.0, solubility=1.0, partition=1.5),
              Layer("coat", 2e-4, 5e-12, reaction=Reaction("zero_order", rate=1e-4),
                    initial=0.2))
    inner = Boundary("compartment", volume=1e-7, initial=0.3)
    outer = Boundary("compartment", volume=2e-6, initial=0.0, clearance=1e-4)
    start = 1e-3 if geometry != "slab" else 0.0
    problem = Problem(geometry, start, layers, inner, outer,
                      Regime("transient", 1e5, (0.0, 1e5)), area=1e-3, length=0.01)
    mesh = method_of_lines.build_mesh(problem, (12, 7))
    system = method_of_lines._Rhs(problem, mesh, 5.0, exact=True)
    n = system.n
    rng = np.random.default_rng(7)
    y = np.concatenate((rng.uniform(-0.05, 4.0, n), np.zeros(3), [0.3, 0.0]))
    atol = np.full(system.size, 1e-9)
    chain = implicit_steps._solver(system, atol, 1e-6)
    assert isinstance(chain, implicit_steps._ChainSolver)
    lu = implicit_steps._StepSolver(system, atol, 1e-6)
    residual = rng.normal(size=system.size)
    for h in (1.0, 1e3, 1e5):
        # one Newton correction: the Newton matrix dm/dy - h df/dy solved by splu
        matrix = sparse.diags(system.content_slope(y)) - h * system.jacobian(0.0, y)
        expected = splu(sparse.csc_matrix(matrix)).solve(residual)
        assert_allclose(chain._correction(0.0, y, h, residual), expected, rtol=1e-9,
                        atol=1e-12 * np.max(np.abs(expected)))
        a, b = chain.step(0.0, y, h), lu.step(0.0, y, h)
        assert a is not None and b is not None
        assert_allclose(a, b, rtol=1e-10, atol=1e-12)


def test_a_system_without_a_tridiagonal_chain_gets_sparse_lu():
    # A chain whose Jacobian is not tridiagonal (the cells in reverse pairs) is refused and
    # the sparse LU taken; the step is the same.
    from worker.engine.transient import implicit_steps

    problem = _dispersed_slab((0.0, 1e5))
    mesh = method_of_lines.build_mesh(problem, (8,))
    system = method_of_lines._Rhs(problem, mesh, 10.0, exact=True)
    order = np.arange(system.n)
    order[[2, 5]] = order[[5, 2]]
    broken = _ChainOf(system, order)
    atol = np.full(system.size, 1e-9)
    assert type(implicit_steps._solver(broken, atol, 1e-6)) is implicit_steps._StepSolver
    assert type(implicit_steps._solver(system, atol, 1e-6)) is implicit_steps._ChainSolver
    y = np.concatenate((np.full(system.n, 10.0), np.zeros(3)))
    assert_allclose(implicit_steps._solver(broken, atol, 1e-6).step(0.0, y, 1e4),
                    implicit_steps._solver(system, atol, 1e-6).step(0.0, y, 1e4),
                    rtol=1e-10, atol=1e-12)


class _ChainOf:
    """A method-of-lines system that declares the chain ``order``."""

    def __init__(self, system, order):
        self.system = system
        self.order = order

    def __getattr__(self, name):
        return getattr(self.system, name)

    def __call__(self, t, y):
        return self.system(t, y)

    def chain_order(self):
        return self.order


def test_a_michaelis_menten_layer_is_iterated_to_its_residual():
    # Michaelis-Menten consumption is not affine on any piece: the chain solver does not stop
    # on unchanged pieces there but on the residual, and its step is the sparse LU's.
    from worker.engine.transient import implicit_steps

    layer = Layer("matrix", 1e-3, 1e-11, reaction=Reaction("michaelis_menten", vmax=1e-4,
                                                           km=0.5), initial=3.0, solubility=1.0)
    problem = _problem([layer], times=(0.0, 1e5))
    mesh = method_of_lines.build_mesh(problem, (10,))
    system = method_of_lines._Rhs(problem, mesh, 3.0, exact=True)
    assert not system.piecewise_linear
    linear = method_of_lines._Rhs(_dispersed_slab((0.0, 1e5)), mesh, 10.0, exact=True)
    assert linear.piecewise_linear
    atol = np.full(system.size, 1e-9)
    y = np.concatenate((np.linspace(0.2, 3.0, system.n), np.zeros(3)))
    chain = implicit_steps._solver(system, atol, 1e-6)
    assert chain.pieces is None
    assert_allclose(chain.step(0.0, y, 1e4),
                    implicit_steps._StepSolver(system, atol, 1e-6).step(0.0, y, 1e4),
                    rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize("reaction", [Reaction("zero_order", rate=1e-4),
                                      Reaction("michaelis_menten", vmax=1e-4, km=0.5),
                                      Reaction("first_order", rate=1e-5)])
def test_meshes_evaluated_at_once_match_each_alone(reaction):
    # The stacked evaluation of several meshes' Newton terms equals each mesh's own (the same
    # arithmetic element by element): two layers, a dispersed load, the reaction, compartments
    # at both faces.
    layers = (Layer("core", 4e-4, 2e-11, initial=5.0, solubility=1.0),
              Layer("coat", 2e-4, 5e-12, reaction=reaction, initial=0.2))
    inner = Boundary("compartment", volume=1e-7, initial=0.3)
    outer = Boundary("compartment", volume=2e-6, initial=0.0, clearance=1e-4)
    problem = Problem("cylinder", 1e-3, layers, inner, outer,
                      Regime("transient", 1e5, (0.0, 1e5)), length=0.01)
    systems = [method_of_lines._Rhs(problem, method_of_lines.build_mesh(problem, cells), 5.0,
                                    exact=True) for cells in ((6, 3), (12, 6), (24, 12))]
    stack = method_of_lines._Stack(systems)
    assert stack.stacked is not None
    rng = np.random.default_rng(3)
    y = np.concatenate([np.concatenate((rng.uniform(-0.05, 4.0, s.n), rng.uniform(size=3),
                                        [0.3, 0.1])) for s in systems])
    together = stack.stacked.newton_terms(y)
    alone = [s.newton_terms(0.0, y[stack.offsets[k]: stack.offsets[k + 1]])
             for k, s in enumerate(systems)]
    for got, parts in zip(together, zip(*alone, strict=True), strict=True):
        np.testing.assert_array_equal(got, np.concatenate(parts))
    # and each mesh's terms are those its separate evaluations give (content, right-hand side,
    # Jacobian values, content slope)
    for k, s in enumerate(systems):
        part = y[stack.offsets[k]: stack.offsets[k + 1]]
        separate = (s.content(part), s(0.0, part), s.jacobian_values(0.0, part),
                    s.content_slope(part))
        for got, expected in zip(alone[k], separate, strict=True):
            np.testing.assert_array_equal(got, expected)
    # the pieces of copies of one system, as rows, are each copy's own
    first = systems[0]
    rows = np.array([np.concatenate((rng.uniform(-0.05, 4.0, first.n), rng.uniform(size=5)))
                     for _ in range(3)])
    np.testing.assert_array_equal(first.pieces_of_copies(rows),
                                  np.array([first.pieces(row) for row in rows]))
    np.testing.assert_array_equal(
        np.sort(stack.stacked.pieces(y).astype(int)),
        np.sort(np.concatenate([s.pieces(y[stack.offsets[k]: stack.offsets[k + 1]])
                                for k, s in enumerate(systems)]).astype(int)))


@pytest.mark.parametrize("case", ["zero_order", "dispersed"])
def test_paths_stepped_together_are_each_path_alone(case):
    # The time check's paths (steps cut into 2, 4 and 8) integrated together on copies of the
    # coarse mesh give each path's states as integrated alone, to the last bit.
    from worker.engine.transient import implicit_steps

    if case == "zero_order":
        problem = _problem([Layer("gel", 1e-3, 1e-10, reaction=Reaction("zero_order",
                                                                         rate=2e-4),
                                  initial=1.0)], times=(0.0, 2e3, 6e3))
    else:
        problem = _dispersed_slab((0.0, 2 * DAY, 5 * DAY))
    coarse = solve_transient_fv(problem, None, 12)
    diagnostics = coarse.diagnostics
    system = method_of_lines._Rhs(problem, coarse.mesh,
                                  method_of_lines.concentration_scale(problem), exact=True)
    rtol = method_of_lines.implicit_rtol(coarse.rtol)
    arguments = (diagnostics["initial_state"], diagnostics["step_sequence"])
    together = implicit_steps.paths(system, lambda k: method_of_lines._Stack([system] * k),
                                    *arguments, (8, 4, 2), diagnostics["atol"], rtol)
    for parts in (8, 4, 2):
        alone, ok = implicit_steps.path(system, *arguments, parts, diagnostics["atol"], rtol)
        assert ok and together[parts][1]
        np.testing.assert_array_equal(together[parts][0], alone)
