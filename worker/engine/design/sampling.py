"""Input distributions, correlations and reproducible draws for Monte Carlo propagation.

Every value is SI. An uncertain input is a case field (named by its JSON path) with a
probability distribution around the case's nominal value; a trial is one row of values, one
column per input. Correlations between inputs are imposed by a Gaussian copula (Nelsen 2006,
*An Introduction to Copulas*, 2nd ed., §2.10; the construction JCGM 101:2008 §6.4.8 uses for the
multivariate normal, ``x = mu + L z``): uniform points are mapped to normal scores, mixed by the
Cholesky factor of the correlation matrix and mapped back to uniforms, and each marginal's
inverse distribution function gives the input value. The coefficient is therefore the
correlation of the *normal scores*; for non-normal marginals the product-moment correlation of
the values themselves is close to it but not equal.

Reproducibility: the points of block ``b`` come from ``numpy.random.SeedSequence(seed,
spawn_key=(STREAM_TRIALS, b))`` alone, so the same seed gives the same trials whichever order
(or machine) the blocks run in.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
from scipy import stats
from scipy.stats import qmc

DistributionKind = Literal["normal", "lognormal", "uniform", "triangular"]
Sampler = Literal["latin_hypercube", "sobol", "random"]

KINDS: tuple[str, ...] = ("normal", "lognormal", "uniform", "triangular")
SAMPLERS: tuple[str, ...] = ("latin_hypercube", "sobol", "random")

# Independent random streams under one seed (spawn keys of numpy's SeedSequence).
STREAM_TRIALS = 0
STREAM_BLOCK_RESERVOIR = 1
STREAM_RESERVOIR_MERGE = 2
STREAM_SENSITIVITY = 3

# Uniform points are kept strictly inside (0, 1) so no inverse distribution function returns
# an infinite value (a pseudo-random generator can return exactly 0).
_UNIFORM_FLOOR = 2.0**-53

RESERVOIR_CAP = 4096


def _finite(value: float, what: str, name: str) -> float:
    number = float(value)
    if not math.isfinite(number):
        raise ValueError(f"uncertainty input {name!r}: {what} must be a finite number, "
                         f"got {value!r}")
    return number


@dataclass(frozen=True)
class InputDistribution:
    """One uncertain input: its field, its distribution and the parameters of that, all SI.

    - ``normal``: mean ``nominal`` and standard deviation ``sd`` (absolute; a relative sd is
      converted by the caller, ``sd = relative_sd * |nominal|``). When ``domain`` is given the
      normal is truncated to ``x >= domain`` (``x > domain`` when ``domain_open``) with
      ``scipy.stats.truncnorm``; the parent normal keeps mean ``nominal`` and sd ``sd``, so the
      truncated distribution's own mean lies slightly above ``nominal``.
    - ``lognormal``: the case value ``nominal`` is the *median*; ``relative_sd`` is the
      coefficient of variation (sd over mean) of the lognormal, so
      ``sigma_ln = sqrt(ln(1 + cv^2))`` (Johnson, Kotz & Balakrishnan 1994, *Continuous
      Univariate Distributions* vol. 1, 2nd ed., ch. 14, eq. 14.8a: ``Var/E^2 = exp(s^2) - 1``)
      and ``scale = nominal``.
    - ``uniform``: ``low`` < ``high`` (JCGM 101:2008 §6.4.2).
    - ``triangular``: ``low`` <= ``mode`` <= ``high``, ``low`` < ``high`` (JCGM 101 §6.4.5).

    ``domain`` (with ``domain_open``) is the field's physical lower bound; every distribution
    but the truncated normal must lie inside it, or ``ValueError`` names the field.
    """

    field: str
    kind: DistributionKind
    nominal: float
    sd: float | None = None
    relative_sd: float | None = None
    low: float | None = None
    mode: float | None = None
    high: float | None = None
    domain: float | None = None
    domain_open: bool = False

    def __post_init__(self) -> None:
        name = self.field
        if self.kind not in KINDS:
            raise ValueError(f"uncertainty input {name!r}: distribution must be one of "
                             f"{', '.join(KINDS)}, got {self.kind!r}")
        _finite(self.nominal, "the nominal value", name)
        if self.domain is not None:
            _finite(self.domain, "the domain bound", name)
        if self.kind == "normal":
            self._check_normal()
        elif self.kind == "lognormal":
            self._check_lognormal()
        elif self.kind == "uniform":
            self._check_uniform()
        else:
            self._check_triangular()

    def _required(self, what: str) -> float:
        value = getattr(self, what)
        if value is None:
            raise ValueError(f"uncertainty input {self.field!r}: a {self.kind} distribution "
                             f"needs {what!r}")
        return _finite(value, what, self.field)

    def _check_normal(self) -> None:
        sd = self._required("sd")
        if sd <= 0.0:
            raise ValueError(f"uncertainty input {self.field!r}: sd must be > 0, got {sd!r}")

    def _check_lognormal(self) -> None:
        cv = self._required("relative_sd")
        if cv <= 0.0:
            raise ValueError(f"uncertainty input {self.field!r}: relative_sd must be > 0, "
                             f"got {cv!r}")
        if self.nominal <= 0.0:
            raise ValueError(f"uncertainty input {self.field!r}: a lognormal needs a positive "
                             f"median (the case value), got {self.nominal!r}")
        if self.domain is not None and self.domain > 0.0:
            raise ValueError(f"uncertainty input {self.field!r}: a lognormal reaches down to 0, "
                             f"below the field's lower bound {self.domain!r}")

    def _check_uniform(self) -> None:
        low, high = self._required("low"), self._required("high")
        if not low < high:
            raise ValueError(f"uncertainty input {self.field!r}: low must be < high, got "
                             f"low={low!r}, high={high!r}")
        self._check_inside_domain(low)

    def _check_triangular(self) -> None:
        low, mode, high = self._required("low"), self._required("mode"), self._required("high")
        if not (low <= mode <= high and low < high):
            raise ValueError(f"uncertainty input {self.field!r}: expected low <= mode <= high "
                             f"with low < high, got low={low!r}, mode={mode!r}, high={high!r}")
        self._check_inside_domain(low)

    def _check_inside_domain(self, low: float) -> None:
        if self.domain is None:
            return
        outside = low <= self.domain if self.domain_open else low < self.domain
        if outside:
            relation = ">" if self.domain_open else ">="
            raise ValueError(f"uncertainty input {self.field!r}: low={low!r} lies outside the "
                             f"field's domain (values must be {relation} {self.domain!r})")

    @property
    def truncated(self) -> bool:
        """True when the distribution is a normal cut at the field's physical domain."""
        return self.kind == "normal" and self.domain is not None

    @property
    def truncated_probability(self) -> float:
        """Probability of the parent normal below the domain bound (removed by truncation)."""
        if not self.truncated:
            return 0.0
        assert self.sd is not None and self.domain is not None
        return float(stats.norm.cdf((self.domain - self.nominal) / self.sd))

    def frozen(self) -> Any:
        """The ``scipy.stats`` frozen distribution of this input."""
        if self.kind == "normal":
            assert self.sd is not None
            if self.domain is None:
                return stats.norm(loc=self.nominal, scale=self.sd)
            lower = (self.domain - self.nominal) / self.sd
            return stats.truncnorm(lower, np.inf, loc=self.nominal, scale=self.sd)
        if self.kind == "lognormal":
            assert self.relative_sd is not None
            sigma_ln = math.sqrt(math.log1p(self.relative_sd**2))
            return stats.lognorm(s=sigma_ln, scale=self.nominal)
        if self.kind == "uniform":
            assert self.low is not None and self.high is not None
            return stats.uniform(loc=self.low, scale=self.high - self.low)
        assert self.low is not None and self.mode is not None and self.high is not None
        width = self.high - self.low
        return stats.triang(c=(self.mode - self.low) / width, loc=self.low, scale=width)

    def from_uniform(self, u: np.ndarray) -> np.ndarray:
        """Values of this input at uniform points ``u`` in (0, 1) (inverse distribution)."""
        values = np.asarray(self.frozen().ppf(u), dtype=float)
        if self.truncated and self.domain_open:
            # the open bound is never attained; ppf can round onto it for u near 0
            assert self.domain is not None
            values = np.maximum(values, np.nextafter(self.domain, np.inf))
        return values


def default_block_size(coverage: float) -> int:
    """JCGM 101:2008 §7.9.4 b): ``M = max(J, 10^4)`` with ``J = ceil(100 / (1 - p))``."""
    # rounded first: 100 / (1 - 0.9999) is 1000000.0000000xx in binary floating point
    return max(math.ceil(round(100.0 / (1.0 - coverage), 6)), 10_000)


@dataclass(frozen=True)
class UncertaintySpec:
    """What to propagate and how: inputs, correlations, coverage, stopping and sampling.

    - ``correlations``: ``(i, j, rho)`` with ``i != j`` indices into ``inputs``; ``rho`` is the
      correlation coefficient of the inputs' *normal scores* (Gaussian copula).
    - ``significant_digits``: ``ndig`` of JCGM 101:2008 §7.9.2, the digits of the standard
      uncertainty the adaptive procedure (§7.9.4) makes meaningful.
    - ``block_size``: trials per block, ``M`` of §7.9.4 b) by default
      (:func:`default_block_size`); smaller blocks are allowed (tests). ``max_trials`` must
      allow at least two blocks, the least §7.9.4 f) needs.
    - ``sampler``: ``"latin_hypercube"`` (default), ``"sobol"`` (scrambled; block size must be a
      power of 2) or ``"random"``. Latin hypercube is the default because each block stays an
      independent random design (fresh seed per block), so the block-to-block standard
      deviations of §7.9.4 g)-h) remain honest statistics, while the stratification of every
      marginal lowers the variance of means for the largely monotone models of this trade
      (McKay, Beckman & Conover 1979, Technometrics 21, 239; Stein 1987, Technometrics 29,
      143). Scrambled Sobol points keep their balance only for power-of-2 block sizes, which
      §7.9.4's ``M`` is not; plain random sampling is JCGM 101's own §7.3 and is offered too.
    - ``reservoir_size``: trials (inputs and outputs) kept as a uniform random sample, at most
      ``RESERVOIR_CAP``; memory never grows with ``max_trials``.
    """

    inputs: tuple[InputDistribution, ...]
    seed: int
    max_trials: int
    correlations: tuple[tuple[int, int, float], ...] = ()
    coverage: float = 0.95
    significant_digits: int = 2
    sampler: Sampler = "latin_hypercube"
    block_size: int | None = None
    reservoir_size: int = 1000
    _cholesky: np.ndarray | None = field(init=False, repr=False, compare=False, default=None)

    def __post_init__(self) -> None:
        if not self.inputs:
            raise ValueError("uncertainty.inputs: at least one uncertain input is expected")
        fields = [distribution.field for distribution in self.inputs]
        duplicated = sorted({name for name in fields if fields.count(name) > 1})
        if duplicated:
            raise ValueError(f"uncertainty.inputs: each field may appear once, repeated: "
                             f"{', '.join(duplicated)}")
        if not 0.0 < self.coverage < 1.0:
            raise ValueError(f"uncertainty.coverage: expected a probability in (0, 1), got "
                             f"{self.coverage!r}")
        if isinstance(self.significant_digits, bool) or not 1 <= self.significant_digits <= 6:
            raise ValueError(f"uncertainty.significant_digits: expected an integer 1 to 6, got "
                             f"{self.significant_digits!r}")
        if isinstance(self.seed, bool) or not isinstance(self.seed, int) or self.seed < 0:
            raise ValueError(f"uncertainty.seed: expected a non-negative integer, got "
                             f"{self.seed!r}")
        if self.sampler not in SAMPLERS:
            raise ValueError(f"uncertainty.sampler: expected one of {', '.join(SAMPLERS)}, got "
                             f"{self.sampler!r}")
        if self.block_size is None:
            object.__setattr__(self, "block_size", default_block_size(self.coverage))
        block = self.trials_per_block
        if block < 2:
            raise ValueError(f"uncertainty.block_size: expected at least 2 trials, got {block}")
        if self.sampler == "sobol" and block & (block - 1):
            raise ValueError(f"uncertainty.block_size: the sobol sampler needs a power of 2, "
                             f"got {block}")
        if self.max_trials < 2 * block:
            raise ValueError(f"uncertainty.max_trials: expected at least two blocks of {block} "
                             f"trials ({2 * block}), got {self.max_trials}")
        if not 1 <= self.reservoir_size <= RESERVOIR_CAP:
            raise ValueError(f"uncertainty.reservoir_size: expected 1 to {RESERVOIR_CAP}, got "
                             f"{self.reservoir_size}")
        self._check_correlations(fields)

    @property
    def trials_per_block(self) -> int:
        assert self.block_size is not None
        return int(self.block_size)

    @property
    def max_blocks(self) -> int:
        return self.max_trials // self.trials_per_block

    @property
    def fields(self) -> tuple[str, ...]:
        return tuple(distribution.field for distribution in self.inputs)

    def _check_correlations(self, fields: list[str]) -> None:
        k = len(fields)
        matrix = np.eye(k)
        for i, j, rho in self.correlations:
            if not (0 <= i < k and 0 <= j < k) or i == j:
                raise ValueError(f"uncertainty.correlations: ({i}, {j}) must name two different "
                                 f"inputs among {k}")
            if not -1.0 < float(rho) < 1.0:
                raise ValueError(f"uncertainty.correlations: coefficient of {fields[i]} and "
                                 f"{fields[j]} must lie in (-1, 1), got {rho!r}")
            if matrix[i, j] != 0.0:
                raise ValueError(f"uncertainty.correlations: {fields[i]} and {fields[j]} are "
                                 f"correlated twice")
            matrix[i, j] = matrix[j, i] = float(rho)
        if not self.correlations:
            return
        try:
            cholesky = np.linalg.cholesky(matrix)
        except np.linalg.LinAlgError:
            named = sorted({fields[index] for i, j, _ in self.correlations for index in (i, j)})
            raise ValueError(f"uncertainty.correlations: the correlation matrix of "
                             f"{', '.join(named)} is not positive definite (the coefficients "
                             f"contradict each other)") from None
        object.__setattr__(self, "_cholesky", cholesky)

    @property
    def correlation_cholesky(self) -> np.ndarray | None:
        """Lower Cholesky factor of the normal-score correlation matrix (None: independent)."""
        return self._cholesky


def block_seed(seed: int, stream: int, index: int = 0) -> np.random.SeedSequence:
    """The seed sequence of one stream of one block: a pure function of its arguments."""
    return np.random.SeedSequence(seed, spawn_key=(stream, index))


def uniform_points(sampler: str, n: int, k: int, rng: np.random.Generator) -> np.ndarray:
    """``n`` points in (0, 1)^k from the chosen sampler, driven by ``rng``."""
    if sampler == "latin_hypercube":
        points = qmc.LatinHypercube(d=k, rng=rng).random(n)
    elif sampler == "sobol":
        points = qmc.Sobol(d=k, scramble=True, rng=rng).random_base2(int(round(math.log2(n))))
    else:
        points = rng.random((n, k))
    return np.clip(points, _UNIFORM_FLOOR, 1.0 - _UNIFORM_FLOOR)


def correlate(u: np.ndarray, cholesky: np.ndarray) -> np.ndarray:
    """Gaussian copula: uniforms -> normal scores -> ``z L^T`` -> uniforms."""
    z = stats.norm.ppf(u) @ cholesky.T
    return np.clip(stats.norm.cdf(z), _UNIFORM_FLOOR, 1.0 - _UNIFORM_FLOOR)


def to_inputs(spec: UncertaintySpec, u: np.ndarray) -> np.ndarray:
    """Input values (n, k) at uniform points (n, k), correlations applied when given."""
    cholesky = spec.correlation_cholesky
    if cholesky is not None:
        u = correlate(u, cholesky)
    columns = [distribution.from_uniform(u[:, j]) for j, distribution in enumerate(spec.inputs)]
    return np.column_stack(columns)


def draw(spec: UncertaintySpec, n: int, block_index: int) -> np.ndarray:
    """The ``n`` trials (n, k) of block ``block_index``: same seed and index, same values."""
    if n < 1:
        raise ValueError(f"draw: expected n >= 1, got {n}")
    if block_index < 0:
        raise ValueError(f"draw: expected block_index >= 0, got {block_index}")
    if spec.sampler == "sobol" and n & (n - 1):
        raise ValueError(f"draw: the sobol sampler needs a power-of-2 number of points, got {n}")
    rng = np.random.default_rng(block_seed(spec.seed, STREAM_TRIALS, block_index))
    return to_inputs(spec, uniform_points(spec.sampler, n, len(spec.inputs), rng))
