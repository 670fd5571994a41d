"""What a transient record says of a body that takes solute up (an oxygen-consuming construct,
a tissue fed from a face) beside what it says of a releasing body.

* :func:`supplying_faces` and :func:`releases`: a release fraction (released / initial load),
  t50 and t90 mean something only for a body that holds an initial load and is fed by no face;
  where a face supplies solute, released / load is not a fraction of anything (an uptake case
  with a trace of initial load gave thousands of per cent, negative);
* :func:`layer_minima`: the true minimum of each layer at one time (the bounded search of
  :mod:`worker.engine.extremes` on the route's own continuous solution, not the smallest
  sampled point);
* :func:`time_to_steady`: the time after which the concentration stays everywhere within
  ``STEADY_BAND`` of the steady state's concentration scale.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from worker.engine.extremes import Extreme, layer_extremes
from worker.engine.model import Problem, SteadySolution

#: time_to_steady: the concentration is within this fraction of the steady state's
#: concentration scale everywhere (the contract's 1 %).
STEADY_BAND = 0.01
#: A steady state whose largest concentration is below this fraction of the case's
#: concentration scale holds nothing (a release to a sink): no time to steady is reported.
NONZERO_STEADY = 1e-6
#: Log-spaced times (over the duration) on which the deviation from the steady state is scanned
#: before the last crossing of the band is refined by ``brentq``.
STEADY_SCAN_POINTS = 40
#: The scan starts at this fraction of the duration (besides t = 0, the initial state).
STEADY_SCAN_START = 1e-5

__all__ = ["NONZERO_STEADY", "STEADY_BAND", "SteadyApproach", "deviation_from_steady",
           "layer_minima", "releases", "route_minima", "steady_scale", "supplying_faces",
           "time_to_steady"]

#: ``(r, layer) -> C``, m -> amount/m^3, at one time.
Profile = Callable[[np.ndarray, int], np.ndarray]


def supplying_faces(problem: Problem) -> list[str]:
    """The faces (``"inner"``/``"outer"``) that feed solute into the body.

    A face feeds the body when it prescribes an inward flux density > 0, or when it fixes a
    positive fluid level whose value in the layer at the face, expressed as C/K (continuous
    across interfaces), is at least the highest initial C/K of any layer: the face then holds
    the body at or above every level it starts from, so solute flows in through it.
    """
    highest = max(layer.initial / layer.partition for layer in problem.layers)
    faces = []
    for side, boundary, layer in (("inner", problem.inner_boundary, problem.layers[0]),
                                  ("outer", problem.outer_boundary, problem.layers[-1])):
        condition = boundary.condition
        flux = condition.imposed_flux(boundary)
        if flux is not None and flux > 0.0:
            faces.append(side)
            continue
        fluid = condition.fluid_concentration(boundary)
        # a compartment feeds the body when it starts at or above the body's levels (a donor)
        if fluid is None or not (condition.fixes_level(boundary) or condition.finite_volume):
            continue
        level = problem.face_partition(side) * fluid / layer.partition
        if level > 0.0 and level >= highest:
            faces.append(side)
    return faces


def releases(problem: Problem) -> bool:
    """True when the body holds an initial load and no face feeds it (:func:`supplying_faces`):
    only then are the release fraction, t50 and t90 reported."""
    loaded = any(layer.initial > 0.0 for layer in problem.layers)
    return loaded and not supplying_faces(problem)


def layer_minima(profile: Profile, positions: list[tuple[int, np.ndarray]]) -> list[Extreme]:
    """The true minimum of each layer of one solution at one time.

    Parameters
    ----------
    profile : callable
        ``(r, layer) -> C`` of the solution at that time (m -> amount/m^3).
    positions : list of (int, ndarray)
        Per layer, its index and the sample positions (both ends included) where the search
        starts (:func:`worker.engine.transient.record.profile_positions`).
    """
    sampled = [np.asarray(profile(r, j), dtype=float) for j, r in positions]

    def concentration_at(r: np.ndarray, layer: int) -> np.ndarray:
        return profile(r, positions[layer][0])

    return layer_extremes(concentration_at, [r for _, r in positions], sampled, lowest=True)


def route_minima(route_profile: Callable[[np.ndarray, int, int], np.ndarray],
                 problem: Problem, positions: list[tuple[int, np.ndarray]],
                 internal: np.ndarray, index: np.ndarray) -> list[list[Extreme]]:
    """Per requested time (internal indices ``index``), the true minimum of each layer of a
    route's ``profile(r, k, layer)``; at t = 0 each layer's uniform initial concentration."""
    out = []
    for k in (int(i) for i in index):
        if internal[k] == 0.0:
            out.append([Extreme(float(layer.initial), float(r[0]), j)
                        for (j, r), layer in zip(positions, problem.layers, strict=True)])
            continue

        def profile(r: np.ndarray, layer: int, k: int = k) -> np.ndarray:
            return route_profile(r, k, layer)

        out.append(layer_minima(profile, positions))
    return out


def steady_scale(steady: SteadySolution, positions: list[tuple[int, np.ndarray]]) -> float:
    """The steady state's concentration scale: its largest |C| over the body (the true
    maximum of each layer by the bounded search), amount/m^3."""
    highest = []
    for sign in (1.0, -1.0):
        def concentration_at(r: np.ndarray, layer: int, sign: float = sign) -> np.ndarray:
            return sign * np.asarray(steady.concentration_at(r, layer=layer), dtype=float)

        sampled = [concentration_at(r, j) for j, r in positions]
        found = layer_extremes(concentration_at, [r for _, r in positions], sampled,
                               lowest=False)
        highest.append(max(e.value for e in found))
    return float(max(highest))


def deviation_from_steady(profile: Profile, steady: SteadySolution,
                          positions: list[tuple[int, np.ndarray]]) -> float:
    """max over the body of |C(r) - C_steady(r)| (the true maximum of each layer by the
    bounded search), amount/m^3."""
    def gap(r: np.ndarray, layer: int) -> np.ndarray:
        return np.abs(np.asarray(profile(r, layer), dtype=float)
                      - np.asarray(steady.concentration_at(r, layer=layer), dtype=float))

    sampled = [gap(r, j) for j, r in positions]
    found = layer_extremes(gap, [r for _, r in positions], sampled, lowest=False)
    return float(max(e.value for e in found))


@dataclass(frozen=True)
class SteadyApproach:
    """One route's time to steady: ``value`` in s (None: not within the duration, ``reason``
    says why), and the deviation at the duration as a fraction of the steady scale."""

    value: float | None
    final_deviation: float
    reason: str | None = None


def time_to_steady(concentration: Callable[[np.ndarray, float, int], np.ndarray],
                   initial: Profile, steady: SteadySolution,
                   positions: list[tuple[int, np.ndarray]], duration: float,
                   scale: float) -> SteadyApproach:
    """The time after which max |C - C_steady| <= ``STEADY_BAND`` * ``scale`` up to the duration.

    Parameters
    ----------
    concentration : callable
        ``(r, t, layer) -> C`` of the route at any t in (0, duration], amount/m^3.
    initial : callable
        ``(r, layer) -> C`` of the initial state (t = 0).
    steady : SteadySolution
        The steady state the case approaches.
    scale : float
        The steady state's concentration scale (:func:`steady_scale`), amount/m^3, > 0.

    Notes
    -----
    The deviation is scanned at t = 0 and ``STEADY_SCAN_POINTS`` log-spaced times up to the
    duration; the last scan interval on which it falls through the band is refined by
    ``brentq``. A deviation that dips into the band and leaves it again between two scan
    points is not seen; the decay towards a steady state of a linear case is a sum of
    decaying exponentials, whose late part falls monotonically.
    """
    band = STEADY_BAND * scale

    def excess(t: float) -> float:
        if t == 0.0:
            return deviation_from_steady(initial, steady, positions) - band

        def profile(r: np.ndarray, layer: int) -> np.ndarray:
            return concentration(r, t, layer)

        return deviation_from_steady(profile, steady, positions) - band

    scan = np.concatenate(([0.0], np.geomspace(STEADY_SCAN_START * duration, duration,
                                               STEADY_SCAN_POINTS)))
    values = np.array([excess(float(t)) for t in scan])
    final = float(values[-1] + band) / scale
    if values[-1] > 0.0:
        return SteadyApproach(None, final,
                              f"not within {100 * STEADY_BAND:g} % of the steady state by the end "
                              f"of the duration ({duration:.6g} s): still {100 * final:.3g} % "
                              f"of the steady scale away")
    outside = np.flatnonzero(values > 0.0)
    if outside.size == 0:
        return SteadyApproach(0.0, final)
    k = int(outside[-1])
    found = brentq(excess, float(scan[k]), float(scan[k + 1]), xtol=1e-12 * scan[k + 1],
                   rtol=1e-10)
    return SteadyApproach(float(found), final)
