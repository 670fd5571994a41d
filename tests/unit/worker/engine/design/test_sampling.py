"""Input distributions, the Gaussian copula and reproducible draws (``design.sampling``).

Scenario values are invented; check values are closed forms named beside each check: lognormal
moments (Johnson, Kotz & Balakrishnan 1994, *Continuous Univariate Distributions* vol. 1,
ch. 14), the truncated normal's mean (same work, ch. 13, eq. 13.134), the Spearman correlation
of a bivariate normal, ``rho_S = (6/pi) arcsin(rho/2)`` (Kruskal 1958, *J. Am. Stat. Assoc.*
53, 814), and scipy.stats as the reference library.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from worker.engine.design import sampling
from worker.engine.design.sampling import (
    InputDistribution,
    UncertaintySpec,
    default_block_size,
    draw,
)


def _spec(inputs, **kw):
    kw.setdefault("seed", 20261204)
    kw.setdefault("block_size", 4096)
    kw.setdefault("max_trials", 10 * kw["block_size"])
    return UncertaintySpec(tuple(inputs), **kw)


def test_block_size_follows_jcgm_101_7_9_4_b():
    # JCGM 101:2008 §7.9.4 b): M = max(J, 10^4), J = ceil(100 / (1 - p))
    assert default_block_size(0.95) == 10_000          # J = 2000
    assert default_block_size(0.999) == 100_000        # J = 100000
    assert default_block_size(0.9999) == 1_000_000


def test_lognormal_case_value_is_the_median_and_relative_sd_the_coefficient_of_variation():
    # lognormal: median = scale, CV^2 = exp(s^2) - 1 (Johnson, Kotz & Balakrishnan, eq. 14.8a)
    d = InputDistribution("layers[0].diffusivity", "lognormal", 2e-10, relative_sd=0.3)
    frozen = d.frozen()
    assert frozen.median() == pytest.approx(2e-10, rel=1e-12)
    assert frozen.std() / frozen.mean() == pytest.approx(0.3, rel=1e-12)


@pytest.mark.parametrize("kind, params, mean, sd", [
    # uniform: mean (a+b)/2, sd (b-a)/sqrt(12) (JCGM 101:2008 §6.4.2.3)
    ("uniform", dict(low=0.15, high=0.2), 0.175, 0.05 / math.sqrt(12)),
    # triangular: mean (a+b+c)/3, var (a^2+b^2+c^2-ab-ac-bc)/18 (JCGM 101 §6.4.5.3 for the
    # symmetric case; Johnson, Kotz & Balakrishnan vol. 2, ch. 26 in general)
    ("triangular", dict(low=150e-6, mode=160e-6, high=200e-6), 170e-6,
     math.sqrt((150**2 + 160**2 + 200**2 - 150 * 160 - 150 * 200 - 160 * 200) / 18) * 1e-6),
    ("normal", dict(sd=0.003), 0.01, 0.003),
])
def test_marginals_have_their_published_moments(kind, params, mean, sd):
    d = InputDistribution("x", kind, 0.01, **params)
    assert d.frozen().mean() == pytest.approx(mean, rel=1e-12)
    assert d.frozen().std() == pytest.approx(sd, rel=1e-12)
    x = draw(_spec([d]), 4096, 0)[:, 0]
    # sample mean within 5 standard errors (common practice)
    assert abs(x.mean() - mean) < 5 * sd / math.sqrt(x.size)


@pytest.mark.parametrize("kind, params, named", [
    ("normal", dict(sd=0.0), "sd must be > 0"),
    ("normal", dict(), "needs 'sd'"),
    ("lognormal", dict(relative_sd=-0.1), "relative_sd must be > 0"),
    ("uniform", dict(low=2.0, high=1.0), "low must be < high"),
    ("triangular", dict(low=1.0, mode=3.0, high=2.0), "low <= mode <= high"),
    ("uniform", dict(low=-1.0, high=1.0, domain=0.0), "outside the field's domain"),
    ("gamma", dict(), "distribution must be one of"),
])
def test_bad_parameters_name_the_field(kind, params, named):
    with pytest.raises(ValueError, match=r"layers\[1\]\.thickness.*" + named.replace("(", r"\(")):
        InputDistribution("layers[1].thickness", kind, 1.0, **params)


TRUNCATED = InputDistribution("layers[0].reaction.rate", "normal", 1e-3, sd=1e-3, domain=0.0,
                              domain_open=True)


def _truncation_agrees(distribution):
    """All draws inside the domain, and their mean within 5 standard errors of the
    truncated-normal mean mu + sigma phi(a) / (1 - Phi(a)), a = -1 (Johnson, Kotz &
    Balakrishnan vol. 1, eq. 13.134)."""
    x = draw(_spec([distribution], sampler="random"), 4096, 0)[:, 0]
    expected = 1e-3 + 1e-3 * stats.norm.pdf(-1.0) / stats.norm.sf(-1.0)
    sd = TRUNCATED.frozen().std()
    return bool(np.all(x > 0.0)) and abs(x.mean() - expected) < 5 * sd / math.sqrt(x.size)


def test_truncated_normal_stays_in_its_domain_and_says_so():
    d = TRUNCATED
    assert d.truncated
    # mass removed: Phi(-1) for a bound one sd below the mean (scipy.stats.norm as reference)
    assert d.truncated_probability == pytest.approx(stats.norm.cdf(-1.0), rel=1e-12)
    assert _truncation_agrees(d)
    assert not InputDistribution("x", "normal", 1.0, sd=0.1).truncated


@pytest.mark.parametrize("lower", [-np.inf, 0.3])
def test_truncation_check_catches_no_cut_and_a_cut_too_high(monkeypatch, lower):
    """Inject an untruncated normal (values below 0 appear), then a cut 0.3 sd above the
    domain (the mean rises): the check fails both ways."""
    monkeypatch.setattr(InputDistribution, "frozen",
                        lambda self: stats.truncnorm(lower, np.inf, loc=1e-3, scale=1e-3))
    assert not _truncation_agrees(TRUNCATED)


def test_open_domain_is_never_attained_even_at_the_smallest_uniform():
    d = InputDistribution("x", "normal", 0.0, sd=1.0, domain=0.0, domain_open=True)
    assert np.all(d.from_uniform(np.array([2.0**-53, 1e-300, 0.5])) > 0.0)


# --------------------------------------------------------------------------------------------
# Gaussian copula
# --------------------------------------------------------------------------------------------
def _scores(x, inputs):
    """Normal scores of each column: Phi^-1(F_j(x_j))."""
    return np.column_stack([stats.norm.ppf(d.frozen().cdf(x[:, j]))
                            for j, d in enumerate(inputs)])


CORRELATED = (InputDistribution("layers[0].diffusivity", "lognormal", 1e-10, relative_sd=0.4),
              InputDistribution("layers[0].partition", "uniform", 1.0, low=0.5, high=2.0),
              InputDistribution("layers[1].thickness", "triangular", 1.7e-4, low=1.5e-4,
                                mode=1.6e-4, high=2e-4))
RHO = -0.4


def _copula_check(spec, n=2**14):
    """The normal-score correlation within 4 standard errors of the requested coefficient
    ((1 - rho^2)/sqrt(n), Fisher 1915) and the Spearman correlation within the same of
    (6/pi) arcsin(rho/2) (Kruskal 1958)."""
    x = draw(spec, n, 3)
    z = _scores(x, spec.inputs)
    normal_score = np.corrcoef(z[:, 0], z[:, 1])[0, 1]
    spearman = stats.spearmanr(x[:, 0], x[:, 1]).statistic
    se = (1 - RHO**2) / math.sqrt(n)
    independent = np.corrcoef(z[:, 0], z[:, 2])[0, 1]
    return (abs(normal_score - RHO) < 4 * se
            and abs(spearman - 6 / math.pi * math.asin(RHO / 2)) < 4 * se
            and abs(independent) < 4 / math.sqrt(n))


@pytest.mark.parametrize("sampler", ["latin_hypercube", "sobol", "random"])
def test_copula_gives_the_requested_normal_score_correlation(sampler):
    spec = _spec(CORRELATED, correlations=((0, 1, RHO),), sampler=sampler)
    assert _copula_check(spec)


@pytest.mark.parametrize("factor", [0.8, 1.25])
def test_copula_check_catches_a_wrong_coefficient(monkeypatch, factor):
    """Inject a coefficient 20 % too weak or 25 % too strong into the mixing: the check fails."""
    spec = _spec(CORRELATED, correlations=((0, 1, RHO),))
    wrong = np.linalg.cholesky(np.array([[1, factor * RHO, 0], [factor * RHO, 1, 0],
                                         [0, 0, 1]]))
    monkeypatch.setattr(UncertaintySpec, "correlation_cholesky", property(lambda self: wrong))
    assert not _copula_check(spec)


def test_contradictory_correlations_are_refused_naming_the_fields():
    inputs = tuple(InputDistribution(f"layers[{i}].diffusivity", "normal", 1.0, sd=0.1)
                   for i in range(3))
    # 0.9, 0.9, -0.9: the matrix has a negative eigenvalue (1 - 0.9 - 0.9 < 0 ... by hand)
    assert np.linalg.eigvalsh(np.array([[1, .9, .9], [.9, 1, -.9], [.9, -.9, 1]])).min() < 0
    with pytest.raises(ValueError, match=r"layers\[0\].*layers\[1\].*layers\[2\].*not positive "
                                         r"definite"):
        _spec(inputs, correlations=((0, 1, 0.9), (0, 2, 0.9), (1, 2, -0.9)))
    with pytest.raises(ValueError, match=r"must lie in \(-1, 1\)"):
        _spec(inputs, correlations=((0, 1, 1.0),))


@pytest.mark.parametrize("kwargs, message", [
    (dict(coverage=1.0), r"uncertainty\.coverage"),
    (dict(seed=-1), r"uncertainty\.seed"),
    (dict(max_trials=4096), r"uncertainty\.max_trials: expected at least two blocks"),
    (dict(sampler="sobol", block_size=1000, max_trials=10**4), r"power of 2"),
    (dict(significant_digits=0), r"uncertainty\.significant_digits"),
])
def test_bad_spec_names_the_field(kwargs, message):
    with pytest.raises(ValueError, match=message):
        _spec([InputDistribution("x", "normal", 1.0, sd=0.1)], **kwargs)


# --------------------------------------------------------------------------------------------
# Reproducibility
# --------------------------------------------------------------------------------------------
def test_same_seed_and_block_give_the_same_trials_in_any_order():
    spec = _spec(CORRELATED, correlations=((0, 1, RHO),))
    forward = [draw(spec, 1024, b) for b in range(4)]
    backward = [draw(spec, 1024, b) for b in reversed(range(4))][::-1]
    for a, b in zip(forward, backward, strict=True):
        assert np.array_equal(a, b)
    assert not np.array_equal(forward[0], forward[1])
    other = _spec(CORRELATED, correlations=((0, 1, RHO),), seed=1)
    assert not np.array_equal(draw(other, 1024, 0), forward[0])


def test_block_stream_is_the_seed_sequence_spawned_for_that_block():
    # the stream of block b is SeedSequence(seed).spawn(...)'s child with key (0, b)
    child = np.random.SeedSequence(7, spawn_key=(sampling.STREAM_TRIALS, 2))
    assert np.array_equal(sampling.block_seed(7, sampling.STREAM_TRIALS, 2).generate_state(4),
                          child.generate_state(4))
