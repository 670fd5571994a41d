"""Closed forms of release from a matrix loaded above the solubility of its solute, and their
ranges of validity on a :class:`worker.engine.model.Problem`.

A layer holds solute at ``A`` per volume (dissolved and undissolved together) above the
solubility ``Cs``; the undissolved excess does not move and dissolves as soon as the dissolved
level falls below ``Cs`` (``worker.engine.model.Layer``). Released into a perfect sink, the
undissolved solute retreats behind a front; between the front and the face the dissolved
solute diffuses with diffusivity ``D``. Units: D in m^2/s, A and Cs in amount/m^3, t in s,
positions in m; released amounts per m^2 (plane), per m (cylinder), total (sphere).

* :func:`paul_mcspadden_root`, :func:`paul_mcspadden_release`, :func:`paul_mcspadden_depth`:
  the exact similarity solution of the semi-infinite plane (D.R. Paul, S.K. McSpadden,
  "Diffusional release of a solute from a polymer matrix", J. Membr. Sci. 1 (1976) 33-48).
  Its balances (derived here, see :func:`paul_mcspadden_root`): the dissolved profile behind
  the front ``s = 2 lambda sqrt(D t)`` is ``C = Cs erf(x / (2 sqrt(D t))) / erf(lambda)``;
  beyond the front nothing has changed (dissolved level Cs, uniform, no flux). The front
  balance ``D dC/dx|_s = (A - Cs) ds/dt`` gives
  ``sqrt(pi) lambda exp(lambda^2) erf(lambda) = Cs / (A - Cs)`` and the released amount per
  area is ``M = 2 Cs sqrt(D t) / (sqrt(pi) erf(lambda))``. Because the far side of the front
  is uniform and fluxless, the same solution is exact in a finite slab with a sealed far face
  until the front reaches it, and in a slab releasing from both faces until the two fronts
  meet at the mid-plane.
* :func:`higuchi_release`, :func:`higuchi_depth`: the plane pseudo-steady form
  (T. Higuchi, "Rate of release of medicaments from ointment bases containing drugs in
  suspension", J. Pharm. Sci. 50 (1961) 874-875, the release ``Q = sqrt(D t (2A - Cs) Cs)``;
  its front follows from the same balance, ``Q = (A - Cs/2) h``;
  T. Higuchi, J. Pharm. Sci. 52 (1963) 1145-1149, for granular matrices).
* :func:`baker_lonsdale_sphere_depth`: the sphere's pseudo-steady form (R.W. Baker,
  H.K. Lonsdale, "Controlled release: mechanisms and rates", in A.C. Tanquary, R.E. Lacey
  (eds.), *Controlled Release of Biologically Active Agents*, Plenum, New York, 1974,
  pp. 15-71): ``3/2 [1 - (1 - F)^(2/3)] - F = 3 D Cs t / (r0^2 A)`` with F the fraction
  released, front radius ``r0 (1 - F)^(1/3)``, depletion at ``t = r0^2 A / (6 D Cs)``.
* :func:`cylinder_pseudo_steady_depth`: the long cylinder's radial pseudo-steady form
  ``F + (1 - F) ln(1 - F) = 4 D Cs t / (r0^2 A)``, front radius ``r0 sqrt(1 - F)``, depletion
  at ``t = r0^2 A / (4 D Cs)``. Its published source could not be read for this module: the
  form is derived here from the pseudo-steady shell balance (below), the same derivation that
  gives Baker and Lonsdale's sphere form; it is the no-film limit of the cylinder treated by
  T.J. Roseman, W.I. Higuchi, "Release of medroxyprogesterone acetate from a silicone
  polymer", J. Pharm. Sci. 59 (1970) 353-357, and is listed for monolithic dispersions in
  J. Siepmann, R.A. Siegel, F. Siepmann, "Diffusion controlled drug delivery systems", ch. 6
  of *Fundamentals and Applications of Controlled Release Drug Delivery*, Springer, 2012
  (neither equation number was checked against the printed page).

Pseudo-steady derivation (cylinder n = 1, sphere n = 2; front radius r' inside radius r0):
the dissolved profile between r' (level Cs) and r0 (sink) is the steady one, carrying the rate
``2 pi D Cs / ln(r0/r')`` per length (cylinder) or ``4 pi D Cs r' r0 / (r0 - r')`` (sphere);
it is fed by the undissolved solute ``A`` swept by the front (the dissolved solute in the
depleted shell is neglected, A >> Cs). Integrating ``-A d(volume inside r')/dt = rate`` from
r' = r0 gives the two forms above, with ``F = 1 - (r'/r0)^(n+1)``.

Accuracy of the pseudo-steady forms (error order Cs/A): expanding the exact plane solution for
small ``e = Cs/(A - Cs)`` gives ``lambda^2 = e/2 (1 - e/3 + ...)``, so
``Q_Higuchi / M_exact = 1 - e/12 + O(e^2)`` and ``h_Higuchi / s_exact = 1 - e/12 + O(e^2)``;
forms that neglect the dissolved solute in the depleted zone (Baker-Lonsdale, the cylinder's)
reduce in the plane limit to ``sqrt(2 A Cs D t)``, which is ``1 + e/6 + O(e^2)`` times the exact
release. For the plane the check uses the exact difference between Higuchi and Paul-McSpadden
at the case's A/Cs. For the sphere and cylinder it allows :data:`CURVED_RELEASE_BOUND` Cs/A
relative on the release and :data:`CURVED_FRONT_BOUND` Cs/A of the radius on the front, up to
:data:`PSEUDO_STEADY_WINDOW` of the form's depletion time: three times the plane's first-order
release coefficient (1/6). A development run of an explicit enthalpy finite-volume scheme (200
cells, not part of the engine) found at most 0.18 Cs/A (release) and 0.29 Cs/A (front) for the
sphere and 0.22 Cs/A and 0.36 Cs/A for the cylinder at A/Cs = 20 and 100 up to 0.9 of the
depletion time; the front difference grows towards depletion, hence the window.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy.optimize import brentq

from worker.engine.model import Problem

#: Largest Cs/A at which the pseudo-steady forms are compared (they need A >> Cs).
PSEUDO_STEADY_MAX_RATIO = 0.1
#: Fraction of the pseudo-steady depletion time up to which the pseudo-steady forms are compared.
PSEUDO_STEADY_WINDOW = 0.9
#: Allowed relative release difference of the curved pseudo-steady forms, per unit Cs/A.
CURVED_RELEASE_BOUND = 0.5
#: Allowed front difference of the curved pseudo-steady forms, in radii per unit Cs/A.
CURVED_FRONT_BOUND = 1.0

__all__ = [
    "CURVED_FRONT_BOUND",
    "CURVED_RELEASE_BOUND",
    "PSEUDO_STEADY_MAX_RATIO",
    "PSEUDO_STEADY_WINDOW",
    "DispersedReference",
    "Scope",
    "baker_lonsdale_sphere_depth",
    "baker_lonsdale_sphere_fraction",
    "cylinder_pseudo_steady_depth",
    "cylinder_pseudo_steady_fraction",
    "higuchi_depth",
    "higuchi_release",
    "paul_mcspadden_depth",
    "paul_mcspadden_release",
    "paul_mcspadden_root",
    "pseudo_steady_applies",
    "pseudo_steady_reference",
    "pseudo_steady_scope",
    "similarity_applies",
    "similarity_reference",
    "similarity_scope",
]

PAUL_MCSPADDEN = ("D.R. Paul, S.K. McSpadden, J. Membr. Sci. 1 (1976) 33: exact similarity "
                  "solution, sqrt(pi) lambda exp(lambda^2) erf(lambda) = Cs/(A - Cs)")
HIGUCHI = "T. Higuchi, J. Pharm. Sci. 50 (1961) 874: Q = sqrt(D Cs (2A - Cs) t)"
BAKER_LONSDALE = ("R.W. Baker, H.K. Lonsdale, in Controlled Release of Biologically Active "
                  "Agents (Tanquary, Lacey eds.), Plenum 1974: 3/2[1-(1-F)^(2/3)] - F = "
                  "3 D Cs t/(r0^2 A)")
CYLINDER = ("pseudo-steady shell balance of the long cylinder (derived; the no-film limit of "
            "Roseman & Higuchi, J. Pharm. Sci. 59 (1970) 353): F + (1-F) ln(1-F) = "
            "4 D Cs t/(r0^2 A)")


def _check_loading(loading: float, solubility: float) -> None:
    if not (solubility > 0.0 and loading > solubility):
        raise ValueError(f"loading must exceed solubility > 0 (got loading {loading!r}, "
                         f"solubility {solubility!r})")


def paul_mcspadden_root(loading: float, solubility: float) -> float:
    """lambda of the front ``s = 2 lambda sqrt(D t)`` (dimensionless): the root of
    ``sqrt(pi) lambda exp(lambda^2) erf(lambda) = Cs / (A - Cs)`` (Paul & McSpadden 1976).

    Derivation of the front balance: with ``C = Cs erf(x / (2 sqrt(D t))) / erf(lambda)``,
    ``D dC/dx`` at x = s is ``Cs sqrt(D / (pi t)) exp(-lambda^2) / erf(lambda)``; the front
    sweeps undissolved solute ``A - Cs`` per volume at ``ds/dt = lambda sqrt(D / t)``. Solved in
    logarithms by Brent's method (the left side rises monotonically from 0 as 2 lambda^2).
    """
    _check_loading(loading, solubility)
    target = math.log(solubility) - math.log(loading - solubility)

    def gap(lam: float) -> float:
        return (0.5 * math.log(math.pi) + math.log(lam) + lam * lam + math.log(math.erf(lam))
                - target)

    low = 1e-150
    high = max(1.0, math.sqrt(max(target, 0.0)) + 1.0)
    return float(brentq(gap, low, high, xtol=1e-300, rtol=4.0 * np.finfo(float).eps,
                        maxiter=500))


def paul_mcspadden_depth(diffusivity: float, loading: float, solubility: float,
                         times: npt.ArrayLike) -> np.ndarray:
    """Depth of the front below the releasing face, ``2 lambda sqrt(D t)`` (m)."""
    lam = paul_mcspadden_root(loading, solubility)
    return 2.0 * lam * np.sqrt(diffusivity * np.asarray(times, dtype=float))


def paul_mcspadden_release(diffusivity: float, loading: float, solubility: float,
                           times: npt.ArrayLike) -> np.ndarray:
    """Cumulative release per area through one face,
    ``M = 2 Cs sqrt(D t) / (sqrt(pi) erf(lambda))`` (amount/m^2): the time integral of the
    face flux ``D Cs / (sqrt(pi D t) erf(lambda))``, equal to the load swept by the front less
    the dissolved solute left behind it."""
    lam = paul_mcspadden_root(loading, solubility)
    root_dt = np.sqrt(diffusivity * np.asarray(times, dtype=float))
    return 2.0 * solubility * root_dt / (math.sqrt(math.pi) * math.erf(lam))


def higuchi_release(diffusivity: float, loading: float, solubility: float,
                    times: npt.ArrayLike) -> np.ndarray:
    """Higuchi's pseudo-steady release per area, ``Q = sqrt(D Cs (2A - Cs) t)`` (amount/m^2)
    (T. Higuchi, J. Pharm. Sci. 50 (1961) 874, the equation for Q)."""
    _check_loading(loading, solubility)
    t = np.asarray(times, dtype=float)
    return np.sqrt(diffusivity * solubility * (2.0 * loading - solubility) * t)


def higuchi_depth(diffusivity: float, loading: float, solubility: float,
                  times: npt.ArrayLike) -> np.ndarray:
    """Depth h of Higuchi's front (m): the linear dissolved profile over h holds
    ``(A - Cs/2) h`` less than the load, so ``Q = (A - Cs/2) h`` and
    ``h = sqrt(2 D Cs t / (A - Cs/2))``."""
    _check_loading(loading, solubility)
    t = np.asarray(times, dtype=float)
    return np.sqrt(2.0 * diffusivity * solubility * t / (loading - 0.5 * solubility))


def _depth_fraction(balance, right: np.ndarray, full: float) -> np.ndarray:
    """Penetration depth fraction delta in [0, 1] with ``balance(delta) = right`` (balance rises
    from 0 to ``full``); NaN where ``right`` is outside [0, full]."""
    out = np.full(right.shape, np.nan)
    for index, value in np.ndenumerate(right):
        if value == 0.0:
            out[index] = 0.0
        elif value == full:
            out[index] = 1.0
        elif 0.0 < value < full:
            out[index] = brentq(lambda d, v=value: balance(d) - v, 0.0, 1.0, xtol=1e-300,
                                rtol=4.0 * np.finfo(float).eps, maxiter=500)
    return out


def baker_lonsdale_sphere_depth(diffusivity: float, loading: float, solubility: float,
                                radius: float, times: npt.ArrayLike) -> np.ndarray:
    """Front depth below the surface as a fraction of the radius, ``delta = 1 - r'/r0``, from
    Baker & Lonsdale's sphere form, written in delta (``1 - F = (1 - delta)^3``):
    ``delta^2 (3 - 2 delta) / 2 = 3 D Cs t / (r0^2 A)`` (no cancellation at small depths).
    NaN after depletion (t > r0^2 A / (6 D Cs))."""
    _check_loading(loading, solubility)
    right = 3.0 * diffusivity * solubility * np.asarray(times, dtype=float) / (
        radius * radius * loading)
    return _depth_fraction(lambda d: 0.5 * d * d * (3.0 - 2.0 * d), right, 0.5)


def baker_lonsdale_sphere_fraction(diffusivity: float, loading: float, solubility: float,
                                   radius: float, times: npt.ArrayLike) -> np.ndarray:
    """Fraction released F of Baker & Lonsdale's sphere form (NaN after depletion)."""
    delta = baker_lonsdale_sphere_depth(diffusivity, loading, solubility, radius, times)
    return 1.0 - (1.0 - delta) ** 3


def cylinder_pseudo_steady_depth(diffusivity: float, loading: float, solubility: float,
                                 radius: float, times: npt.ArrayLike) -> np.ndarray:
    """Front depth fraction ``delta = 1 - r'/r0`` of the long cylinder's pseudo-steady form
    ``F + (1 - F) ln(1 - F) = 4 D Cs t / (r0^2 A)`` written in delta (``1 - F = (1 - delta)^2``):
    ``delta (2 - delta) + 2 (1 - delta)^2 ln(1 - delta)``. NaN after depletion
    (t > r0^2 A / (4 D Cs))."""
    _check_loading(loading, solubility)
    right = 4.0 * diffusivity * solubility * np.asarray(times, dtype=float) / (
        radius * radius * loading)

    def balance(d: float) -> float:
        if d >= 1.0:
            return 1.0
        return d * (2.0 - d) + 2.0 * (1.0 - d) ** 2 * math.log1p(-d)

    return _depth_fraction(balance, right, 1.0)


def cylinder_pseudo_steady_fraction(diffusivity: float, loading: float, solubility: float,
                                    radius: float, times: npt.ArrayLike) -> np.ndarray:
    """Fraction released F of the cylinder's pseudo-steady form (NaN after depletion)."""
    delta = cylinder_pseudo_steady_depth(diffusivity, loading, solubility, radius, times)
    return 1.0 - (1.0 - delta) ** 2


# ----------------------------------------------------------------------------------------------
# Ranges of validity on a Problem


@dataclass(frozen=True)
class Scope:
    """Whether a closed form covers a case: ``applies``, ``reason`` (why not, or what is
    covered), the releasing ``faces`` ("inner"/"outer") and ``horizon``, the last time (s) the
    form is compared (front at the far face or mid-plane; a fraction of the depletion time)."""

    applies: bool
    reason: str
    faces: tuple[str, ...] = ()
    horizon: float = 0.0


def _single_dispersed_layer(problem: Problem) -> tuple[str | None, tuple[str, ...]]:
    """(reason it is not a single loaded layer releasing into sinks, releasing faces)."""
    if problem.regime.kind != "transient":
        return "the case is not transient", ()
    if len(problem.layers) != 1:
        return f"the body has {len(problem.layers)} layers (the closed forms have one)", ()
    layer = problem.layers[0]
    if not layer.is_loaded_above_solubility:
        return "the layer is not loaded above its solubility", ()
    if layer.reaction.reacts:
        return "the layer consumes solute (the closed forms have no reaction)", ()
    faces = []
    for side, boundary in (("inner", problem.inner_boundary), ("outer", problem.outer_boundary)):
        if side == "inner" and problem.solid_centre:
            continue
        condition = boundary.condition
        if condition.is_perfect_sink(boundary):
            faces.append(side)
        elif not condition.is_sealed(boundary):
            return (f"the {side} face is neither a perfect sink (zero concentration) nor "
                    f"sealed"), ()
    if not faces:
        return "no face is a perfect sink", ()
    return None, tuple(faces)


def similarity_scope(problem: Problem) -> Scope:
    """Paul & McSpadden's similarity solution applies to a transient slab of one layer loaded
    above its solubility, with no reaction, one face a perfect sink and the other sealed, or
    both faces perfect sinks; it is exact until the front reaches the sealed face (one sink)
    or the mid-plane (two), which is the ``horizon``."""
    reason, faces = _single_dispersed_layer(problem)
    if reason is None and problem.geometry != "slab":
        reason = f"the similarity solution is planar (the body is a {problem.geometry})"
    if reason is not None:
        return Scope(False, reason)
    layer = problem.layers[0]
    reach = layer.thickness / len(faces)
    lam = paul_mcspadden_root(layer.initial, layer.solubility)  # type: ignore[arg-type]
    horizon = (reach / (2.0 * lam)) ** 2 / layer.diffusivity
    where = "mid-plane" if len(faces) == 2 else "sealed face"
    return Scope(True, f"exact until the front reaches the {where} at t = {horizon:.6g} s",
                 faces, horizon)


def similarity_applies(problem: Problem) -> bool:
    """True when :func:`similarity_scope` covers ``problem``."""
    return similarity_scope(problem).applies


def pseudo_steady_scope(problem: Problem) -> Scope:
    """The pseudo-steady forms apply to a transient body of one layer loaded above its
    solubility with ``Cs/A <= PSEUDO_STEADY_MAX_RATIO``, no reaction, and: a slab with one face
    a perfect sink and the other sealed (or both sinks: Higuchi's form on each half), or a
    solid cylinder or sphere whose outer face is a perfect sink. ``horizon`` is
    ``PSEUDO_STEADY_WINDOW`` times the form's depletion time."""
    reason, faces = _single_dispersed_layer(problem)
    if reason is None and problem.geometry != "slab" and not problem.solid_centre:
        reason = f"a hollow {problem.geometry} (the pseudo-steady forms are for solid bodies)"
    if reason is not None:
        return Scope(False, reason)
    layer = problem.layers[0]
    a, cs, d = layer.initial, float(layer.solubility), layer.diffusivity  # type: ignore[arg-type]
    if cs / a > PSEUDO_STEADY_MAX_RATIO:
        return Scope(False, f"Cs/A = {cs / a:.3g} exceeds {PSEUDO_STEADY_MAX_RATIO:g} (the "
                            f"pseudo-steady forms need loading >> solubility)")
    if problem.geometry == "slab":
        reach = layer.thickness / len(faces)
        depletion = reach * reach * (a - 0.5 * cs) / (2.0 * d * cs)
    elif problem.geometry == "cylinder":
        depletion = layer.thickness ** 2 * a / (4.0 * d * cs)
    else:
        depletion = layer.thickness ** 2 * a / (6.0 * d * cs)
    horizon = PSEUDO_STEADY_WINDOW * depletion
    return Scope(True, f"compared up to {PSEUDO_STEADY_WINDOW:g} of the pseudo-steady "
                       f"depletion time {depletion:.6g} s", faces, horizon)


def pseudo_steady_applies(problem: Problem) -> bool:
    """True when :func:`pseudo_steady_scope` covers ``problem``."""
    return pseudo_steady_scope(problem).applies


# ----------------------------------------------------------------------------------------------
# The closed forms on a Problem


@dataclass(frozen=True)
class DispersedReference:
    """A closed form's figures at the given times (s).

    ``released``: cumulative release per measure through all releasing faces (per m^2 slab,
    per m cylinder, total sphere); ``front``: position (m) of the front that left the outer
    edge of the undissolved region, or of the inner one where only that moved (the record's
    ``series.front_position``); ``front_inner``: the inner edge where both moved (slab releasing
    from both faces), else None; ``compared``: times inside the form's range (0 < t < horizon);
    ``release_bound``/``front_bound``: the form's own error bound at each time (relative release;
    front difference over the thickness), zero for an exact form; ``load``: the initial load
    per measure; ``source``: the published source.
    """

    released: np.ndarray
    front: np.ndarray
    front_inner: np.ndarray | None
    compared: np.ndarray
    release_bound: np.ndarray
    front_bound: np.ndarray
    load: float
    source: str


def _load_per_measure(problem: Problem) -> float:
    layer = problem.layers[0]
    r_in, r_out = problem.inner, problem.outer
    n = problem.exponent
    return problem.measure_factor * layer.initial * (r_out ** (n + 1) - r_in ** (n + 1)) / (n + 1)


def _slab_fronts(problem: Problem, faces: tuple[str, ...], depth: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray | None]:
    if faces == ("inner",):
        return problem.inner + depth, None
    if faces == ("outer",):
        return problem.outer - depth, None
    return problem.outer - depth, problem.inner + depth


def similarity_reference(problem: Problem, times: npt.ArrayLike) -> DispersedReference:
    """Paul & McSpadden's release and front for ``problem`` at ``times`` (ValueError where
    :func:`similarity_scope` does not cover it)."""
    scope = similarity_scope(problem)
    if not scope.applies:
        raise ValueError(f"the similarity solution does not apply: {scope.reason}")
    layer = problem.layers[0]
    t = np.asarray(times, dtype=float)
    args = (layer.diffusivity, layer.initial, float(layer.solubility))  # type: ignore[arg-type]
    depth = paul_mcspadden_depth(*args, t)
    released = len(scope.faces) * paul_mcspadden_release(*args, t)
    front, inner = _slab_fronts(problem, scope.faces, depth)
    zero = np.zeros_like(t)
    return DispersedReference(released, front, inner, (t > 0.0) & (t < scope.horizon), zero,
                              zero, _load_per_measure(problem), PAUL_MCSPADDEN)


def pseudo_steady_reference(problem: Problem, times: npt.ArrayLike) -> DispersedReference:
    """The pseudo-steady release and front for ``problem`` at ``times`` with their error
    bounds (ValueError where :func:`pseudo_steady_scope` does not cover it): Higuchi's plane
    form (bound: its exact difference from Paul & McSpadden at the case's A/Cs), Baker &
    Lonsdale's sphere, the cylinder's form (bounds ``CURVED_*_BOUND * Cs/A``)."""
    scope = pseudo_steady_scope(problem)
    if not scope.applies:
        raise ValueError(f"the pseudo-steady forms do not apply: {scope.reason}")
    layer = problem.layers[0]
    t = np.asarray(times, dtype=float)
    d, a, cs = layer.diffusivity, layer.initial, float(layer.solubility)  # type: ignore[arg-type]
    compared = (t > 0.0) & (t <= scope.horizon)
    load = _load_per_measure(problem)
    window = np.where(compared, t, 0.0)
    if problem.geometry == "slab":
        depth = higuchi_depth(d, a, cs, window)
        released = len(scope.faces) * higuchi_release(d, a, cs, window)
        front, inner = _slab_fronts(problem, scope.faces, depth)
        unit_time = np.ones(1)
        exact_release = paul_mcspadden_release(d, a, cs, unit_time)
        exact_depth = paul_mcspadden_depth(d, a, cs, window)
        ratio = abs(float(exact_release[0]) / float(higuchi_release(d, a, cs, unit_time)[0])
                    - 1.0)
        release_bound = np.full_like(t, ratio)
        front_bound = np.abs(depth - exact_depth) / layer.thickness
        return DispersedReference(released, front, inner, compared, release_bound,
                                  front_bound, load, HIGUCHI)
    radius = layer.thickness
    if problem.geometry == "sphere":
        delta = baker_lonsdale_sphere_depth(d, a, cs, radius, window)
        fraction = 1.0 - (1.0 - delta) ** 3
        source = BAKER_LONSDALE
    else:
        delta = cylinder_pseudo_steady_depth(d, a, cs, radius, window)
        fraction = 1.0 - (1.0 - delta) ** 2
        source = CYLINDER
    return DispersedReference(fraction * load, radius * (1.0 - delta), None, compared,
                              np.full_like(t, CURVED_RELEASE_BOUND * cs / a),
                              np.full_like(t, CURVED_FRONT_BOUND * cs / a), load, source)
