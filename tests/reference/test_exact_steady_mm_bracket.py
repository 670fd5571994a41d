"""Michaelis-Menten comparison bracket against the exact slab solution by quadrature.

Check values: for a sheet sealed at its mid-plane x = 0 and held at Cs on the face x = L, the
first integral of D C'' = R(C) is (D/2) C'^2 = G(C) = integral from C0 to C of R(c) dc
(R. Aris, The Mathematical Theory of Diffusion and Reaction in
Permeable Catalysts, Oxford, 1975), with R = Vmax c/(Km + c) giving
G(C) = Vmax [(C - C0) - Km ln((Km + C)/(Km + C0))]. Positions follow from
x(C) = integral from C0 to C of sqrt(D / (2 G(c))) dc, the centre value C0 from x(Cs) = L, and
the surface flux is sqrt(2 D G(Cs)). Everything is evaluated with mpmath (quad + findroot).
The bracket's direction (maximum/comparison principle: M.H. Protter, H.F. Weinberger, Maximum
Principles in Differential Equations, 1967) is what is tested. Scenario values are invented.
"""

import functools

import mpmath
import numpy as np
import pytest
from numpy.testing import assert_allclose

from worker.engine.exact_steady import solve_exact
from worker.engine.mm_bracket import (
    LOWER_METHOD,
    LOWER_METHOD_FIRST_ORDER_ONLY,
    UPPER_METHOD,
    michaelis_menten_bracket,
)
from worker.engine.model import Boundary, Layer, Problem, Reaction


@pytest.fixture(autouse=True)
def _mpmath_precision():
    """Reference values at 30 significant digits, without touching other modules' setting."""
    with mpmath.workdps(30):
        yield


class ExactMichaelisMentenSlab:
    """Exact MM sheet (sealed mid-plane at 0, fixed Cs at L) by the first integral, mpmath."""

    def __init__(self, thickness, d, vmax, km, cs):
        self.L, self.D, self.vmax, self.km, self.cs = (mpmath.mpf(v) for v in
                                                       (thickness, d, vmax, km, cs))
        # x(Cs) falls monotonically from infinity (C0 -> 0) to 0 (C0 -> Cs): bracket log C0.
        top = mpmath.log(self.cs)
        log_c0 = mpmath.findroot(lambda y: self._position(self.cs, mpmath.exp(y)) - self.L,
                                 (top - 40, top - mpmath.mpf("1e-12")), solver="anderson")
        self.c0 = mpmath.exp(log_c0)

    def _g(self, c, c0):
        return self.vmax * ((c - c0) - self.km * mpmath.log((self.km + c) / (self.km + c0)))

    def _position(self, c, c0):
        # Substituting c = C0 + w^2 removes the 1/sqrt(c - C0) endpoint singularity.
        def integrand(w):
            if w == 0:
                return 2 * mpmath.sqrt(self.D * (self.km + c0) / (2 * self.vmax * c0))
            g = self.vmax * (w**2 - self.km * mpmath.log1p(w**2 / (self.km + c0)))
            return 2 * w * mpmath.sqrt(self.D / (2 * g))

        return mpmath.quad(integrand, [0, mpmath.sqrt(c - c0)])

    def level(self, fraction):
        """Concentration C0 + fraction (Cs - C0), 0 <= fraction <= 1."""
        return self.c0 + mpmath.mpf(fraction) * (self.cs - self.c0)

    def position(self, c):
        return float(self._position(c, self.c0))

    @property
    def surface_uptake(self):
        """Flux into the face x = L: D C'(L) = sqrt(2 D G(Cs))."""
        return float(mpmath.sqrt(2 * self.D * self._g(self.cs, self.c0)))


def mm_sheet(thickness, d, vmax, km, cs):
    return Problem(
        geometry="slab", inner=0.0,
        layers=(Layer("tissue", thickness, d,
                      reaction=Reaction("michaelis_menten", vmax=vmax, km=km)),),
        inner_boundary=Boundary("symmetry"),
        outer_boundary=Boundary("concentration", value=cs))


CASES = {
    # mild: C stays well above Km, the sheet is far from depletion
    "mild": dict(thickness=0.4e-3, d=1.5e-9, vmax=2e-3, km=5e-3, cs=0.2),
    # strong: the centre falls far below Km; the zero-order lower solution is depleted
    "strong": dict(thickness=0.3e-3, d=1.5e-9, vmax=5e-2, km=5e-3, cs=0.2),
}


@functools.cache
def exact_case(name):
    with mpmath.workdps(30):
        return ExactMichaelisMentenSlab(**CASES[name])


@pytest.mark.parametrize("name", sorted(CASES))
def test_bracket_contains_exact_profile(name):
    """lower(x) <= C_exact(x) <= upper(x) at many points, with C_exact from the first integral
    (Aris 1975; mpmath quadrature) and the bracket from the comparison principle (Protter &
    Weinberger 1967). The bounds are not trivially wide: each is strictly off the exact value
    inside the sheet, so a swapped or mis-signed bound fails."""
    case = CASES[name]
    exact = exact_case(name)
    lower, upper = michaelis_menten_bracket(mm_sheet(**case))
    assert upper.method == UPPER_METHOD and lower.method == LOWER_METHOD
    cs = case["cs"]
    exact_levels = [exact.level(f) for f in (0.0, 1e-3, 0.05, 0.2, 0.5, 0.8, 0.97, 1.0)]
    levels = np.array([float(c) for c in exact_levels])
    positions = np.array([exact.position(c) for c in exact_levels])
    assert_allclose(positions[-1], case["thickness"], rtol=1e-12)
    low = lower.concentration_at(positions)
    high = upper.concentration_at(positions)
    slack = 1e-12 * cs
    assert np.all(low <= levels + slack), (low, levels)
    assert np.all(levels <= high + slack), (levels, high)
    assert np.all(high[:-1] > levels[:-1] * (1 + 1e-6))
    assert np.all(low[:-1] < levels[:-1])
    assert np.isnan(lower.flux_outer) and np.isnan(lower.flux_at(positions)).all()


@pytest.mark.parametrize("name", sorted(CASES))
def test_bracket_orders_surface_uptake(name):
    """Equal surface values and ordered profiles order the surface gradients: the upper
    (k = Vmax/(Km+Cs)) solution takes up less than the exact MM sheet, sqrt(2 D G(Cs))
    (Aris 1975, first integral, mpmath), and each lower comparison problem (zero order Vmax,
    first order Vmax/Km) takes up more (Protter & Weinberger 1967)."""
    case = CASES[name]
    exact_uptake = exact_case(name).surface_uptake
    lower, upper = michaelis_menten_bracket(mm_sheet(**case))
    assert -upper.flux_outer < exact_uptake
    for reaction in (Reaction("zero_order", rate=case["vmax"]),
                     Reaction("first_order", rate_constant=case["vmax"] / case["km"])):
        problem = mm_sheet(**case)
        problem = Problem(geometry="slab", inner=0.0,
                          layers=(Layer("tissue", case["thickness"], case["d"],
                                        reaction=reaction),),
                          inner_boundary=problem.inner_boundary,
                          outer_boundary=problem.outer_boundary)
        assert -solve_exact(problem).flux_outer > exact_uptake


def test_strong_case_uses_depleted_zero_order_bound():
    """In the strong case the zero-order (Vmax) comparison problem has a depleted core (Hill
    1928 front, sqrt(2 D Cs / Vmax) from the face), and near the face it is the tighter of the two
    lower solutions (R = Vmax is the tighter rate bound where C >> Km)."""
    case = CASES["strong"]
    exact = exact_case("strong")
    lower, _ = michaelis_menten_bracket(mm_sheet(**case))
    assert "exact-zero-order-depletion-front" in lower.diagnostics["components"]
    near_face = exact.position(mpmath.mpf(0.9 * case["cs"]))
    linear = solve_exact(Problem(
        geometry="slab", inner=0.0,
        layers=(Layer("t", case["thickness"], case["d"],
                      reaction=Reaction("first_order",
                                        rate_constant=case["vmax"] / case["km"])),),
        inner_boundary=Boundary("symmetry"),
        outer_boundary=Boundary("concentration", value=case["cs"])))
    assert lower.concentration_at(near_face) > linear.concentration_at(near_face)
    assert lower.concentration_at(near_face) <= 0.9 * case["cs"]


def test_multilayer_depletion_falls_back_to_first_order_lower_bound():
    """Coated sheet whose zero-order (Vmax) comparison problem depletes across two layers: no
    exact zero-order solution here, so the lower bound is the first-order (Vmax/Km) solution
    alone, still valid since min(Vmax, Vmax C/Km) <= Vmax C/Km (comparison principle, Protter &
    Weinberger 1967); the method name says so and lower <= upper holds."""
    problem = Problem(
        geometry="slab", inner=0.0,
        layers=(Layer("tissue", 2e-3, 1e-9, reaction=Reaction("michaelis_menten", vmax=5e-2,
                                                                 km=5e-3)),
                Layer("coat", 20e-6, 3e-10, partition=0.5)),
        inner_boundary=Boundary("symmetry"),
        outer_boundary=Boundary("concentration", value=0.2))
    lower, upper = michaelis_menten_bracket(problem)
    assert lower.method == LOWER_METHOD_FIRST_ORDER_ONLY
    x = np.linspace(0.0, 2.02e-3, 50)
    assert np.all(lower.concentration_at(x) <= upper.concentration_at(x))
    # In the coat C <= K_coat * C_fluid = 0.1; in the tissue C <= 1 * (0.1 / 0.5) = 0.2.
    assert upper.diagnostics["surface_bound"] == [pytest.approx(0.2)]


@pytest.mark.parametrize("outer", [Boundary("flux", value=1e-6), Boundary("flux", value=-1e-6),
                                   Boundary("concentration", value=-0.1)])
def test_bracket_not_applicable(outer):
    """A prescribed influx leaves Cs unknown, an outflux or a negative fluid value can drive C
    below 0 where the rate bounds fail: no bracket (documented in mm_bracket)."""
    problem = Problem(
        geometry="sphere", inner=0.0,
        layers=(Layer("s", 1e-3, 1e-9, reaction=Reaction("michaelis_menten", vmax=1e-3,
                                                          km=1e-2)),),
        inner_boundary=Boundary("symmetry"), outer_boundary=outer)
    assert michaelis_menten_bracket(problem) is None
