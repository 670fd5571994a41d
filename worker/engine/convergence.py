"""Three-grid discretisation-error study: apparent order, Richardson extrapolation and GCI.

Follows the procedure of I.B. Celik, U. Ghia, P.J. Roache, C.J. Freitas, H. Coleman,
P.E. Raad, "Procedure for estimation and reporting of uncertainty due to discretization in CFD
applications", J. Fluids Eng. 130 (2008) 078001, eqs. (1)-(10), with the Grid Convergence
Index of P.J. Roache, "Perspective: a method for uniform reporting of grid refinement studies",
J. Fluids Eng. 116 (1994) 405-413 (safety factor 1.25 for three-grid studies).

Grid 1 is the finest. With representative cell sizes h1 < h2 < h3, ratios r21 = h2/h1 and
r32 = h3/h2, and differences eps21 = phi2 - phi1, eps32 = phi3 - phi2:

    p = |ln|eps32/eps21| + q(p)| / ln r21,  q(p) = ln((r21^p - s)/(r32^p - s)),
    s = sign(eps32/eps21)                                              (Celik eqs. 3a-3c)
    phi_ext21 = (r21^p phi1 - phi2)/(r21^p - 1)                          (eq. 4)
    e_a21 = |(phi1 - phi2)/phi1|,  e_ext21 = |(phi_ext21 - phi1)/phi_ext21|   (eqs. 5a-5b)
    GCI_fine21 = 1.25 e_a21/(r21^p - 1)                                  (eq. 5c)

Departures handled and reported rather than raised: differences at round-off (the solution
does not change with the grid: converged, GCI bounded by the round-off), one difference zero
(degenerate: no order can be formed), oscillatory convergence (s < 0, flagged as Celik
recommends), differences that grow under refinement (divergent) and a fixed-point iteration
that does not settle.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from worker.engine.fv_mesh import default_cells_per_layer
from worker.engine.fv_steady import solve_fv_grids
from worker.engine.model import Problem, SteadySolution

#: Roache's safety factor for three-grid studies (Celik et al. 2008, eq. 5c).
SAFETY_FACTOR = 1.25
#: Differences below this fraction of |phi1| count as round-off: the grids agree to within the
#: arithmetic. Face fluxes of a case the scheme reproduces exactly (a reaction-free slab) scatter
#: by up to about 5e-10 relative on meshes of 4000-16000 cells (measured), so the band is 1e-8.
ROUNDOFF_RTOL = 1e-8
#: Fixed-point iteration for p (non-constant ratios): tolerance on p and iteration cap.
ORDER_TOLERANCE = 1e-10
ORDER_MAX_ITERATIONS = 200
#: Refinement ratio between successive meshes of ``run_grid_study``.
REFINEMENT_RATIO = 2
#: Quantities that ``run_grid_study`` studies by default.
STUDIED_QUANTITIES = ("flux_inner", "flux_outer", "consumption")

CONVERGENCE_KINDS = (
    "monotonic",
    "oscillatory",
    "converged_to_roundoff",
    "degenerate",
    "divergent",
    "order_not_found",
)

__all__ = [
    "CONVERGENCE_KINDS",
    "ORDER_MAX_ITERATIONS",
    "ORDER_TOLERANCE",
    "REFINEMENT_RATIO",
    "ROUNDOFF_RTOL",
    "SAFETY_FACTOR",
    "STUDIED_QUANTITIES",
    "GridStudy",
    "extrapolated_or_fine",
    "fallback_gci",
    "gci_or_fallback",
    "grid_study",
    "refined_solutions",
    "run_grid_study",
]


#: Lowest apparent order at which a transient amount is Richardson-extrapolated
#: (:attr:`GridStudy.best_estimate`).
MIN_EXTRAPOLATION_ORDER = 0.5


@dataclass(frozen=True)
class GridStudy:
    """Result of one three-grid study (grid 1 finest).

    Attributes
    ----------
    values : tuple of float
        (phi1, phi2, phi3), fine to coarse.
    ratio_21, ratio_32 : float
        Refinement ratios h2/h1 and h3/h2.
    apparent_order : float
        p (NaN where none can be formed).
    extrapolated : float
        phi_ext^21 (NaN where not available).
    approximate_relative_error : float
        e_a^21 = |(phi1 - phi2)/phi1|.
    extrapolated_relative_error : float
        e_ext^21 (NaN where not available).
    gci_fine : float
        GCI_fine^21 as a fraction (0.022 = 2.2 %); NaN where no order could be formed.
    convergence : str
        One of ``CONVERGENCE_KINDS``.
    message : str
        What was found, in words.
    """

    values: tuple[float, float, float]
    ratio_21: float
    ratio_32: float
    apparent_order: float
    extrapolated: float
    approximate_relative_error: float
    extrapolated_relative_error: float
    gci_fine: float
    convergence: str
    message: str
    iterations: int = 0

    @property
    def fine(self) -> float:
        return self.values[0]

    @property
    def best_estimate(self) -> float:
        """The Richardson-extrapolated value where the grids converge monotonically at an
        apparent order of at least ``MIN_EXTRAPOLATION_ORDER``, else the fine value. Below
        that order r^p - 1 is small and the extrapolation multiplies the fine-grid difference
        many times over (a front crossing cells makes such orders): the grids are not in their
        asymptotic range (Celik et al., J. Fluids Eng. 130 (2008) 078001, on apparent orders far
        from the formal one), and the fine value is the safer estimate."""
        if (self.convergence == "monotonic" and math.isfinite(self.extrapolated)
                and self.apparent_order >= MIN_EXTRAPOLATION_ORDER):
            return self.extrapolated
        return self.fine

    @property
    def reliable(self) -> bool:
        """True when the study gives a usable error band (monotonic or round-off)."""
        return self.convergence in ("monotonic", "converged_to_roundoff")

    def as_dict(self) -> dict:
        return {
            "values": list(self.values),
            "ratio_21": self.ratio_21,
            "ratio_32": self.ratio_32,
            "apparent_order": self.apparent_order,
            "extrapolated": self.extrapolated,
            "approximate_relative_error": self.approximate_relative_error,
            "extrapolated_relative_error": self.extrapolated_relative_error,
            "gci_fine": self.gci_fine,
            "convergence": self.convergence,
            "message": self.message,
        }


def _ratios(
    cells: Sequence[float] | None, ratios: Sequence[float] | None, dimension: int
) -> tuple[float, float]:
    if (cells is None) == (ratios is None):
        raise ValueError("grid_study: give exactly one of cells (N1, N2, N3) or ratios (r21, r32)")
    if ratios is not None:
        r21, r32 = (float(x) for x in ratios)
    elif cells is not None:
        if len(cells) != 3:
            raise ValueError(f"cells: expected three cell counts (fine to coarse), got {cells!r}")
        n1, n2, n3 = (float(x) for x in cells)
        if min(n1, n2, n3) <= 0:
            raise ValueError(f"cells: expected positive cell counts, got {cells!r}")
        r21 = (n1 / n2) ** (1.0 / dimension)
        r32 = (n2 / n3) ** (1.0 / dimension)
    if not (r21 > 1.0 and r32 > 1.0):
        raise ValueError(
            f"refinement ratios: expected r21 > 1 and r32 > 1 (grid 1 finest), got "
            f"r21={r21:.6g}, r32={r32:.6g}"
        )
    return r21, r32


def _order(r21: float, r32: float, ratio: float, sign: float) -> tuple[float, int, bool]:
    """Fixed-point iteration of Celik eq. (3) for p; returns (p, iterations, settled)."""
    log_ratio = math.log(abs(ratio))
    p = abs(log_ratio) / math.log(r21)
    if r21 == r32:
        return p, 0, True
    for iteration in range(1, ORDER_MAX_ITERATIONS + 1):
        numerator = r21**p - sign
        denominator = r32**p - sign
        if numerator <= 0.0 or denominator <= 0.0:
            return p, iteration, False
        p_new = abs(log_ratio + math.log(numerator / denominator)) / math.log(r21)
        if abs(p_new - p) <= ORDER_TOLERANCE * max(1.0, abs(p_new)):
            return p_new, iteration, True
        p = p_new
    return p, ORDER_MAX_ITERATIONS, False


def grid_study(
    values_fine_medium_coarse: Iterable[float],
    cells: Sequence[float] | None = None,
    *,
    ratios: Sequence[float] | None = None,
    dimension: int = 1,
    roundoff_rtol: float = ROUNDOFF_RTOL,
) -> GridStudy:
    """Three-grid study of one quantity by Celik et al. (2008).

    Parameters
    ----------
    values_fine_medium_coarse : iterable of 3 floats
        phi1 (finest), phi2, phi3.
    cells : sequence of 3 numbers, optional
        Cell counts N1 > N2 > N3; ratios then are (N1/N2)^(1/dimension), (N2/N3)^(1/dimension).
    ratios : (r21, r32), optional
        Refinement ratios h2/h1 and h3/h2 instead of ``cells``.
    dimension : int
        Space dimension of the grids (1 for the engine's meshes).
    roundoff_rtol : float
        Differences at or below ``roundoff_rtol * |phi1|`` count as round-off.

    Returns
    -------
    GridStudy
    """
    phi = tuple(float(v) for v in values_fine_medium_coarse)
    if len(phi) != 3:
        raise ValueError(f"values_fine_medium_coarse: expected three values, got {len(phi)}")
    r21, r32 = _ratios(cells, ratios, dimension)
    nan = float("nan")
    if not all(math.isfinite(v) for v in phi):
        return GridStudy(phi, r21, r32, nan, nan, nan, nan, nan, "degenerate",
                         "a grid value is not finite")
    phi1, phi2, phi3 = phi
    eps21 = phi2 - phi1
    eps32 = phi3 - phi2
    magnitude = max(abs(phi1), abs(phi2), abs(phi3))
    e_a = abs(eps21 / phi1) if phi1 != 0.0 else (0.0 if eps21 == 0.0 else math.inf)
    band = roundoff_rtol * magnitude
    if abs(eps21) <= band and abs(eps32) <= band:
        bound = (max(abs(eps21), abs(eps32)) / abs(phi1)) if phi1 != 0.0 else 0.0
        return GridStudy(
            phi, r21, r32, nan, phi1, e_a, 0.0, SAFETY_FACTOR * bound, "converged_to_roundoff",
            "the three grids agree to round-off; GCI is bounded by the round-off differences",
        )
    if eps21 == 0.0 or eps32 == 0.0:
        return GridStudy(
            phi, r21, r32, nan, nan, e_a, nan, nan, "degenerate",
            "one grid difference is exactly zero: no apparent order can be formed",
        )
    ratio = eps32 / eps21
    sign = 1.0 if ratio > 0.0 else -1.0
    # For error ~ h^p with p > 0, eps32/eps21 = r21^p (r32^p - 1)/(r21^p - 1), which exceeds
    # its p -> 0 limit ln r32 / ln r21; at or below it the differences are not shrinking.
    # (with s = -1 the same expression with +1 in place of -1 tends to 1 as p -> 0)
    limit = math.log(r32) / math.log(r21) if sign > 0.0 else 1.0
    if abs(ratio) <= limit:
        return GridStudy(
            phi, r21, r32, nan, nan, e_a, nan, nan, "divergent",
            "grid differences do not shrink under refinement: the quantity is not converging",
        )
    p, iterations, settled = _order(r21, r32, ratio, sign)
    if not settled or not math.isfinite(p) or p <= 0.0:
        return GridStudy(
            phi, r21, r32, nan, nan, e_a, nan, nan, "order_not_found",
            "the fixed-point iteration for the apparent order did not settle",
            iterations,
        )
    factor = r21**p - 1.0
    extrapolated = (r21**p * phi1 - phi2) / factor
    e_ext = abs((extrapolated - phi1) / extrapolated) if extrapolated != 0.0 else math.inf
    gci = SAFETY_FACTOR * e_a / factor
    if sign < 0.0:
        kind = "oscillatory"
        message = "oscillatory convergence (eps32/eps21 < 0): the error band is indicative only"
    else:
        kind = "monotonic"
        message = f"monotonic convergence, apparent order {p:.3g}"
    return GridStudy(phi, r21, r32, p, extrapolated, e_a, e_ext, gci, kind, message, iterations)


def fallback_gci(study: GridStudy, formal_order: float, safety: float) -> float:
    """GCI of the fine grid from the formal order instead of an observed one: ``safety`` times
    the approximate relative error over r21^p - 1 with p = ``formal_order`` (P.J. Roache,
    J. Fluids Eng. 116 (1994) 405: safety factor 3 for a study without an observed order)."""
    return safety * study.approximate_relative_error / (study.ratio_21**formal_order - 1.0)


def gci_or_fallback(study: GridStudy, formal_order: float, safety: float) -> float:
    """GCI_fine as a fraction of the fine value where the study formed one, else
    :func:`fallback_gci`; 0 where the grids agree to round-off."""
    if study.convergence == "converged_to_roundoff":
        return 0.0
    if math.isfinite(study.gci_fine):
        return float(study.gci_fine)
    return fallback_gci(study, formal_order, safety)


def extrapolated_or_fine(values: np.ndarray, ratio: float,
                         roundoff_rtol: float = ROUNDOFF_RTOL) -> np.ndarray:
    """The best estimate of many three-grid studies with one constant refinement ratio: the
    Richardson-extrapolated value where :func:`grid_study` finds monotonic convergence, else
    the fine-grid value (what ``steady_check`` reports of a study).

    ``values`` has shape (n, 3), fine, medium, coarse in each row; ``ratio`` is r21 = r32 > 1.
    With equal ratios Celik's eq. (3) needs no fixed-point iteration: p = |ln|eps32/eps21|| /
    ln r. The branches are :func:`grid_study`'s, row by row: a non-finite value, differences at
    round-off, a difference exactly zero, a sign change (oscillatory) or differences that do
    not shrink (|eps32/eps21| <= 1) all give the fine value; a non-finite extrapolation too.
    """
    values = np.asarray(values, dtype=float)
    phi1, phi2, phi3 = values[:, 0], values[:, 1], values[:, 2]
    with np.errstate(all="ignore"):
        eps21, eps32 = phi2 - phi1, phi3 - phi2
        band = roundoff_rtol * np.max(np.abs(values), axis=1)
        roundoff = (np.abs(eps21) <= band) & (np.abs(eps32) <= band)
        ratio_32_21 = eps32 / eps21
        monotonic = (np.all(np.isfinite(values), axis=1) & ~roundoff & (eps21 != 0.0)
                     & (eps32 != 0.0) & (ratio_32_21 > 1.0))
        p = np.abs(np.log(np.abs(ratio_32_21))) / math.log(ratio)
        factor = ratio**p
        extrapolated = (factor * phi1 - phi2) / (factor - 1.0)
    usable = monotonic & np.isfinite(p) & (p > 0.0) & np.isfinite(extrapolated)
    return np.where(usable, extrapolated, phi1)


def refined_solutions(
    problem: Problem,
    base_cells: Sequence[int] | int | None = None,
    ratio: int = REFINEMENT_RATIO,
) -> list[SteadySolution]:
    """``solve_fv`` on three meshes (``solve_fv_grids``: linear cases in one stacked solve),
    returned fine, medium, coarse.

    ``base_cells`` is the coarse mesh (cells per layer; default the mesh rule of ``fv_mesh``);
    the medium and fine meshes have ``ratio`` and ``ratio**2`` times as many cells per layer.
    """
    if base_cells is None:
        base_cells = default_cells_per_layer(problem)
    if isinstance(base_cells, int | np.integer):
        base = (int(base_cells),) * len(problem.layers)
    else:
        base = tuple(int(n) for n in base_cells)
    return solve_fv_grids(problem, [tuple(n * ratio**k for n in base) for k in (2, 1, 0)])


def run_grid_study(
    problem: Problem,
    base_cells: Sequence[int] | int | None = None,
    *,
    quantities: Sequence[str] = STUDIED_QUANTITIES,
    solutions: Sequence[SteadySolution] | None = None,
) -> dict[str, GridStudy]:
    """Three-grid study of the finite-volume solution of a steady case.

    Parameters
    ----------
    problem : Problem
    base_cells : int or sequence of int, optional
        Coarse mesh, cells per layer (see ``refined_solutions``).
    quantities : sequence of str
        ``SteadySolution`` attributes to study (``flux_inner``, ``flux_outer``,
        ``consumption``, ``depletion_front``).
    solutions : sequence of 3 SteadySolution, optional
        Already computed fine, medium and coarse solutions (from ``refined_solutions``), so
        the caller can report the fine one without solving twice.

    Returns
    -------
    dict of str to GridStudy
        The fine-mesh value is ``study.fine``. A quantity missing on a mesh (e.g. no front)
        or a failed solve gives a ``degenerate`` study saying so.
    """
    if solutions is None:
        solutions = refined_solutions(problem, base_cells)
    if len(solutions) != 3:
        raise ValueError(f"solutions: expected three (fine, medium, coarse), got {len(solutions)}")
    cells = [s.diagnostics["cells"] for s in solutions]
    studies: dict[str, GridStudy] = {}
    failed = [i for i, s in enumerate(solutions) if not s.success]
    for name in quantities:
        values = [getattr(s, name) for s in solutions]
        if failed or any(v is None for v in values):
            reason = (
                f"solve failed on mesh(es) {failed}: {solutions[failed[0]].message}"
                if failed
                else f"{name} is not available on every mesh"
            )
            nan = float("nan")
            r21, r32 = _ratios(cells, None, 1)
            fine, medium, coarse = (nan if v is None else float(v) for v in values)
            studies[name] = GridStudy(
                (fine, medium, coarse),
                r21, r32, nan, nan, nan, nan, nan, "degenerate", reason,
            )
            continue
        studies[name] = grid_study(values, cells)
    return studies
