"""Monte Carlo propagation of input uncertainty with JCGM 101:2008's adaptive stopping.

The model is any vectorised function ``model(x) -> y`` with ``x`` of shape (n, k) (one column
per uncertain input, SI) and ``y`` of shape (n, m) (one column per output quantity); a row with
a non-finite value is a failed trial. Failed trials are counted and reported and take no part
in any statistic.

Procedure (JCGM 101:2008, *Evaluation of measurement data — Supplement 1 to the GUM —
Propagation of distributions using a Monte Carlo method*):

- trials run in blocks of ``M`` (§7.9.4 b)); each block gives, for every output, the estimate
  (the mean, §7.6 eq. 22), the standard uncertainty (§7.6 eq. 23) and the endpoints of the
  probabilistically symmetric coverage interval (§7.7.2: ``q = pM`` rounded, ``r = (M - q)/2``
  rounded up, interval ``[y_(r), y_(r+q)]`` of the sorted values);
- from the second block on (§7.9.4 f)), the standard deviation of the average of the ``h``
  block values of each of those four figures, ``s^2 = sum (v_r - v_mean)^2 / (h (h - 1))``
  (§7.9.4 g), h)), is compared with the numerical tolerance ``delta`` of the standard
  uncertainty formed from all trials so far (§7.9.4 i), j); §7.9.2: ``u = c 10^l`` with ``c``
  an ``ndig``-digit integer, ``delta = 10^l / 2``); the run stops when ``2 s <= delta`` for all
  four figures of every output (§7.9.4 k)), or when ``max_trials`` is reached (then
  ``converged`` is False).

Memory stays bounded whatever ``max_trials`` says. The estimate and the standard uncertainty
are formed from all trials, exactly, by pooling the blocks' counts, means and sums of squared
deviations (Chan, Golub & LeVeque 1983, *Am. Stat.* 37, 242, eq. 2.1). The coverage interval
endpoints are the averages of the ``h`` blocks' endpoints: §7.9.4 l) forms them from all ``hM``
values at once, which would need every value in memory; the average is the very quantity whose
numerical spread §7.9.4 k) controls (``2 s <= delta``), and the two differ by the order-``1/M``
bias of a sample quantile, well inside that tolerance for ``M >= 10^4``. Besides the running
figures only a bounded uniform sample of trials is kept (bottom-k sampling on per-trial random
keys: Cohen & Kaplan 2007, PODC, "Summarizing data using bottom-k sketches"; it merges blocks
in any order to the same sample), and for every requirement the one trial with the smallest
margin.

A block is a pure function of (spec, model, requirements, block index): :func:`compute_block`
returns a plain :class:`BlockResult` (``as_dict``/``from_dict``), so blocks may run anywhere
and :func:`merge_blocks` forms the same result from them in block order.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any, NamedTuple

import numpy as np

from worker.engine.design.sampling import (
    STREAM_BLOCK_RESERVOIR,
    UncertaintySpec,
    block_seed,
    draw,
)

Model = Callable[[np.ndarray], np.ndarray]

FAILED_EXAMPLES = 5
# One-sided confidence level of the bound quoted when no trial (or every trial) met a bound.
ZERO_EVENT_CONFIDENCE = 0.95


class Bound(NamedTuple):
    """A requirement on one output: ``low <= y <= high`` (either side may be None), SI."""

    output_index: int
    low: float | None
    high: float | None
    id: str = ""


@dataclass(frozen=True)
class TrialRecord:
    """One trial: its global index (block * M + row), inputs, outputs, margin if any."""

    index: int
    inputs: tuple[float, ...]
    outputs: tuple[float | None, ...]
    margin: float | None = None

    def as_dict(self) -> dict[str, Any]:
        return {"index": self.index, "inputs": list(self.inputs),
                "outputs": list(self.outputs), "margin": self.margin}

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> TrialRecord:
        return cls(int(data["index"]), tuple(float(v) for v in data["inputs"]),
                   tuple(None if v is None else float(v) for v in data["outputs"]),
                   None if data.get("margin") is None else float(data["margin"]))


def _none_if_nan(value: float) -> float | None:
    return float(value) if math.isfinite(value) else None


def _nan_if_none(value: float | None) -> float:
    return math.nan if value is None else float(value)


def _margin(trial: TrialRecord) -> float:
    return math.inf if trial.margin is None else trial.margin


def _trial(index: int, x: np.ndarray, y: np.ndarray, margin: float | None = None) -> TrialRecord:
    return TrialRecord(int(index), tuple(float(v) for v in x),
                       tuple(_none_if_nan(float(v)) for v in y), margin)


@dataclass(eq=False)
class BlockResult:
    """The statistics of one block of trials: small, picklable, JSON-able (``as_dict``).

    Per output (tuples of length m, NaN when fewer than two trials succeeded): ``means``,
    ``sum_squares`` (sum of squared deviations from the block mean), ``lows``/``highs`` (the
    block's coverage interval endpoints, JCGM 101 §7.7.2) and ``medians``. Per requirement:
    ``met`` (successful trials within the bound) and ``worst`` (smallest margin). The block's
    share of the uniform trial sample: ``sample_keys`` (random keys in (0, 1), the smallest
    kept), ``sample_indices``, ``sample_inputs`` (r, k), ``sample_outputs`` (r, m).
    """

    block_index: int
    trials: int
    succeeded: int
    means: tuple[float, ...]
    sum_squares: tuple[float, ...]
    lows: tuple[float, ...]
    highs: tuple[float, ...]
    medians: tuple[float, ...]
    met: tuple[int, ...]
    worst: tuple[TrialRecord | None, ...]
    sample_keys: np.ndarray
    sample_indices: np.ndarray
    sample_inputs: np.ndarray
    sample_outputs: np.ndarray
    failed_examples: tuple[TrialRecord, ...] = ()

    @property
    def failed(self) -> int:
        return self.trials - self.succeeded

    def as_dict(self) -> dict[str, Any]:
        def floats(values: Sequence[float]) -> list[float | None]:
            return [_none_if_nan(v) for v in values]

        return {
            "block_index": self.block_index, "trials": self.trials,
            "succeeded": self.succeeded, "means": floats(self.means),
            "sum_squares": floats(self.sum_squares), "lows": floats(self.lows),
            "highs": floats(self.highs), "medians": floats(self.medians),
            "met": list(self.met),
            "worst": [None if w is None else w.as_dict() for w in self.worst],
            "sample_keys": self.sample_keys.tolist(),
            "sample_indices": self.sample_indices.tolist(),
            "sample_inputs": self.sample_inputs.tolist(),
            "sample_outputs": [floats(row) for row in self.sample_outputs],
            "failed_examples": [t.as_dict() for t in self.failed_examples],
        }

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> BlockResult:
        def floats(values: Sequence[float | None]) -> tuple[float, ...]:
            return tuple(_nan_if_none(v) for v in values)

        k_outputs = len(data["means"])
        outputs = np.array([floats(row) for row in data["sample_outputs"]], dtype=float)
        return cls(
            block_index=int(data["block_index"]), trials=int(data["trials"]),
            succeeded=int(data["succeeded"]), means=floats(data["means"]),
            sum_squares=floats(data["sum_squares"]), lows=floats(data["lows"]),
            highs=floats(data["highs"]), medians=floats(data["medians"]),
            met=tuple(int(v) for v in data["met"]),
            worst=tuple(None if w is None else TrialRecord.from_dict(w) for w in data["worst"]),
            sample_keys=np.array(data["sample_keys"], dtype=float),
            sample_indices=np.array(data["sample_indices"], dtype=np.int64),
            sample_inputs=np.array(data["sample_inputs"], dtype=float).reshape(
                len(data["sample_indices"]), -1),
            sample_outputs=outputs.reshape(len(data["sample_indices"]), k_outputs),
            failed_examples=tuple(TrialRecord.from_dict(t) for t in data["failed_examples"]),
        )


def coverage_endpoints(sorted_values: np.ndarray, coverage: float) -> tuple[np.ndarray, ...]:
    """Probabilistically symmetric interval from values sorted along axis 0 (JCGM 101 §7.7.2).

    ``q = pM`` if that is an integer, else ``floor(pM + 1/2)``; ``r = (M - q)/2`` if an integer,
    else ``(M - q + 1)/2``; the interval is ``[y_(r), y_(r+q)]`` (1-based order statistics).
    """
    count = sorted_values.shape[0]
    exact = coverage * count
    q = int(round(exact)) if abs(exact - round(exact)) < 1e-9 else math.floor(exact + 0.5)
    r = (count - q) // 2 if (count - q) % 2 == 0 else (count - q + 1) // 2
    r = max(r, 1)
    top = min(r + q, count)
    return sorted_values[r - 1], sorted_values[top - 1]


def margins(values: np.ndarray, bound: Bound) -> np.ndarray:
    """Distance inside the bound (SI): > 0 met, < 0 missed; the nearer side counts."""
    margin = np.full(values.shape, np.inf)
    if bound.low is not None:
        margin = np.minimum(margin, values - bound.low)
    if bound.high is not None:
        margin = np.minimum(margin, bound.high - values)
    return margin


def _check_requirements(requirements: Sequence[Bound], m: int) -> tuple[Bound, ...]:
    checked = []
    for number, raw in enumerate(requirements):
        bound = Bound(*raw)
        if not 0 <= bound.output_index < m:
            raise ValueError(f"requirement {bound.id or number}: output index "
                             f"{bound.output_index} outside the model's {m} outputs")
        if bound.low is None and bound.high is None:
            raise ValueError(f"requirement {bound.id or number}: needs a low or a high bound")
        if bound.low is not None and bound.high is not None and bound.low > bound.high:
            raise ValueError(f"requirement {bound.id or number}: low {bound.low} exceeds high "
                             f"{bound.high}")
        checked.append(bound)
    return tuple(checked)


def evaluate(model: Model, x: np.ndarray, m: int | None = None) -> np.ndarray:
    """The model's outputs (n, m) at inputs ``x`` (n, k), shape checked."""
    y = np.asarray(model(x), dtype=float)
    if y.ndim == 1 and (m is None or m == 1):
        y = y[:, None]
    if y.ndim != 2 or y.shape[0] != x.shape[0] or (m is not None and y.shape[1] != m):
        expected = f"({x.shape[0]}, {m if m is not None else 'm'})"
        raise ValueError(f"model returned an array of shape {y.shape}, expected {expected}")
    return y


def compute_block(spec: UncertaintySpec, model: Model, requirements: Sequence[Bound],
                  block_index: int, outputs: int | None = None) -> BlockResult:
    """Draw block ``block_index``, run the model on it and reduce it to its statistics."""
    n = spec.trials_per_block
    x = draw(spec, n, block_index)
    y = evaluate(model, x, outputs)
    bounds = _check_requirements(requirements, y.shape[1])
    first_index = block_index * n
    ok = np.all(np.isfinite(y), axis=1)
    rows_ok = np.flatnonzero(ok)
    good = y[rows_ok]
    count = good.shape[0]
    m = y.shape[1]
    if count >= 2:
        means = good.mean(axis=0)
        sum_squares = ((good - means) ** 2).sum(axis=0)
        ordered = np.sort(good, axis=0)
        lows, highs = coverage_endpoints(ordered, spec.coverage)
        medians = np.median(ordered, axis=0)
    else:
        means = sum_squares = lows = highs = medians = np.full(m, np.nan)
        if count == 1:
            means, sum_squares = good[0].copy(), np.zeros(m)
    met: list[int] = []
    worst: list[TrialRecord | None] = []
    for bound in bounds:
        margin = margins(good[:, bound.output_index], bound)
        met.append(int(np.count_nonzero(margin >= 0.0)))
        if count:
            at = int(np.argmin(margin))
            row = int(rows_ok[at])
            worst.append(_trial(first_index + row, x[row], y[row], float(margin[at])))
        else:
            worst.append(None)
    keys = np.random.default_rng(block_seed(spec.seed, STREAM_BLOCK_RESERVOIR,
                                            block_index)).random(n)
    size = min(spec.reservoir_size, n)
    kept = np.sort(np.argpartition(keys, size - 1)[:size]) if size < n else np.arange(n)
    failed_rows = np.flatnonzero(~ok)[:FAILED_EXAMPLES]
    return BlockResult(
        block_index=block_index, trials=n, succeeded=count,
        means=tuple(map(float, means)), sum_squares=tuple(map(float, sum_squares)),
        lows=tuple(map(float, lows)), highs=tuple(map(float, highs)),
        medians=tuple(map(float, medians)), met=tuple(met), worst=tuple(worst),
        sample_keys=keys[kept], sample_indices=first_index + kept,
        sample_inputs=x[kept], sample_outputs=y[kept],
        failed_examples=tuple(_trial(first_index + int(r), x[r], y[r]) for r in failed_rows),
    )


def numerical_tolerance(value: float, significant_digits: int) -> float:
    """JCGM 101:2008 §7.9.2: write ``value = c 10^l`` with ``c`` an ``ndig``-digit integer;
    the tolerance is ``10^l / 2``. Zero (a constant output) has tolerance 0."""
    magnitude = abs(value)
    if magnitude == 0.0 or not math.isfinite(magnitude):
        return 0.0 if magnitude == 0.0 else math.nan
    exponent = math.floor(math.log10(magnitude)) - (significant_digits - 1)
    if round(magnitude / 10.0**exponent) >= 10**significant_digits:
        exponent += 1  # rounding carried into one more digit (e.g. 0.0999 -> 10 x 10^-2)
    return 0.5 * 10.0**exponent


def proportion_standard_error(p: float, n: int) -> float:
    """Standard error of a proportion ``p`` of ``n`` independent trials: ``sqrt(p(1-p)/n)``
    (the binomial standard deviation over n)."""
    return math.sqrt(p * (1.0 - p) / n)


class _Running:
    """Mean and sum of squared deviations of a stream of equal-weight vectors (Welford 1962,
    Technometrics 4, 419)."""

    def __init__(self, m: int) -> None:
        self.count = 0
        self.mean = np.zeros(m)
        self.sum_squares = np.zeros(m)

    def add(self, values: np.ndarray) -> None:
        self.count += 1
        delta = values - self.mean
        self.mean = self.mean + delta / self.count
        self.sum_squares = self.sum_squares + delta * (values - self.mean)

    def standard_deviation_of_mean(self) -> np.ndarray:
        """``sqrt(sum (v_r - v_mean)^2 / (h (h - 1)))``: JCGM 101 §7.9.4 g)."""
        h = self.count
        return np.sqrt(self.sum_squares / (h * (h - 1)))


@dataclass(frozen=True)
class QuantitySummary:
    """One output: estimate, standard uncertainty, coverage interval (SI), and the stability
    figures of JCGM 101 §7.9.4: the tolerance ``delta`` and ``2 s`` of each figure."""

    mean: float | None
    standard_uncertainty: float | None
    interval: tuple[float | None, float | None]
    coverage: float
    median: float | None
    numerical_tolerance: float | None
    twice_sd: dict[str, float | None]

    def as_dict(self) -> dict[str, Any]:
        return {"mean": self.mean, "standard_uncertainty": self.standard_uncertainty,
                "interval": list(self.interval), "coverage": self.coverage,
                "median": self.median, "numerical_tolerance": self.numerical_tolerance,
                "twice_sd": dict(self.twice_sd)}


@dataclass(frozen=True)
class RequirementSummary:
    """Probability that a requirement is met, over the successful trials.

    ``standard_error = sqrt(p (1 - p) / n)`` (binomial proportion; for Latin hypercube
    sampling an upper estimate, Owen 1997, Ann. Stat. 25, 1541). When ``p`` is 0 or 1 that
    formula gives 0, so ``zero_event_bound`` then holds the exact one-sided 95 % bound:
    for ``p = 1`` the lower bound of the probability met, ``0.05^(1/n)``; for ``p = 0`` the
    upper bound, ``1 - 0.05^(1/n)`` (close to the "rule of three", ``3/n``: Hanley &
    Lippman-Hand 1983, JAMA 249, 1743).
    """

    id: str
    output_index: int
    low: float | None
    high: float | None
    probability_met: float | None
    standard_error: float | None
    successful_trials: int
    zero_event_bound: float | None
    worst: TrialRecord | None

    def as_dict(self) -> dict[str, Any]:
        return {"id": self.id, "output_index": self.output_index, "low": self.low,
                "high": self.high, "probability_met": self.probability_met,
                "standard_error": self.standard_error,
                "successful_trials": self.successful_trials,
                "zero_event_bound": self.zero_event_bound,
                "worst": None if self.worst is None else self.worst.as_dict()}


@dataclass(frozen=True)
class MonteCarloResult:
    """Everything the record needs from a Monte Carlo run; no array grows with the trials."""

    fields: tuple[str, ...]
    names: tuple[str, ...]
    trials: int
    failed_trials: int
    seed: int
    sampler: str
    block_size: int
    blocks: int
    coverage: float
    significant_digits: int
    converged: bool
    stop_reason: str
    quantities: dict[str, QuantitySummary]
    requirements: tuple[RequirementSummary, ...]
    median_trial: TrialRecord | None
    sample: tuple[TrialRecord, ...]
    failed_examples: tuple[TrialRecord, ...]
    truncated_inputs: tuple[str, ...]

    def as_dict(self) -> dict[str, Any]:
        return {
            "trials": self.trials, "failed_trials": self.failed_trials, "seed": self.seed,
            "sampler": self.sampler, "block_size": self.block_size, "blocks": self.blocks,
            "coverage": self.coverage, "significant_digits": self.significant_digits,
            "converged": self.converged, "stop_reason": self.stop_reason,
            "fields": list(self.fields),
            "quantities": {name: q.as_dict() for name, q in self.quantities.items()},
            "requirements": {(r.id or str(i)): r.as_dict()
                             for i, r in enumerate(self.requirements)},
            "median_trial": None if self.median_trial is None else self.median_trial.as_dict(),
            "sample": [t.as_dict() for t in self.sample],
            "failed_examples": [t.as_dict() for t in self.failed_examples],
            "truncated_inputs": list(self.truncated_inputs),
        }


@dataclass
class MonteCarloAccumulator:
    """Blocks added in block order; holds only running figures and bounded samples."""

    spec: UncertaintySpec
    names: tuple[str, ...]
    requirements: tuple[Bound, ...]
    blocks: int = 0
    trials: int = 0
    succeeded: int = 0
    converged: bool = False
    _pooled_mean: np.ndarray = field(init=False)
    _pooled_sum_squares: np.ndarray = field(init=False)
    _figures: dict[str, _Running] = field(init=False)
    _met: list[int] = field(init=False)
    _worst: list[TrialRecord | None] = field(init=False)
    _sample: tuple[np.ndarray, ...] | None = field(init=False, default=None)
    _failed_examples: list[TrialRecord] = field(init=False)

    def __post_init__(self) -> None:
        m = len(self.names)
        self.requirements = _check_requirements(self.requirements, m)
        self._pooled_mean = np.zeros(m)
        self._pooled_sum_squares = np.zeros(m)
        self._figures = {name: _Running(m) for name in
                         ("estimate", "standard_uncertainty", "low", "high", "median")}
        self._met = [0] * len(self.requirements)
        self._worst = [None] * len(self.requirements)
        self._failed_examples = []

    @property
    def done(self) -> bool:
        return self.converged or self.blocks >= self.spec.max_blocks or self._all_failed

    @property
    def _all_failed(self) -> bool:
        return self.blocks >= 2 and self.succeeded == 0

    def add(self, block: BlockResult) -> None:
        if block.block_index != self.blocks:
            raise ValueError(f"blocks must be merged in order: expected block {self.blocks}, "
                             f"got {block.block_index}")
        if len(block.means) != len(self.names) or len(block.met) != len(self.requirements):
            raise ValueError(f"block {block.block_index} does not match the outputs and "
                             f"requirements of this run")
        self._pool(block)
        block_sd = np.sqrt(np.asarray(block.sum_squares) / (block.succeeded - 1)) \
            if block.succeeded >= 2 else np.full(len(self.names), np.nan)
        for name, values in (("estimate", block.means), ("standard_uncertainty", block_sd),
                             ("low", block.lows), ("high", block.highs),
                             ("median", block.medians)):
            self._figures[name].add(np.asarray(values, dtype=float))
        for i, worst in enumerate(block.worst):
            self._met[i] += block.met[i]
            current = self._worst[i]
            if worst is not None and (current is None or _margin(worst) < _margin(current)):
                self._worst[i] = worst
        self._merge_sample(block)
        room = FAILED_EXAMPLES - len(self._failed_examples)
        self._failed_examples.extend(block.failed_examples[:max(room, 0)])
        self.blocks += 1
        self.trials += block.trials
        self.converged = self.blocks >= 2 and self._stable()

    def _pool(self, block: BlockResult) -> None:
        """Chan, Golub & LeVeque 1983, eq. 2.1: pooled mean and sum of squared deviations."""
        n_a, n_b = self.succeeded, block.succeeded
        if n_b == 0:
            return
        mean_b = np.asarray(block.means)
        squares_b = np.asarray(block.sum_squares)
        total = n_a + n_b
        delta = mean_b - self._pooled_mean
        self._pooled_mean = self._pooled_mean + delta * (n_b / total)
        self._pooled_sum_squares = (self._pooled_sum_squares + squares_b
                                    + delta**2 * (n_a * n_b / total))
        self.succeeded = total

    def _merge_sample(self, block: BlockResult) -> None:
        parts: tuple[np.ndarray, ...] = (block.sample_keys, block.sample_indices,
                                         block.sample_inputs, block.sample_outputs)
        if self._sample is not None:
            parts = tuple(np.concatenate((old, new)) for old, new in zip(self._sample, parts,
                                                                          strict=True))
        keys = parts[0]
        size = self.spec.reservoir_size
        if keys.size > size:
            keep = np.argpartition(keys, size - 1)[:size]
            keep = keep[np.argsort(parts[1][keep])]
            parts = tuple(part[keep] for part in parts)
        self._sample = parts

    @property
    def standard_uncertainty(self) -> np.ndarray:
        """From all successful trials so far (JCGM 101 §7.9.4 i), §7.6 eq. 23)."""
        if self.succeeded < 2:
            return np.full(len(self.names), np.nan)
        return np.sqrt(self._pooled_sum_squares / (self.succeeded - 1))

    def tolerances(self) -> np.ndarray:
        digits = self.spec.significant_digits
        return np.array([numerical_tolerance(u, digits) for u in self.standard_uncertainty])

    def twice_sd(self) -> dict[str, np.ndarray]:
        """``2 s`` of each figure of §7.9.4 k), per output (NaN before the second block)."""
        if self.blocks < 2:
            return {name: np.full(len(self.names), np.nan) for name in self._STOPPING}
        return {name: 2.0 * self._figures[name].standard_deviation_of_mean()
                for name in self._STOPPING}

    _STOPPING = ("estimate", "standard_uncertainty", "low", "high")

    def _stable(self) -> bool:
        delta = self.tolerances()
        return all(bool(np.all(twice <= delta)) for twice in self.twice_sd().values())

    def result(self, stop_reason: str | None = None) -> MonteCarloResult:
        if stop_reason is None:
            stop_reason = ("tolerance_met" if self.converged else "all_trials_failed"
                           if self._all_failed else "max_trials"
                           if self.blocks >= self.spec.max_blocks else "more_blocks_needed")
        u = self.standard_uncertainty
        delta = self.tolerances()
        twice = self.twice_sd()
        has_values = self.succeeded >= 1
        quantities = {}
        for j, name in enumerate(self.names):
            quantities[name] = QuantitySummary(
                mean=_none_if_nan(float(self._pooled_mean[j])) if has_values else None,
                standard_uncertainty=_none_if_nan(float(u[j])),
                interval=(_none_if_nan(float(self._figures["low"].mean[j])),
                          _none_if_nan(float(self._figures["high"].mean[j]))),
                coverage=self.spec.coverage,
                median=_none_if_nan(float(self._figures["median"].mean[j])),
                numerical_tolerance=_none_if_nan(float(delta[j])),
                twice_sd={key: _none_if_nan(float(values[j])) for key, values in twice.items()},
            )
        return MonteCarloResult(
            fields=self.spec.fields, names=self.names, trials=self.trials,
            failed_trials=self.trials - self.succeeded, seed=self.spec.seed,
            sampler=self.spec.sampler, block_size=self.spec.trials_per_block,
            blocks=self.blocks, coverage=self.spec.coverage,
            significant_digits=self.spec.significant_digits, converged=self.converged,
            stop_reason=stop_reason, quantities=quantities,
            requirements=tuple(self._requirement_summaries()),
            median_trial=self._median_trial(u), sample=self._sample_records(),
            failed_examples=tuple(self._failed_examples),
            truncated_inputs=tuple(d.field for d in self.spec.inputs if d.truncated),
        )

    def _requirement_summaries(self) -> list[RequirementSummary]:
        n = self.succeeded
        summaries = []
        for i, bound in enumerate(self.requirements):
            p = self._met[i] / n if n else None
            se = proportion_standard_error(p, n) if p is not None else None
            zero_event = None
            if p is not None and p in (0.0, 1.0):
                level = (1.0 - ZERO_EVENT_CONFIDENCE) ** (1.0 / n)
                zero_event = level if p == 1.0 else 1.0 - level
            summaries.append(RequirementSummary(
                id=bound.id, output_index=bound.output_index, low=bound.low, high=bound.high,
                probability_met=p, standard_error=se, successful_trials=n,
                zero_event_bound=zero_event, worst=self._worst[i]))
        return summaries

    def _sample_records(self) -> tuple[TrialRecord, ...]:
        if self._sample is None:
            return ()
        _, indices, inputs, outputs = self._sample
        return tuple(_trial(int(i), x, y) for i, x, y in zip(indices, inputs, outputs,
                                                              strict=True))

    def _median_trial(self, u: np.ndarray) -> TrialRecord | None:
        """The sampled successful trial nearest the medians, each output scaled by its u."""
        if self._sample is None:
            return None
        _, indices, inputs, outputs = self._sample
        ok = np.all(np.isfinite(outputs), axis=1)
        if not ok.any():
            return None
        medians = self._figures["median"].mean
        scale = np.where(np.isfinite(u) & (u > 0.0), u, 1.0)
        distance = np.sum(((outputs[ok] - medians) / scale) ** 2, axis=1)
        at = int(np.flatnonzero(ok)[int(np.argmin(distance))])
        return _trial(int(indices[at]), inputs[at], outputs[at])


def propagate(spec: UncertaintySpec, model: Model, names: Sequence[str],
              requirements: Sequence[Bound] = (), *,
              run_block: Callable[[int], BlockResult] | None = None,
              on_progress: Callable[[int, int], None] | None = None) -> MonteCarloResult:
    """Run blocks 0, 1, 2, ... until JCGM 101 §7.9.4's stability holds or ``max_trials``.

    ``names``: the m output names (the model's columns). ``requirements``: bounds on outputs.
    ``run_block(block_index)`` replaces the in-process block (it must equal
    ``compute_block(spec, model, requirements, block_index)``); ``on_progress(trials, blocks)`` is
    called after each block.
    """
    names = tuple(names)
    accumulator = MonteCarloAccumulator(spec, names, tuple(Bound(*r) for r in requirements))
    bounds = accumulator.requirements
    compute = run_block if run_block is not None else (
        lambda index: compute_block(spec, model, bounds, index, len(names)))
    while not accumulator.done:
        accumulator.add(compute(accumulator.blocks))
        if on_progress is not None:
            on_progress(accumulator.trials, accumulator.blocks)
    return accumulator.result()


def merge_blocks(spec: UncertaintySpec, names: Sequence[str], requirements: Sequence[Bound],
                 blocks: Sequence[BlockResult]) -> MonteCarloResult:
    """The result the blocks give, taken in block order up to where the procedure stops.

    Blocks beyond the stopping point are ignored (as a sequential run would never have made
    them); if the blocks run out, or one is missing, first, ``stop_reason`` is
    ``"more_blocks_needed"`` (the next block needed is ``result.blocks``).
    """
    accumulator = MonteCarloAccumulator(spec, tuple(names),
                                        tuple(Bound(*r) for r in requirements))
    for block in sorted(blocks, key=lambda b: b.block_index):
        if accumulator.done or block.block_index > accumulator.blocks:
            break  # stopped, or a gap: the blocks after it wait for the missing one
        accumulator.add(block)
    return accumulator.result()
