"""Elasticities and Sobol indices (``design.sensitivity``).

Check values:
- Ishigami function (Ishigami & Homma 1990, *Proc. ISUMA*), a = 7, b = 0.1, inputs U(-pi, pi):
  closed-form variances (Saltelli et al. 2008, *Global Sensitivity Analysis: The Primer*,
  Wiley, §4.9; also Homma & Saltelli 1996): V = a^2/8 + b pi^4/5 + b^2 pi^8/18 + 1/2,
  V1 = (1 + b pi^4/5)^2 / 2, V2 = a^2/8, V3 = 0, V13 = b^2 pi^8 (1/18 - 1/50);
  S_i = V_i / V, S_T1 = (V1 + V13)/V, S_T2 = V2/V, S_T3 = V13/V.
- A linear model of independent inputs: S_i = S_Ti = c_i^2 sigma_i^2 / sum_j c_j^2 sigma_j^2
  (Saltelli et al. 2008, §1.2.5).
- Elasticity of a power law x1^p x2^q is its exponent; of a sum c_i x_i it is c_i x_i / y
  (definition of the elasticity).
- scipy.stats.sobol_indices (same Saltelli 2010 / Jansen estimators) on the same points.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from worker.engine.design import sensitivity as sensitivity_module
from worker.engine.design.sampling import InputDistribution, UncertaintySpec
from worker.engine.design.sensitivity import local_elasticities, sensitivity, sobol_indices

A, B = 7.0, 0.1
PI = math.pi


def ishigami(x):
    return (np.sin(x[:, 0]) + A * np.sin(x[:, 1]) ** 2
            + B * x[:, 2] ** 4 * np.sin(x[:, 0]))[:, None]


def _ishigami_exact():
    v1 = 0.5 * (1 + B * PI**4 / 5) ** 2
    v2 = A**2 / 8
    v13 = B**2 * PI**8 * (1 / 18 - 1 / 50)
    v = A**2 / 8 + B * PI**4 / 5 + B**2 * PI**8 / 18 + 0.5
    return np.array([v1, v2, 0.0]) / v, np.array([v1 + v13, v2, v13]) / v


ISHIGAMI_INPUTS = tuple(InputDistribution(f"x{i + 1}", "uniform", 0.0, low=-PI, high=PI)
                        for i in range(3))


def _ishigami_agrees(result, tolerance=0.02):
    """Every index within 0.02 of its closed form (N = 2^14: the Monte Carlo error of these
    estimators is below 0.01 there, Saltelli et al. 2010, Fig. 2)."""
    first, total = _ishigami_exact()
    got = result.indices["y"]
    return all(abs(got[f"x{i + 1}"]["first_index"] - first[i]) < tolerance
               and abs(got[f"x{i + 1}"]["total_index"] - total[i]) < tolerance
               for i in range(3))


def _ishigami_result():
    spec = UncertaintySpec(ISHIGAMI_INPUTS, seed=1990, max_trials=10**5)
    return sensitivity(spec, ishigami, ["y"], base_points=2**14)


def test_ishigami_indices_match_their_closed_forms():
    result = _ishigami_result()
    assert _ishigami_agrees(result)
    assert result.evaluations == 2**14 * (3 + 2) + 2 * 3 + 1
    assert not result.independent_inputs_assumed


@pytest.mark.parametrize("wrong", ["first_with_f_a", "total_not_halved", "total_quartered"])
def test_ishigami_check_catches_a_wrong_estimator(monkeypatch, wrong):
    """Inject f(A) for f(B) in the first-order sum, then a total index twice and half as large:
    the closed-form check fails each time."""
    original = sensitivity_module.saltelli_indices

    def injected(f_a, f_b, f_ab):
        first, total = original(f_a, f_b, f_ab)
        if wrong == "first_with_f_a":
            first, _ = original(f_a, f_a, f_ab)
        elif wrong == "total_not_halved":
            total = 2 * total
        else:
            total = 0.5 * total
        return first, total

    monkeypatch.setattr(sensitivity_module, "saltelli_indices", injected)
    assert not _ishigami_agrees(_ishigami_result())


def test_linear_model_indices_and_elasticities():
    c = np.array([1.0, 2.0, -3.0])
    inputs = (InputDistribution("a", "normal", 1.0, sd=0.1),
              InputDistribution("b", "normal", 2.0, sd=0.2),
              InputDistribution("c", "uniform", 0.5, low=0.0, high=1.0))
    sd = np.array([0.1, 0.2, 1 / math.sqrt(12)])
    share = (c * sd) ** 2 / np.sum((c * sd) ** 2)
    spec = UncertaintySpec(inputs, seed=5, max_trials=10**5, correlations=((0, 1, 0.3),))
    result = sensitivity(spec, lambda x: (x @ c)[:, None], ["y"], base_points=2**13)
    y0 = c @ np.array([1.0, 2.0, 0.5])
    for i, name in enumerate("abc"):
        got = result.indices["y"][name]
        assert abs(got["first_index"] - share[i]) < 0.02
        assert abs(got["total_index"] - share[i]) < 0.02
        assert got["elasticity"] == pytest.approx(c[i] * [1.0, 2.0, 0.5][i] / y0, rel=1e-9)
    assert result.independent_inputs_assumed   # correlations given: said in the result


def test_same_points_same_indices_as_scipy():
    dists = [d.frozen() for d in ISHIGAMI_INPUTS]
    mine = sobol_indices(ishigami, dists, 1024, np.random.default_rng(42))
    reference = stats.sobol_indices(func=lambda x: ishigami(x.T)[:, 0], n=1024, dists=dists,
                                    rng=np.random.default_rng(42))
    np.testing.assert_allclose(mine.first[0], reference.first_order, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(mine.total[0], reference.total_order, rtol=1e-10, atol=1e-12)


def test_elasticity_of_a_power_law_is_its_exponent():
    def power(x):
        return np.column_stack([x[:, 0] ** 2 / x[:, 1], np.zeros(len(x))])

    elasticity, calls = local_elasticities(power, [3e-4, 2e-10])
    assert calls == 5
    # central differences of x^2 are exact; of 1/x the relative error is h^2 = 1e-6
    assert elasticity[0, 0] == pytest.approx(2.0, rel=1e-9)
    assert elasticity[0, 1] == pytest.approx(-1.0, rel=2e-6)
    assert np.all(np.isnan(elasticity[1]))    # y = 0: undefined


def test_failed_points_are_dropped_and_counted():
    def partly(x):
        y = ishigami(x)
        y[x[:, 2] > 3.0] = np.nan
        return y

    dists = [d.frozen() for d in ISHIGAMI_INPUTS]
    estimate = sobol_indices(partly, dists, 1024, np.random.default_rng(1))
    assert estimate.failed_points > 0
    assert estimate.base_points + estimate.failed_points == 1024
    assert np.all(np.isfinite(estimate.first))


def test_base_points_must_be_a_power_of_two():
    with pytest.raises(ValueError, match="power of 2"):
        sobol_indices(ishigami, [d.frozen() for d in ISHIGAMI_INPUTS], 1000,
                      np.random.default_rng(0))
