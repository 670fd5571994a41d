"""Monte Carlo propagation with JCGM 101:2008's adaptive stopping (``design.monte_carlo``).

Check values are closed forms, each named beside its check:
- JCGM 101:2008 §9.2 (additive model ``Y = X1 + X2 + X3 + X4``): §9.2.2 normal inputs
  N(0, 1): y = 0, u(y) = 2, 95 % interval +-1.96 u; §9.2.3 rectangular inputs of expectation 0
  and standard deviation 1: y = 0, u(y) = 2, and the exact interval from the Irwin-Hall
  distribution (Irwin 1927, Hall 1927, *Biometrika* 19), +-3.8794, which §9.2.3 reports as
  +-3.88.
- A membrane whose steady flux J = D K dC / L (Fick's first law; Crank 1975, *The Mathematics of
  Diffusion*, eq. 4.3) is linear in a lognormal diffusivity: J is lognormal with the same
  sigma_ln, so its mean, standard deviation, quantiles and the probability of a bound are
  closed forms (Johnson, Kotz & Balakrishnan 1994, vol. 1, ch. 14).
- Standard errors of the Monte Carlo figures: of a mean sigma/sqrt(n); of a standard deviation
  sigma sqrt((kappa - 1)/(4n)) with kappa the kurtosis; of a p-quantile sqrt(p(1-p)/n)/f(x_p)
  (Serfling 1980, *Approximation Theorems of Mathematical Statistics*, §2.3.3 and §2.2.3);
  Latin hypercube sampling does not exceed these for the monotone models used (Owen 1997).
  Agreement is asked within 4 standard errors with fixed seeds: deterministic, not flaky.
- scipy.stats.binom as the reference for the binomial standard error.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import stats
from scipy.optimize import brentq

from worker.engine.design import monte_carlo
from worker.engine.design.monte_carlo import (
    BlockResult,
    Bound,
    MonteCarloAccumulator,
    compute_block,
    coverage_endpoints,
    merge_blocks,
    numerical_tolerance,
    propagate,
)
from worker.engine.design.sampling import InputDistribution, UncertaintySpec

Z975 = stats.norm.ppf(0.975)


def _sum_model(x):
    return x.sum(axis=1, keepdims=True)


# --------------------------------------------------------------------------------------------
# JCGM 101:2008 §9.2 additive model
# --------------------------------------------------------------------------------------------
def _irwin_hall_cdf(x, n=4):
    """Irwin 1927 / Hall 1927: CDF of the sum of n U(0, 1)."""
    return sum((-1) ** k * math.comb(n, k) * (x - k) ** n
               for k in range(int(math.floor(x)) + 1)) / math.factorial(n)


def _rectangular_endpoint():
    s = brentq(lambda x: _irwin_hall_cdf(x) - 0.975, 2.0, 4.0, xtol=1e-14)
    return 2 * math.sqrt(3) * (s - 2)   # sum of 4 U(-sqrt3, sqrt3) = 2 sqrt3 (S - 2)


def _additive(kind):
    if kind == "normal":
        inputs = [InputDistribution(f"x{i}", "normal", 0.0, sd=1.0) for i in range(4)]
        density = stats.norm(scale=2.0).pdf(Z975 * 2)
        return inputs, Z975 * 2.0, density
    r3 = math.sqrt(3)
    inputs = [InputDistribution(f"x{i}", "uniform", 0.0, low=-r3, high=r3) for i in range(4)]
    end = _rectangular_endpoint()
    # density of the Irwin-Hall sum at the endpoint, numerically from its CDF
    s = end / (2 * r3) + 2
    h = 1e-6
    density = (_irwin_hall_cdf(s + h) - _irwin_hall_cdf(s - h)) / (2 * h) / (2 * r3)
    return inputs, end, density


def test_irwin_hall_endpoint_is_the_one_jcgm_101_9_2_3_reports():
    # JCGM 101:2008 §9.2.3, Table 3: MCM interval [-3.88, 3.88] for rectangular inputs
    assert round(_rectangular_endpoint(), 2) == 3.88


def _additive_agrees(kind):
    """y, u(y) and both endpoints within 4 Monte Carlo standard errors of JCGM 101 §9.2."""
    inputs, endpoint, density = _additive(kind)
    spec = UncertaintySpec(tuple(inputs), seed=101, max_trials=10**6)
    result = propagate(spec, _sum_model, ["y"])
    q = result.quantities["y"]
    n = result.trials
    # kurtosis of a sum of 4 iid: 3 + (k_x - 3)/4, k_x = 3 (normal) or 9/5 (uniform)
    kurtosis = 3.0 if kind == "normal" else 3 + (1.8 - 3) / 4
    quantile_se = math.sqrt(0.025 * 0.975 / n) / density
    return result.converged and result.failed_trials == 0 and all((
        abs(q.mean - 0.0) < 4 * 2.0 / math.sqrt(n),
        abs(q.standard_uncertainty - 2.0) < 4 * 2.0 * math.sqrt((kurtosis - 1) / (4 * n)),
        abs(q.interval[0] + endpoint) < 4 * quantile_se,
        abs(q.interval[1] - endpoint) < 4 * quantile_se,
    ))


@pytest.mark.parametrize("kind", ["normal", "rectangular"])
def test_jcgm_101_additive_model(kind):
    assert _additive_agrees(kind)


@pytest.mark.parametrize("kind", ["normal", "rectangular"])
@pytest.mark.parametrize("factor", [0.95, 1.05])
def test_additive_check_catches_inputs_five_percent_too_narrow_or_wide(monkeypatch, kind,
                                                                       factor):
    """At the 2 x 10^4 trials two significant digits need here, 4 standard errors of u(y) are
    about 2 %: an input spread 5 % off must fail the check."""
    original = InputDistribution.frozen

    def scaled(self):
        law = original(self)
        return law.dist(*law.args, **{**law.kwds, "loc": law.kwds.get("loc", 0.0) * factor,
                                             "scale": law.kwds["scale"] * factor})

    monkeypatch.setattr(InputDistribution, "frozen", scaled)
    assert not _additive_agrees(kind)


# --------------------------------------------------------------------------------------------
# A membrane's flux, linear in a lognormal diffusivity
# --------------------------------------------------------------------------------------------
D_MEDIAN, CV = 1e-10, 0.5          # m^2/s, coefficient of variation
PARTITION, DELTA_C, THICKNESS = 0.8, 1.0, 100e-6
J_MIN = 0.6e-6                     # mol/m^2/s, the requirement "flux at least"
SIGMA_LN = math.sqrt(math.log1p(CV**2))
J_MEDIAN = D_MEDIAN * PARTITION * DELTA_C / THICKNESS


def _flux(x):
    return (x[:, 0] * PARTITION * DELTA_C / THICKNESS)[:, None]


def _membrane_spec(**kw):
    kw.setdefault("seed", 20261204)
    kw.setdefault("max_trials", 10**6)
    return UncertaintySpec((InputDistribution("layers[0].diffusivity", "lognormal", D_MEDIAN,
                                              relative_sd=CV),), **kw)


def _membrane_agrees(result):
    """Mean, u, interval and P(J >= J_MIN) against the lognormal closed forms, each within 4
    of its Monte Carlo standard errors."""
    q = result.quantities["flux"]
    n = result.trials - result.failed_trials
    mean = J_MEDIAN * math.exp(SIGMA_LN**2 / 2)
    sd = mean * CV
    w = math.exp(SIGMA_LN**2)
    kurtosis = w**4 + 2 * w**3 + 3 * w**2 - 3
    low, high = (J_MEDIAN * math.exp(s * Z975 * SIGMA_LN) for s in (-1, 1))
    law = stats.lognorm(SIGMA_LN, scale=J_MEDIAN)
    p_met = stats.norm.sf(math.log(J_MIN / J_MEDIAN) / SIGMA_LN)
    requirement = result.requirements[0]
    checks = (
        abs(q.mean - mean) < 4 * sd / math.sqrt(n),
        abs(q.standard_uncertainty - sd) < 4 * sd * math.sqrt((kurtosis - 1) / (4 * n)),
        abs(q.interval[0] - low) < 4 * math.sqrt(0.025 * 0.975 / n) / law.pdf(low),
        abs(q.interval[1] - high) < 4 * math.sqrt(0.025 * 0.975 / n) / law.pdf(high),
        abs(requirement.probability_met - p_met) < 4 * math.sqrt(p_met * (1 - p_met) / n),
    )
    return all(checks)


REQUIREMENT = [Bound(0, J_MIN, None, "DI-1")]


def test_lognormal_membrane_flux_matches_its_closed_form():
    result = propagate(_membrane_spec(), _flux, ["flux"], REQUIREMENT)
    assert result.converged
    assert _membrane_agrees(result)


@pytest.mark.parametrize("factor", [0.98, 1.02])
def test_membrane_check_catches_a_two_percent_error_in_the_distribution(monkeypatch, factor):
    """Inject a lognormal whose median is 2 % off (e.g. the case value read as the mean):
    the closed-form check fails in either direction."""
    original = InputDistribution.frozen

    def shifted(self):
        law = original(self)
        return stats.lognorm(law.kwds["s"], scale=law.kwds["scale"] * factor)

    monkeypatch.setattr(InputDistribution, "frozen", shifted)
    result = propagate(_membrane_spec(), _flux, ["flux"], REQUIREMENT)
    assert not _membrane_agrees(result)


# --------------------------------------------------------------------------------------------
# Probability of meeting a requirement
# --------------------------------------------------------------------------------------------
def _se_agrees(requirement):
    """Standard error equals the binomial one, scipy.stats.binom(n, p).std() / n."""
    n, p = requirement.successful_trials, requirement.probability_met
    return math.isclose(requirement.standard_error, stats.binom(n, p).std() / n, rel_tol=1e-9)


def test_standard_error_of_the_probability_is_binomial():
    result = propagate(_membrane_spec(block_size=2000, max_trials=20000), _flux, ["flux"],
                       REQUIREMENT)
    assert 0 < result.requirements[0].probability_met < 1
    assert _se_agrees(result.requirements[0])


@pytest.mark.parametrize("wrong", [
    lambda p, n: math.sqrt(p * (1 - p) / n) * 1.5,
    lambda p, n: math.sqrt(p * (1 - p)) / n,
])
def test_standard_error_check_catches_a_wrong_formula(monkeypatch, wrong):
    """Inject a standard error too large, then too small: the binomial check fails."""
    monkeypatch.setattr(monte_carlo, "proportion_standard_error", wrong)
    result = propagate(_membrane_spec(block_size=2000, max_trials=20000), _flux, ["flux"],
                       REQUIREMENT)
    assert not _se_agrees(result.requirements[0])


def test_all_trials_met_gives_the_zero_event_bound():
    result = propagate(_membrane_spec(block_size=2000, max_trials=20000), _flux, ["flux"],
                       [Bound(0, 0.0, None, "positive"), Bound(0, None, -1.0, "negative")])
    met, missed = result.requirements
    n = met.successful_trials
    assert met.probability_met == 1.0 and met.standard_error == 0.0
    assert missed.probability_met == 0.0
    # exact one-sided 95 % bound 1 - 0.05^(1/n); "rule of three" 3/n (Hanley & Lippman-Hand
    # 1983) is its first-order form
    assert missed.zero_event_bound == pytest.approx(1 - 0.05 ** (1 / n), rel=1e-12)
    assert 1 - met.zero_event_bound == pytest.approx(3 / n, rel=0.01)


# --------------------------------------------------------------------------------------------
# The adaptive procedure, recomputed independently from every model value
# --------------------------------------------------------------------------------------------
class Recording:
    """The model of the membrane, keeping every evaluation (test only)."""

    def __init__(self, fail_above=None):
        self.x, self.y = [], []
        self.fail_above = fail_above

    def __call__(self, x):
        y = np.column_stack([_flux(x)[:, 0], np.log(x[:, 0])])
        if self.fail_above is not None:
            y[x[:, 0] > self.fail_above, 1] = np.nan
        self.x.append(x.copy())
        self.y.append(y.copy())
        return y


def _expected_stop(blocks_y, coverage, digits):
    """First h >= 2 where 2 s <= delta for estimate, u, and both endpoints of every output
    (JCGM 101:2008 §7.9.4 g)-k)), with s = std(block values, ddof=1)/sqrt(h) and delta from u
    of all values so far (§7.9.2), recomputed with numpy from the raw values."""
    for h in range(2, len(blocks_y) + 1):
        figures = []
        for y in blocks_y[:h]:
            ordered = np.sort(y, axis=0)
            m = y.shape[0]
            q = math.floor(coverage * m + 0.5)
            r = (m - q) // 2 if (m - q) % 2 == 0 else (m - q + 1) // 2
            figures.append(np.stack([y.mean(0), y.std(0, ddof=1), ordered[r - 1],
                                     ordered[r + q - 1]]))
        figures = np.array(figures)                       # (h, 4, m)
        s = figures.std(axis=0, ddof=1) / math.sqrt(h)
        u = np.concatenate(blocks_y[:h]).std(axis=0, ddof=1)
        exponent = np.floor(np.log10(u)) - (digits - 1)
        delta = 0.5 * 10.0**exponent
        if np.all(2 * s <= delta):
            return h
    return None


def _run_recorded(spec):
    model = Recording()
    result = propagate(spec, model, ["flux", "log_d"], REQUIREMENT)
    return result, model


def test_adaptive_stopping_stops_at_the_first_block_where_twice_s_is_within_delta():
    spec = _membrane_spec(block_size=500, max_trials=400_000, significant_digits=2)
    result, model = _run_recorded(spec)
    expected = _expected_stop(model.y, spec.coverage, spec.significant_digits)
    assert result.converged and result.stop_reason == "tolerance_met"
    assert expected is not None and result.blocks == expected >= 10
    for q in result.quantities.values():
        assert all(twice <= q.numerical_tolerance for twice in q.twice_sd.values())


@pytest.mark.parametrize("wrong_divisor", [
    lambda h: 1.0,            # the spread of the block values, not of their average: too late
    lambda h: float(h),       # s / sqrt(h) once more: stops too early
])
def test_stopping_check_catches_a_rule_comparing_the_wrong_quantity(monkeypatch, wrong_divisor):
    def wrong(self):
        h = self.count
        return np.sqrt(self.sum_squares / (h - 1)) / wrong_divisor(h)

    monkeypatch.setattr(monte_carlo._Running, "standard_deviation_of_mean", wrong)
    spec = _membrane_spec(block_size=500, max_trials=400_000, significant_digits=2)
    result, model = _run_recorded(spec)
    assert result.blocks != _expected_stop(model.y, spec.coverage, spec.significant_digits)


def test_max_trials_caps_the_run_unconverged():
    spec = _membrane_spec(block_size=1000, max_trials=3000, significant_digits=4)
    result = propagate(spec, _flux, ["flux"])
    assert result.trials == 3000 and result.blocks == 3
    assert not result.converged and result.stop_reason == "max_trials"


@pytest.mark.parametrize("value, digits, delta", [
    # §7.9.2: u = c x 10^l with c an ndig-digit integer; delta = 10^l / 2
    (0.0234, 2, 0.0005),     # 23 x 10^-3
    (2.0, 2, 0.05),          # 20 x 10^-1
    (1.0e-6, 1, 0.5e-6),     # 1 x 10^-6
    (0.0999, 2, 0.005),      # rounds to 10 x 10^-2
    (0.0, 2, 0.0),
])
def test_numerical_tolerance_jcgm_101_7_9_2(value, digits, delta):
    assert numerical_tolerance(value, digits) == pytest.approx(delta, rel=1e-12)


def test_coverage_endpoints_jcgm_101_7_7_2():
    # M = 10^4, p = 0.95: q = 9500, r = 250: interval [y_(250), y_(9750)]
    values = np.arange(1.0, 10_001.0)
    low, high = coverage_endpoints(values, 0.95)
    assert (low, high) == (250.0, 9750.0)
    # M = 101, p = 0.95: pM = 95.95 -> q = 96; M - q = 5 odd -> r = 3
    low, high = coverage_endpoints(np.arange(1.0, 102.0), 0.95)
    assert (low, high) == (3.0, 99.0)


# --------------------------------------------------------------------------------------------
# Failed trials, worst and median trials
# --------------------------------------------------------------------------------------------
def test_failed_trials_are_counted_and_kept_out_of_the_statistics():
    model = Recording(fail_above=1.5e-10)
    spec = _membrane_spec(block_size=2000, max_trials=6000, significant_digits=3)
    result = propagate(spec, model, ["flux", "log_d"], REQUIREMENT)
    y = np.concatenate(model.y)
    ok = np.all(np.isfinite(y), axis=1)
    assert result.failed_trials == int((~ok).sum()) > 0
    assert result.quantities["flux"].mean == pytest.approx(y[ok, 0].mean(), rel=1e-12)
    assert result.quantities["flux"].standard_uncertainty == pytest.approx(
        y[ok, 0].std(ddof=1), rel=1e-10)
    req = result.requirements[0]
    assert req.successful_trials == int(ok.sum())
    assert req.probability_met == np.count_nonzero(y[ok, 0] >= J_MIN) / ok.sum()
    assert all(t.outputs[1] is None for t in result.failed_examples)
    assert len(result.failed_examples) == monte_carlo.FAILED_EXAMPLES


def _worst_agrees(result, model):
    y = np.concatenate(model.y)
    x = np.concatenate(model.x)
    margin = y[:, 0] - J_MIN
    at = int(np.argmin(margin))
    worst = result.requirements[0].worst
    return worst.index == at and worst.inputs == tuple(x[at]) and worst.margin == margin[at]


def test_worst_trial_is_the_smallest_margin_of_all_trials():
    spec = _membrane_spec(block_size=2000, max_trials=8000, significant_digits=4)
    result, model = _run_recorded(spec)
    assert _worst_agrees(result, model)


def test_worst_trial_check_catches_a_reversed_comparison(monkeypatch):
    monkeypatch.setattr(monte_carlo, "_margin", lambda trial: -trial.margin)
    spec = _membrane_spec(block_size=2000, max_trials=8000, significant_digits=4)
    result, model = _run_recorded(spec)
    assert not _worst_agrees(result, model)


def test_median_trial_is_a_sampled_trial_near_the_medians():
    spec = _membrane_spec(block_size=2000, max_trials=8000, significant_digits=4)
    result, _ = _run_recorded(spec)
    median = result.median_trial
    assert median in result.sample
    # median of log D is ln(D_MEDIAN) (lognormal); the nearest of 1000 sampled trials lies
    # within a few thousandths of sigma_ln of it
    assert abs(median.outputs[1] - math.log(D_MEDIAN)) < 0.01 * SIGMA_LN


# --------------------------------------------------------------------------------------------
# Reproducibility, blocks run anywhere, bounded memory
# --------------------------------------------------------------------------------------------
def test_same_seed_same_figures_bitwise():
    spec = _membrane_spec(block_size=2000, max_trials=40000)
    first = propagate(spec, _flux, ["flux"], REQUIREMENT).as_dict()
    second = propagate(spec, _flux, ["flux"], REQUIREMENT).as_dict()
    assert json.dumps(first) == json.dumps(second)
    other = propagate(_membrane_spec(block_size=2000, max_trials=40000, seed=1), _flux,
                      ["flux"], REQUIREMENT).as_dict()
    assert other["quantities"] != first["quantities"]


def test_blocks_run_out_of_order_and_through_json_merge_to_the_same_result():
    spec = _membrane_spec(block_size=2000, max_trials=40000)
    sequential = propagate(spec, _flux, ["flux"], REQUIREMENT)
    order = [7, 2, 0, 9, 4, 1, 8, 3, 6, 5, 11, 10]
    computed = [compute_block(spec, _flux, REQUIREMENT, b, 1) for b in order]
    shipped = [BlockResult.from_dict(json.loads(json.dumps(b.as_dict()))) for b in computed]
    merged = merge_blocks(spec, ["flux"], REQUIREMENT, shipped)
    assert sequential.blocks < len(order)
    assert json.dumps(merged.as_dict()) == json.dumps(sequential.as_dict())
    few = merge_blocks(spec, ["flux"], REQUIREMENT, shipped[:1])
    assert not few.converged and few.stop_reason == "more_blocks_needed"


def test_run_block_hook_and_progress():
    spec = _membrane_spec(block_size=2000, max_trials=40000)
    calls, progress = [], []

    def remote(index):
        calls.append(index)
        return compute_block(spec, _flux, REQUIREMENT, index, 1)

    result = propagate(spec, _flux, ["flux"], REQUIREMENT, run_block=remote,
                       on_progress=lambda trials, blocks: progress.append((trials, blocks)))
    assert calls == list(range(result.blocks))
    assert progress[-1] == (result.trials, result.blocks)
    assert json.dumps(result.as_dict()) == json.dumps(
        propagate(spec, _flux, ["flux"], REQUIREMENT).as_dict())


def _longest_list(value):
    if isinstance(value, dict):
        return max((_longest_list(v) for v in value.values()), default=0)
    if isinstance(value, list):
        return max([len(value)] + [_longest_list(v) for v in value])
    return 0


def test_memory_stays_bounded_whatever_max_trials_says():
    spec = _membrane_spec(block_size=500, max_trials=10**12, significant_digits=6,
                          reservoir_size=64)
    accumulator = MonteCarloAccumulator(spec, ("flux",), tuple(REQUIREMENT))
    for b in range(60):
        accumulator.add(compute_block(spec, _flux, REQUIREMENT, b, 1))
    assert not accumulator.done
    arrays = [v for v in vars(accumulator).values() if isinstance(v, np.ndarray)]
    arrays += [a for a in (accumulator._sample or ()) if isinstance(a, np.ndarray)]
    assert max(a.size for a in arrays) <= 64 * (1 + 1)
    result = accumulator.result()
    assert len(result.sample) == 64
    assert _longest_list(result.as_dict()) == 64


def test_sample_is_uniform_over_all_trials():
    """Bottom-k sample over 60 blocks: its trial indices are uniform over 0..N-1
    (Kolmogorov-Smirnov against scipy's uniform; fixed seed)."""
    spec = _membrane_spec(block_size=500, max_trials=10**12, significant_digits=6,
                          reservoir_size=1000)
    accumulator = MonteCarloAccumulator(spec, ("flux",), tuple(REQUIREMENT))
    for b in range(60):
        accumulator.add(compute_block(spec, _flux, REQUIREMENT, b, 1))
    indices = np.array([t.index for t in accumulator.result().sample])
    assert len(set(indices)) == 1000
    assert stats.kstest(indices / 30_000, "uniform").pvalue > 0.01


def test_model_of_the_wrong_shape_is_refused():
    spec = _membrane_spec(block_size=1000, max_trials=4000)
    with pytest.raises(ValueError, match=r"shape \(1000, 2\), expected \(1000, 1\)"):
        propagate(spec, lambda x: np.column_stack([x[:, 0], x[:, 0]]), ["flux"])
    with pytest.raises(ValueError, match="output index 3"):
        propagate(spec, _flux, ["flux"], [Bound(3, 0.0, None)])
