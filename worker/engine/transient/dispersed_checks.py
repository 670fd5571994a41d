"""The checks of a release from a layer loaded above its solubility against the closed forms
of :mod:`worker.engine.transient.dispersed_exact`, each added only inside its range of validity:

* ``cross_check.dispersed_similarity``: a route's release and front against Paul & McSpadden's
  exact similarity solution (J. Membr. Sci. 1 (1976) 33), while it is exact;
* ``cross_check.pseudo_steady``: against the pseudo-steady forms (Higuchi 1961 plane, Baker &
  Lonsdale 1974 sphere, the cylinder's), counting only the differences beyond the form's own
  error bound in Cs/A (see ``dispersed_exact``).

Each check's value is the worst over the compared requested times of the larger of the release
error ``|M - M_ref| / max(|M_ref|, CROSS_CHECK_FLOOR * load)`` and the front error
``|r - r_ref| / thickness`` (less the route's own front band where one is given, at most half
the allowance, as for the profile bands of ``compare``). A front the form places but the route
does not report fails. Where a loaded layer's case is outside a form's range the check is not
added and ``warnings`` says why.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from worker.engine.limits import check_limit
from worker.engine.model import Problem
from worker.engine.outcome import Outcome
from worker.engine.transient import dispersed_exact
from worker.engine.transient.dispersed_exact import DispersedReference, Scope
from worker.engine.transient.scales import CROSS_CHECK_FLOOR

__all__ = ["add_dispersed_checks", "compare_with_reference"]

ArrayLike = Sequence[float | None] | np.ndarray


def _series(values: ArrayLike | None, size: int, field: str) -> np.ndarray | None:
    if values is None:
        return None
    array = np.array([math.nan if v is None else v for v in values], dtype=float)
    if array.shape != (size,):
        raise ValueError(f"{field}: expected one value per requested time ({size}), got shape "
                         f"{array.shape}")
    return array


def add_dispersed_checks(outcome: Outcome, problem: Problem, times: ArrayLike,
                         released_per_measure: ArrayLike,
                         front_positions: ArrayLike | None = None,
                         front_positions_inner: ArrayLike | None = None,
                         front_uncertainty: ArrayLike | None = None) -> None:
    """Add ``cross_check.dispersed_similarity`` and ``cross_check.pseudo_steady`` to
    ``outcome`` where their closed forms cover ``problem``; nothing for a case with no layer
    loaded above its solubility.

    ``times``: the requested times (s); ``released_per_measure``: the route's cumulative
    release through both faces at those times (per m^2 slab, per m cylinder, total sphere);
    ``front_positions`` / ``front_positions_inner``: its ``series.front_position`` and
    ``series.front_position_inner`` values for the layer (m; None or NaN where it has none);
    ``front_uncertainty``: its absolute front band (m) at each time, if it has one.
    """
    t = np.asarray(times, dtype=float)
    if t.ndim != 1:
        raise ValueError("times: expected a one-dimensional sequence of times in s")
    released = _series(released_per_measure, t.size, "released_per_measure")
    assert released is not None
    fronts = (_series(front_positions, t.size, "front_positions"),
              _series(front_positions_inner, t.size, "front_positions_inner"))
    band = _series(front_uncertainty, t.size, "front_uncertainty")
    if not any(layer.is_loaded_above_solubility for layer in problem.layers):
        return
    for name, scope_of, reference_of in (
            ("cross_check.dispersed_similarity", dispersed_exact.similarity_scope,
             dispersed_exact.similarity_reference),
            ("cross_check.pseudo_steady", dispersed_exact.pseudo_steady_scope,
             dispersed_exact.pseudo_steady_reference)):
        scope: Scope = scope_of(problem)
        if not scope.applies:
            outcome.warnings.append(f"{name}: not checked: {scope.reason}")
            continue
        reference = reference_of(problem, t)
        if not np.any(reference.compared):
            outcome.warnings.append(
                f"{name}: not checked: no requested time inside its range ({scope.reason})")
            continue
        compare_with_reference(outcome, problem, name, reference, t, released, fronts, band,
                               scope)


def compare_with_reference(outcome: Outcome, problem: Problem, name: str,
                           reference: DispersedReference, times: np.ndarray,
                           released: np.ndarray,
                           fronts: tuple[np.ndarray | None, np.ndarray | None],
                           band: np.ndarray | None, scope: Scope) -> None:
    """Add check ``name``: the route's ``released`` and ``fronts`` (outer-edge series, inner-edge
    series) against ``reference`` at its compared times (see the module notes)."""
    limit = check_limit(problem, name)
    thickness = problem.total_thickness
    compared = reference.compared
    floor = CROSS_CHECK_FLOOR * reference.load
    release_error = np.abs(released - reference.released) / np.maximum(
        np.abs(reference.released), floor)
    release_excess = np.maximum(release_error - reference.release_bound, 0.0)
    release_excess = np.where(np.isfinite(release_excess), release_excess, math.inf)
    cap = 0.5 * limit * thickness
    own_band = np.zeros(times.size) if band is None else np.minimum(np.nan_to_num(band), cap)
    front_excess = np.zeros(times.size)
    notes = []
    expected_fronts = (("front", reference.front), ("inner front", reference.front_inner))
    for (label, expected), route in zip(expected_fronts, fronts, strict=True):
        if expected is None:
            continue
        if route is None:
            notes.append(f"the {label} was not supplied and is not compared")
            continue
        gap = np.maximum(np.abs(route - expected) - own_band, 0.0) / thickness
        excess = np.maximum(gap - reference.front_bound, 0.0)
        front_excess = np.maximum(front_excess, np.where(np.isfinite(excess), excess, math.inf))
    total = np.where(compared, np.maximum(release_excess, front_excess), -math.inf)
    k = int(np.argmax(total))
    value = float(total[k])
    passed = math.isfinite(value) and value <= limit
    bound = ""
    if np.any(reference.release_bound[compared] > 0.0):
        bound = (f"; differences within the form's own error bound (release "
                 f"{float(np.max(reference.release_bound[compared])):.3g} relative, front "
                 f"{float(np.max(reference.front_bound[compared])):.3g} of the thickness) "
                 f"are not counted")
    worst_release = float(np.max(np.where(compared, release_excess, -math.inf)))
    worst_front = float(np.max(np.where(compared, front_excess, -math.inf)))
    detail = (f"release per measure and front position against {reference.source}, at "
              f"{int(np.sum(compared))} requested times ({scope.reason}); worst at "
              f"t = {times[k]:.6g} s: release {released[k]:.9g} vs {reference.released[k]:.9g}, "
              f"front {_front_text(fronts, reference, k)}; worst release error "
              f"{worst_release:.3g} (relative, absolute below {CROSS_CHECK_FLOOR:g} of the load), "
              f"worst front error {worst_front:.3g} of the thickness{bound}"
              + "".join(f"; {note}" for note in notes))
    outcome.add_check(name, value if math.isfinite(value) else None, limit, bool(passed),
                      detail)


def _front_text(fronts: tuple[np.ndarray | None, np.ndarray | None],
                reference: DispersedReference, k: int) -> str:
    route = fronts[0]
    shown = "none supplied" if route is None else f"{route[k]:.9g} m"
    return f"{shown} vs {reference.front[k]:.9g} m"
