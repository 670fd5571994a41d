"""Which uncertain inputs matter: local elasticities and global Sobol indices.

- Elasticity ``(dy/dx)(x/y)`` at the nominal inputs, by central differences on the model with a
  relative step ``h`` (``x (1 +- h)``). The central difference's truncation error is
  ``O(h^2)`` and its rounding error ``O(eps_model / h)``; the best ``h`` is about
  ``eps_model^(1/3)`` (Nocedal & Wright 2006, *Numerical Optimization*, 2nd ed., §8.1, eq. 8.9),
  so the default ``h = 1e-3`` suits a model whose outputs carry a relative numerical error near
  ``1e-9`` (an iterative solver), not only machine precision.
- First-order and total Sobol indices (Sobol' 1993, *Math. Model. Comput. Exp.* 1, 407) by the
  estimators Saltelli et al. 2010 (*Comput. Phys. Commun.* 181, 259) recommend: with base
  matrices A and B (N points each, from one scrambled Sobol sequence of 2k dimensions, their
  §5) and A_B^(i) (A with column i from B),
  ``V_i = mean(f(B) (f(A_B^i) - f(A)))`` (their Table 2, (b)) and
  ``V_Ti = mean((f(A) - f(A_B^i))^2) / 2`` (Table 2, (f): Jansen 1999, *Comput. Phys. Commun.*
  117, 35), each divided by the variance of f over A and B together; outputs are first centred
  on their mean (Sobol' & Levitan 1999, *Comput. Phys. Commun.* 117, 52). The inputs are
  sampled *independently* from the marginals; when the spec has correlations the indices are
  those of independent inputs and the result says so (Sobol indices assume independence).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.stats import qmc

from worker.engine.design.monte_carlo import evaluate
from worker.engine.design.sampling import (
    STREAM_SENSITIVITY,
    UncertaintySpec,
    block_seed,
)

Model = Callable[[np.ndarray], np.ndarray]

DEFAULT_RELATIVE_STEP = 1e-3
DEFAULT_BASE_POINTS = 1024


def local_elasticities(model: Model, nominal: Sequence[float], outputs: int | None = None, *,
                       relative_step: float = DEFAULT_RELATIVE_STEP
                       ) -> tuple[np.ndarray, int]:
    """Elasticities (m, k) at ``nominal`` by central differences; NaN where undefined
    (input or output zero at nominal, or a failed evaluation). Returns (elasticities, calls
    of the model's rows)."""
    if not 0.0 < relative_step < 0.5:
        raise ValueError(f"relative_step: expected a value in (0, 0.5), got {relative_step}")
    x0 = np.asarray(nominal, dtype=float)
    k = x0.size
    rows = np.tile(x0, (2 * k + 1, 1))
    steps = relative_step * x0
    for j in range(k):
        rows[1 + 2 * j, j] += steps[j]
        rows[2 + 2 * j, j] -= steps[j]
    y = evaluate(model, rows, outputs)
    y0 = y[0]
    result = np.full((y.shape[1], k), np.nan)
    for j in range(k):
        if steps[j] == 0.0:
            continue
        # actual spacing of the perturbed points (x0 +- step is rounded)
        spacing = rows[1 + 2 * j, j] - rows[2 + 2 * j, j]
        slope = (y[1 + 2 * j] - y[2 + 2 * j]) / spacing
        with np.errstate(divide="ignore", invalid="ignore"):
            result[:, j] = np.where(y0 != 0.0, slope * x0[j] / y0, np.nan)
    return result, rows.shape[0]


def base_matrices(distributions: Sequence[Any], base_points: int,
                  rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """A and B (N, k): the two halves of one scrambled Sobol sequence in 2k dimensions
    (Saltelli et al. 2010, §5), mapped through each marginal's inverse distribution."""
    k = len(distributions)
    points = qmc.Sobol(d=2 * k, scramble=True, bits=64, rng=rng).random(base_points)
    a, b = points[:, :k].copy(), points[:, k:].copy()
    for j, distribution in enumerate(distributions):
        a[:, j] = distribution.ppf(a[:, j])
        b[:, j] = distribution.ppf(b[:, j])
    return a, b


def saltelli_indices(f_a: np.ndarray, f_b: np.ndarray, f_ab: np.ndarray
                     ) -> tuple[np.ndarray, np.ndarray]:
    """First-order and total indices (m, k) from f(A), f(B) (N, m) and f(A_B^i) (k, N, m).

    Saltelli et al. 2010, Table 2 (b) and (f); zero-variance outputs get NaN.
    """
    centre = np.mean(np.concatenate((f_a, f_b)), axis=0)
    f_a, f_b, f_ab = f_a - centre, f_b - centre, f_ab - centre
    variance = np.var(np.concatenate((f_a, f_b)), axis=0)
    first = np.mean(f_b * (f_ab - f_a), axis=1)          # (k, m)
    total = 0.5 * np.mean((f_a - f_ab) ** 2, axis=1)     # (k, m)
    with np.errstate(divide="ignore", invalid="ignore"):
        scaled = variance > 0.0
        first = np.where(scaled, first / variance, np.nan)
        total = np.where(scaled, total / variance, np.nan)
    return first.T, total.T


@dataclass(frozen=True)
class SobolEstimate:
    first: np.ndarray          # (m, k)
    total: np.ndarray          # (m, k)
    base_points: int           # N used (rows where every evaluation succeeded)
    failed_points: int         # base points dropped because an evaluation failed
    evaluations: int           # model rows evaluated: N (k + 2)


def sobol_indices(model: Model, distributions: Sequence[Any], base_points: int,
                  rng: np.random.Generator, outputs: int | None = None) -> SobolEstimate:
    """Saltelli/Jansen estimates of first-order and total indices of independent inputs.

    ``distributions``: frozen ``scipy.stats`` marginals; ``base_points`` N a power of 2.
    A base point where any of its k + 2 evaluations failed (non-finite) is dropped.
    """
    if base_points < 2 or base_points & (base_points - 1):
        raise ValueError(f"base_points: expected a power of 2 (>= 2), got {base_points}")
    k = len(distributions)
    a, b = base_matrices(distributions, base_points, rng)
    mixed = np.repeat(a[None, :, :], k, axis=0)
    for i in range(k):
        mixed[i, :, i] = b[:, i]
    stacked = np.concatenate((a, b, mixed.reshape(k * base_points, k)))
    y = evaluate(model, stacked, outputs)
    n = base_points
    f_a, f_b = y[:n], y[n:2 * n]
    f_ab = y[2 * n:].reshape(k, n, -1)
    ok = (np.all(np.isfinite(f_a), axis=1) & np.all(np.isfinite(f_b), axis=1)
          & np.all(np.isfinite(f_ab), axis=(0, 2)))
    first, total = saltelli_indices(f_a[ok], f_b[ok], f_ab[:, ok])
    return SobolEstimate(first, total, int(ok.sum()), int(n - ok.sum()), stacked.shape[0])


@dataclass(frozen=True)
class SensitivityResult:
    """Per output, per field: elasticity, first-order and total index (None if undefined)."""

    indices: dict[str, dict[str, dict[str, float | None]]]
    evaluations: int
    base_points: int
    failed_points: int
    relative_step: float
    independent_inputs_assumed: bool

    def as_dict(self) -> dict[str, Any]:
        return {"indices": self.indices, "evaluations": self.evaluations,
                "base_points": self.base_points, "failed_points": self.failed_points,
                "relative_step": self.relative_step,
                "independent_inputs_assumed": self.independent_inputs_assumed}


def _value(number: float) -> float | None:
    return float(number) if math.isfinite(number) else None


def sensitivity(spec: UncertaintySpec, model: Model, names: Sequence[str], *,
                base_points: int = DEFAULT_BASE_POINTS,
                relative_step: float = DEFAULT_RELATIVE_STEP) -> SensitivityResult:
    """Elasticities at the spec's nominal values and Sobol indices on its marginals.

    The Sobol points come from the seed's own stream (``STREAM_SENSITIVITY``): same seed,
    same indices. Model evaluations: ``N (k + 2) + 2k + 1``.
    """
    names = tuple(names)
    m = len(names)
    nominal = [distribution.nominal for distribution in spec.inputs]
    elasticities, local_calls = local_elasticities(model, nominal, m,
                                                   relative_step=relative_step)
    rng = np.random.default_rng(block_seed(spec.seed, STREAM_SENSITIVITY))
    estimate = sobol_indices(model, [d.frozen() for d in spec.inputs], base_points, rng, m)
    indices = {
        name: {field: {"elasticity": _value(elasticities[i, j]),
                       "first_index": _value(estimate.first[i, j]),
                       "total_index": _value(estimate.total[i, j])}
               for j, field in enumerate(spec.fields)}
        for i, name in enumerate(names)
    }
    return SensitivityResult(indices, local_calls + estimate.evaluations,
                             estimate.base_points, estimate.failed_points, relative_step,
                             bool(spec.correlations))
