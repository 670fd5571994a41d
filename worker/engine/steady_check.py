"""The steady part of a check record: solve two ways, compare, verify, report.

Methods
-------
* primary: the exact basis-superposition solution where a closed form exists
  (:mod:`worker.engine.exact_steady`), else the finest finite-volume solution;
* independent: the finite-volume shell balance on three grids (:mod:`worker.engine.fv_steady`),
  with a grid-convergence study (Celik et al. 2008) of the face fluxes; for nonlinear kinetics
  without a closed form also ``scipy.integrate.solve_bvp`` (:mod:`worker.engine.bvp_steady`);
* bracket: for Michaelis-Menten kinetics the two comparison solutions of the maximum principle.

Every check compares dimensionless numbers: fluxes relative to the throughput scale (the largest
of the r^n-weighted face rates and the consumption), concentrations relative to the largest
material-side concentration of the problem.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from functools import cached_property
from typing import Protocol

import numpy as np

from worker.engine import bvp_steady, convergence, exact_steady, fv_steady, mm_bracket
from worker.engine.dimensionless import biot_by_definition, thiele_by_definition
from worker.engine.extremes import layer_extremes, true_extreme
from worker.engine.fv_mesh import boundary_concentration_scale
from worker.engine.limits import check_limit
from worker.engine.model import Problem, SteadySolution
from worker.engine.outcome import Outcome
from worker.engine.regime_notes import thiele_notes
from worker.engine.steady_totals import totals_by_second_route

#: Points per layer in the reported profile (both layer ends included, so jumps are visible).
PROFILE_POINTS_PER_LAYER = 41
#: Thresholds for regime notes (warnings): common practice (THIELE_LARGE: regime_notes).
BIOT_LARGE = 10.0
BIOT_SMALL = 0.1
THIN_WALL_NOTE = 0.01
#: Throughput scale floor, as a fraction of the characteristic diffusive rate.
THROUGHPUT_FLOOR = 1e-3
#: Formal order of the finite-volume scheme, the band of observed orders taken as asymptotic,
#: and Roache's (1994) safety factor for a GCI that cannot use an observed order.
FORMAL_ORDER = 2
ORDER_BAND = (1.5, 2.5)
FALLBACK_SAFETY_FACTOR = 3.0


def _faces(problem: Problem) -> list[str]:
    """Faces whose flux is a real face (the centre of a solid body is not)."""
    return ["outer"] if problem.solid_centre else ["inner", "outer"]


def _weight(problem: Problem, side: str) -> float:
    r = problem.inner if side == "inner" else problem.outer
    return float(r**problem.exponent)


def _face_flux(solution: SteadySolution, side: str) -> float:
    return float(solution.flux_inner if side == "inner" else solution.flux_outer)


@dataclass
class _Sampled:
    """One solution evaluated once on the profile points of every layer (both layer ends
    included) and its flux at each layer's two ends; every check reads these samples."""

    solution: SteadySolution
    positions: list[np.ndarray]
    concentration: list[np.ndarray]
    end_flux: list[tuple[float, float]]
    lowest: float = float("nan")
    highest: float = float("nan")

    def __post_init__(self) -> None:
        self.lowest = float(min(c.min() for c in self.concentration))
        self.highest = float(max(c.max() for c in self.concentration))

    @classmethod
    def of(cls, solution: SteadySolution, positions: list[np.ndarray]) -> _Sampled:
        conc: list[np.ndarray] = []
        flux: list[tuple[float, float]] = []
        for i, r in enumerate(positions):
            if solution.profile_at is not None:
                c, j = solution.profile_at(r, layer=i)
                conc.append(np.asarray(c, dtype=float))
                j = np.asarray(j, dtype=float)
                flux.append((j[0], j[-1]))
                continue
            conc.append(np.asarray(solution.concentration_at(r, layer=i), dtype=float))
            ends = np.asarray(solution.flux_at(r[[0, -1]], layer=i), dtype=float)
            flux.append((ends[0], ends[-1]))
        return cls(solution, positions, conc, flux)

    def face_concentration(self, side: str) -> float:
        return float(self.concentration[0][0] if side == "inner" else self.concentration[-1][-1])

    def face_flux(self, side: str) -> float:
        return float(self.end_flux[0][0] if side == "inner" else self.end_flux[-1][-1])

    def extremes(self, problem: Problem, *, lowest: bool) -> list:
        """Per layer, the true minimum (or maximum) of this solution
        (:func:`worker.engine.extremes.layer_extremes`; the end slopes are -J/D)."""
        slopes = [(-a / ly.diffusivity, -b / ly.diffusivity)
                  for (a, b), ly in zip(self.end_flux, problem.layers, strict=True)]
        return layer_extremes(self.solution.concentration_at, self.positions,
                              self.concentration, lowest=lowest, end_slopes=slopes)



def _concentration_scale(problem: Problem, samples: list[_Sampled]) -> float:
    scale = boundary_concentration_scale(problem)
    for sample in samples:
        scale = max(scale, abs(sample.lowest), abs(sample.highest))
    return scale if scale > 0 else 1.0


def _throughput_scale(problem: Problem, solution: SteadySolution, c_scale: float) -> float:
    """Largest r^n-weighted rate through the body (face rates, consumption), but at least
    ``THROUGHPUT_FLOOR`` of the characteristic diffusive rate c*D*K/L, so that a body at
    equilibrium is not judged by the round-off of fluxes that are zero."""
    rates = [abs(_weight(problem, s) * _face_flux(solution, s)) for s in ("inner", "outer")]
    rates.append(abs(solution.consumption))
    conductance = max(ly.diffusivity * ly.partition / ly.thickness for ly in problem.layers)
    floor = THROUGHPUT_FLOOR * c_scale * conductance * problem.outer**problem.exponent
    return max(max(rates), floor)


_PROFILE_STEPS = np.arange(PROFILE_POINTS_PER_LAYER, dtype=float)


def _profile_positions(problem: Problem) -> list[np.ndarray]:
    """``PROFILE_POINTS_PER_LAYER`` evenly spaced points on each layer, both ends exact: the
    arithmetic of ``numpy.linspace`` (start + k * step, the last point set to the end), without
    its generality."""
    edges = problem.edges.tolist()
    positions = []
    for start, stop in zip(edges[:-1], edges[1:], strict=True):
        step = (stop - start) / (PROFILE_POINTS_PER_LAYER - 1)
        if step == 0.0:  # (linspace's own branch for such spans)
            positions.append(np.linspace(start, stop, PROFILE_POINTS_PER_LAYER))
            continue
        points = _PROFILE_STEPS * step
        points += start
        points[-1] = stop
        positions.append(points)
    return positions


def _boundary_residuals(problem: Problem, sample: _Sampled, c_scale: float,
                        t_scale: float) -> list[tuple[str, float]]:
    """Residual of each face condition, evaluated on the solution's own fields.

    Written here from the conditions themselves (surface C = K C_fluid; flux in = h (C_bulk -
    C_s/K); flux in = the prescribed value, 0 at a symmetry face) and the kinds' plain values,
    not from the kinds' ``face_residual``, which the exact depletion solver drives to zero: a
    slip there would otherwise be solved away and then pass its own check.
    """
    out = []
    for side in _faces(problem):
        b = problem.inner_boundary if side == "inner" else problem.outer_boundary
        c_s = sample.face_concentration(side)
        j = sample.face_flux(side)
        into = j if side == "inner" else -j
        k = problem.face_partition(side)
        w = _weight(problem, side)
        condition = b.condition
        name = f"{side} {condition.residual_label}"
        fluid = condition.fluid_concentration(b)
        film = condition.film_coefficient(b)
        if condition.holds_concentration and fluid is not None:
            out.append((name, abs(c_s - k * fluid) / c_scale))
        elif film is not None and fluid is not None:
            out.append((name, abs(w * (into - film * (fluid - c_s / k))) / t_scale))
        else:
            out.append((name, abs(w * (into - (condition.imposed_flux(b) or 0.0))) / t_scale))
    return out


def _interface_residuals(problem: Problem, sample: _Sampled, c_scale: float,
                         t_scale: float) -> list[tuple[str, float]]:
    out = []
    for i in range(len(problem.layers) - 1):
        r = float(problem.edges[i + 1])
        a, b = problem.layers[i], problem.layers[i + 1]
        ca, cb = sample.concentration[i][-1], sample.concentration[i + 1][0]
        ja, jb = sample.end_flux[i][-1], sample.end_flux[i + 1][0]
        k_ref = min(a.partition, b.partition)
        out.append((f"interface {i + 1} C/K", abs(ca / a.partition - cb / b.partition) * k_ref
                    / c_scale))
        out.append((f"interface {i + 1} flux", abs(r**problem.exponent * (ja - jb)) / t_scale))
    return out


def _mass_imbalance(problem: Problem, solution: SteadySolution, t_scale: float) -> float:
    inflow = _weight(problem, "inner") * solution.flux_inner
    outflow = _weight(problem, "outer") * solution.flux_outer
    return abs(inflow - outflow - solution.consumption) / t_scale


def _worst(items: list[tuple[str, float]]) -> tuple[str, float]:
    if not items:
        return ("none", 0.0)
    name, value = max(items, key=lambda kv: (math.isnan(kv[1]), kv[1]))
    return name, value


def _method(role: str, solution: SteadySolution) -> dict:
    return {"role": role, "name": solution.method, "reference": solution.reference}


@dataclass
class _Figures:
    """The face fluxes (outward, amount/(m^2*s)) and the r^n-weighted consumption of one route,
    with the route's name; ``problem`` is the problem that route read."""

    route: str
    problem: Problem
    flux_inner: float
    flux_outer: float
    consumption: float

    def flux(self, side: str) -> float:
        return self.flux_inner if side == "inner" else self.flux_outer

    @cached_property
    def totals(self) -> dict[str, float]:
        """Every total the record reports, formed from this route by
        :func:`worker.engine.steady_totals.totals_by_second_route` (its own shell measures);
        formed once, read by the quantities and by ``cross_check.totals``."""
        return totals_by_second_route(self.problem, self.flux_inner, self.flux_outer,
                                      self.consumption)


def _totals(problem: Problem, best: _Figures) -> dict[str, tuple[float, str]]:
    """The record's totals from the best estimates (this module's factors), name -> (value,
    unit); :func:`worker.engine.steady_totals.totals_by_second_route` forms them again."""
    amount = problem.amount_unit
    out: dict[str, tuple[float, str]] = {}
    two_pi_r_in = 2 * math.pi * problem.inner
    two_pi_r_out = 2 * math.pi * problem.outer
    if problem.geometry == "cylinder":
        out["rate_per_length_inner"] = (two_pi_r_in * best.flux_inner, f"{amount}/(m*s)")
        out["rate_per_length_outer"] = (two_pi_r_out * best.flux_outer, f"{amount}/(m*s)")
        out["consumption_per_length"] = (2 * math.pi * best.consumption, f"{amount}/(m*s)")
        size = problem.length
    elif problem.geometry == "slab":
        out["consumption_per_area"] = (best.consumption, f"{amount}/(m^2*s)")
        size = problem.area
    else:
        size = 1.0
    if size is not None:
        measure = {"slab": (1.0, 1.0), "cylinder": (two_pi_r_in, two_pi_r_out),
                   "sphere": (4 * math.pi * problem.inner**2, 4 * math.pi * problem.outer**2)}
        a_in, a_out = measure[problem.geometry]
        out["rate_inner"] = (size * a_in * best.flux_inner, f"{amount}/s")
        out["rate_outer"] = (size * a_out * best.flux_outer, f"{amount}/s")
        out["consumption"] = (size * problem.measure_factor * best.consumption, f"{amount}/s")
    return out


def _biot(problem: Problem, side: str) -> float | None:
    """Biot number of a face with a film: h * total thickness / (K_face * D of the face layer);
    None for a face without one."""
    b = problem.inner_boundary if side == "inner" else problem.outer_boundary
    h = b.condition.film_coefficient(b)
    if h is None:
        return None
    layer = problem.layers[0] if side == "inner" else problem.layers[-1]
    return float(h * problem.total_thickness / (problem.face_partition(side) * layer.diffusivity))


def _add_quantities(outcome: Outcome, problem: Problem, primary: _Sampled, best: _Figures,
                    second: _Figures | None, flux_band: dict[str, float],
                    extremes: dict[str, tuple],
                    other: _Sampled | None) -> None:
    """The record's figures: best estimates, each with its numerical uncertainty (the larger of
    the disagreement of the two routes and the grid band where the estimate is numerical), the
    routes and the check that compared them."""
    c_unit = problem.concentration_unit
    amount = problem.amount_unit
    flux_unit = f"{amount}/(m^2*s)"
    q = outcome.add_quantity
    routes = [best.route] + ([second.route] if second is not None else [])
    for side in ("inner", "outer"):
        value = best.flux(side)
        spread = abs(value - second.flux(side)) if second is not None else None
        band = flux_band.get(side, 0.0)
        u = max(spread, band) if spread is not None else (band or None)
        q(f"flux_{side}", float(value), flux_unit, uncertainty=u, routes=routes,
          verified_by=f"cross_check.flux_{side}" if side in _faces(problem) else None)
    for side in ("inner", "outer"):
        value = primary.face_concentration(side)
        u = abs(value - other.face_concentration(side)) if other is not None else None
        q(f"surface_{side}", value, c_unit, uncertainty=u, routes=routes,
          verified_by="cross_check.profile" if other is not None else None)
    for name in ("concentration_min", "concentration_max",
                 "concentration_min_layers", "concentration_max_layers"):
        value, u = extremes[name]
        q(name, value, c_unit, uncertainty=u, routes=routes,
          verified_by="cross_check.extremes" if u is not None else None)
    solution = primary.solution
    if solution.depletion_front is not None:
        q("depletion_front", float(solution.depletion_front), "m")
    q("thiele_modulus", [exact_steady.thiele_modulus(ly, problem) for ly in problem.layers],
      "1", routes=["reaction kinds on the case as read", "definition on the independent reading"],
      verified_by="cross_check.dimensionless")
    for side in ("inner", "outer"):
        biot = _biot(problem, side)
        if biot is not None:
            q(f"biot_{side}", float(biot), "1",
              routes=["boundary kinds on the case as read",
                      "definition on the independent reading"],
              verified_by="cross_check.dimensionless")
    reported = _totals(problem, best)
    again = second.totals if second is not None else {}
    for name, (value, unit) in reported.items():
        other_value = again.get(name)
        u = abs(value - other_value) if other_value is not None else None
        q(name, float(value), unit, uncertainty=u, routes=routes,
          verified_by="cross_check.totals" if other_value is not None else None)


def _fed_levels(problem: Problem, solution: SteadySolution) -> list[float | None]:
    """Per layer, the larger of the solution's concentrations at the layer's two ends."""
    edges = problem.edges
    levels: list[float | None] = []
    for j in range(len(problem.layers)):
        ends = np.asarray(solution.concentration_at(np.array([edges[j], edges[j + 1]]),
                                                    layer=j), dtype=float)
        levels.append(float(np.max(ends)) if np.all(np.isfinite(ends)) else None)
    return levels


def _regime_notes(problem: Problem, primary: SteadySolution, outcome: Outcome) -> None:
    outcome.warnings.extend(thiele_notes(problem, _fed_levels(problem, primary)))
    for side in ("inner", "outer"):
        biot = outcome.quantities.get(f"biot_{side}", {}).get("value")
        if biot is None:
            continue
        if biot > BIOT_LARGE:
            outcome.warnings.append(
                f"biot_{side} = {biot:.3g} > {BIOT_LARGE:g}: the fluid film is a minor resistance; "
                "the face is close to a fixed-concentration face (common practice)")
        elif biot < BIOT_SMALL:
            outcome.warnings.append(
                f"biot_{side} = {biot:.3g} < {BIOT_SMALL:g}: the fluid film controls; internal "
                "gradients are small and the result is sensitive to the film coefficient "
                "(common practice)")
    if primary.depletion_front is not None:
        edges = problem.edges
        outcome.warnings.append(
            "depleted zone: the concentration falls to zero at "
            f"r = {primary.depletion_front:.4g} m "
            f"(body {edges[0]:.4g}–{edges[-1]:.4g} m); on the side of the front away from the "
            "supply the consuming material receives no solute")
    _thin_wall_note(problem, primary, outcome)


class _FaceRates(Protocol):
    """The face fluxes the thin-wall note reads of a slab solution (a ``SteadySolution`` or a
    ``_SlabRate``): flux densities in amount/(m^2*s), outward positive."""

    @property
    def success(self) -> bool: ...
    @property
    def flux_inner(self) -> float: ...
    @property
    def flux_outer(self) -> float: ...


@dataclass
class _SlabRate:
    success: bool
    flux_inner: float
    flux_outer: float


def _reaction_free_slab(slab: Problem) -> _SlabRate | None:
    """Uniform flux through a reaction-free layered slab by its resistance network.

    With u = C/K continuous across interfaces, J = (u_in - u_out) / sum(L_i/(D_i K_i)); a film
    adds K_face/(h K) to the resistance and a concentration face fixes u (Bird, Stewart &
    Lightfoot 2002, §10.6, composite walls in series). Flux and symmetry faces fix J itself.
    """
    resistance = sum(ly.thickness / (ly.diffusivity * ly.partition) for ly in slab.layers)
    terms = []
    for side, layer in (("inner", slab.layers[0]), ("outer", slab.layers[-1])):
        b = slab.inner_boundary if side == "inner" else slab.outer_boundary
        k_face = slab.face_partition(side)
        condition = b.condition
        fluid = condition.fluid_concentration(b)
        if fluid is None:  # a flux or symmetry face fixes J
            imposed = condition.imposed_flux(b)
            value = 0.0 if imposed is None else imposed
            j = value if side == "inner" else -value
            return _SlabRate(True, j, j)
        h = condition.film_coefficient(b)
        terms.append((k_face * fluid / layer.partition,
                      0.0 if h is None else k_face / (h * layer.partition)))
    (a_in, r_in), (a_out, r_out) = terms
    j = (a_in - a_out) / (resistance + r_in + r_out)
    return _SlabRate(True, j, j)


def _thin_wall_note(problem: Problem, primary: SteadySolution, outcome: Outcome) -> None:
    """How far a slab (thin-wall) hand calculation would be from this curved shell."""
    if problem.geometry == "slab" or problem.inner == 0.0:
        return
    slab = dataclasses.replace(problem, geometry="slab")
    flat: _FaceRates | None
    if all(not ly.reaction.reacts for ly in problem.layers):
        flat = _reaction_free_slab(slab)
    elif problem.is_linear:  # the slab's fluxes only: its consumption integral is not needed
        flat = _SlabRate(*exact_steady.linear_face_fluxes(slab))
    else:
        flat = exact_steady.solve_exact(slab) if all(
            ly.reaction.law.exact_coefficients(ly.reaction) is not None
            for ly in problem.layers) else None
        if flat is None:
            flat = fv_steady.solve_fv(slab)
    if flat is None or not flat.success:
        return
    n = problem.exponent
    true_rate = problem.inner**n * primary.flux_inner
    if true_rate == 0.0:
        true_rate = -(problem.outer**n) * primary.flux_outer
        slab_rate = -(problem.inner**n) * flat.flux_outer
        face = "outer-face rate with the inner-face area"
    else:
        slab_rate = problem.inner**n * flat.flux_inner
        face = "inner-face rate with the inner-face area"
    if true_rate == 0.0:
        return
    error = (slab_rate - true_rate) / true_rate
    if abs(error) >= THIN_WALL_NOTE:
        thickness = problem.total_thickness
        outcome.warnings.append(
            f"thin-wall note: a slab (thin-wall) hand calculation of this {problem.geometry} shell "
            f"(thickness/inner radius = {thickness / problem.inner:.3g}) would be "
            f"{100 * error:+.2f} % off the {face}; use the curved-shell result "
            "(thin-wall convention t <= r/10, common practice)")


def _cross_check_fluxes(outcome: Outcome, problem: Problem, reference: SteadySolution,
                        reference_values: dict[str, float], t_scale: float, label: str) -> None:
    limit = None
    for side in _faces(problem):
        name = f"cross_check.flux_{side}"
        limit = check_limit(problem, name)
        w = _weight(problem, side)
        ref = _face_flux(reference, side)
        num = reference_values[side]
        value = abs(w * (num - ref)) / t_scale
        outcome.check_at_most(
            name, value, limit,
            f"{label}: {num:.9g} vs {ref:.9g} {problem.amount_unit}/(m^2*s), difference "
            "relative to the throughput scale")


def _cross_check_profiles(outcome: Outcome, problem: Problem, samples: dict[int, _Sampled],
                          a: SteadySolution, b: SteadySolution, c_scale: float,
                          label: str) -> None:
    """The profile cross-check of ``a`` against ``b``, failed with the reason when either
    method produced no solution to compare."""
    unsolved = [s for s in (a, b) if id(s) not in samples]
    if unsolved:
        outcome.add_check("cross_check.profile", None, None, False,
                          f"{label}: nothing to compare, "
                          + "; ".join(f"{s.method} failed: {s.message}" for s in unsolved))
        return
    _cross_check_profile(outcome, problem, samples[id(a)], samples[id(b)], c_scale, label)


def _cross_check_profile(outcome: Outcome, problem: Problem, a: _Sampled,
                         b: _Sampled, c_scale: float, label: str) -> None:
    worst = 0.0
    where = problem.inner
    for r, ca, cb in zip(a.positions, a.concentration, b.concentration, strict=True):
        diff = np.abs(ca - cb)
        j = int(diff.argmax())
        if diff[j] / c_scale > worst:
            worst, where = float(diff[j] / c_scale), float(r[j])
    outcome.check_at_most(
        "cross_check.profile", worst, check_limit(problem, "cross_check.profile"),
        f"{label}: largest concentration difference at r = {where:.5g} m, relative to "
        f"{c_scale:.4g} {problem.concentration_unit}")


def _gci_relative(result: convergence.GridStudy) -> tuple[float, str]:
    """GCI_fine as a fraction of the fine value, with a fallback where no order can be formed:
    the formal order 2 with Roache's two-grid safety factor 3 (Roache 1994)."""
    if result.reliable or result.convergence == "oscillatory":
        return float(result.gci_fine), result.message
    fallback = convergence.fallback_gci(result, FORMAL_ORDER, FALLBACK_SAFETY_FACTOR)
    return float(fallback), (f"{result.message}; GCI from the formal order {FORMAL_ORDER} with "
                             f"safety factor {FALLBACK_SAFETY_FACTOR:g} (Roache 1994)")


def _grid_checks(outcome: Outcome, problem: Problem, studies: dict, cells: list,
                 t_scale: float) -> dict:
    """GCI checks of the face fluxes; returns the numerical values to cross-check: the
    Richardson-extrapolated value where the convergence is monotonic, else the fine-grid value."""
    values = {}
    for side in _faces(problem):
        quantity = f"flux_{side}"
        result = studies[quantity]
        w = _weight(problem, side)
        values[side] = result.extrapolated if result.convergence == "monotonic" else result.fine
        gci_fraction, note = _gci_relative(result)
        # GCI relative to the throughput scale, so a face carrying no net flux is not judged by
        # the relative change of a number that is zero to round-off.
        gci = gci_fraction * abs(w * result.fine) / t_scale if result.fine != 0.0 else 0.0
        order = (f"{result.apparent_order:.3g}" if math.isfinite(result.apparent_order)
                 else "not formed")
        outcome.check_at_most(
            # by family only: an override named gci.flux_* has never applied here
            f"gci.{quantity}", gci, check_limit(problem, "gci"),
            f"grids of {cells[2]}, {cells[1]}, {cells[0]} cells: observed order {order}, "
            f"fine {result.fine:.9g}, extrapolated {result.extrapolated:.9g}; GCI_fine relative "
            f"to the throughput (Celik et al. 2008); {note}")
        if result.convergence == "monotonic" and not (
                ORDER_BAND[0] <= result.apparent_order <= ORDER_BAND[1]):
            outcome.warnings.append(
                f"grid study of {quantity}: observed order {result.apparent_order:.3g} is outside "
                f"{ORDER_BAND[0]:g}–{ORDER_BAND[1]:g} around the formal order {FORMAL_ORDER}: the "
                "grids may not be in the asymptotic range")
    return values


def _best_numerical(studies: dict, name: str, fine: SteadySolution) -> tuple[float, float]:
    """The most accurate finite-volume value of ``name`` (Richardson-extrapolated where the
    three grids converge monotonically, else the fine-grid value) and its grid band
    (GCI_fine, or the fallback of :func:`_gci_relative`, times the fine value)."""
    study = studies.get(name)
    if study is None:
        return float(getattr(fine, name)), 0.0
    value = study.extrapolated if study.convergence == "monotonic" else study.fine
    if not math.isfinite(value):
        return float(getattr(fine, name)), math.inf
    if study.convergence == "converged_to_roundoff":
        return float(value), 0.0
    fraction, _ = _gci_relative(study)
    band = abs(fraction * study.fine) if math.isfinite(fraction) else math.inf
    return float(value), band


def _fv_figures(problem: Problem, studies: dict, fine: SteadySolution, route: str
                ) -> tuple[_Figures, dict[str, float]]:
    """Best finite-volume figures and the grid band of each face flux."""
    values: dict[str, float] = {}
    bands: dict[str, float] = {}
    for name in ("flux_inner", "flux_outer", "consumption"):
        values[name], band = _best_numerical(studies, name, fine)
        bands[name.removeprefix("flux_")] = band
    if problem.solid_centre:
        values["flux_inner"], bands["inner"] = 0.0, 0.0
    return _Figures(route, problem, values["flux_inner"], values["flux_outer"],
                    values["consumption"]), bands


def _figures_of(solution: SteadySolution, problem: Problem, route: str) -> _Figures:
    return _Figures(route, problem, float(solution.flux_inner), float(solution.flux_outer),
                    float(solution.consumption))


def _extremes(problem: Problem, primary: _Sampled, other: _Sampled | None
              ) -> dict[str, tuple]:
    """True minimum and maximum of the primary solution (by optimisation on the continuous
    solution) with their uncertainty: the difference from the other route's true extreme; the
    same per layer under ``<name>_layers`` (lists, inner layer first)."""
    out: dict[str, tuple] = {}
    for name, lowest in (("concentration_min", True), ("concentration_max", False)):
        per_layer = primary.extremes(problem, lowest=lowest)
        found = true_extreme(per_layer, lowest=lowest)
        u = None
        layer_u: list[float] | None = None
        if other is not None:
            again_layers = other.extremes(problem, lowest=lowest)
            again = true_extreme(again_layers, lowest=lowest)
            u = abs(found.value - again.value)
            layer_u = [abs(a.value - b.value)
                       for a, b in zip(per_layer, again_layers, strict=True)]
        out[name] = (found.value, u)
        out[f"{name}_layers"] = ([e.value for e in per_layer], layer_u)
    return out


def _cross_check_extremes(outcome: Outcome, problem: Problem,
                          extremes: dict[str, tuple], c_scale: float,
                          label: str) -> None:
    """The true extremes of the two routes, over the body and in every layer, relative to the
    concentration scale."""
    worst_name, worst = "", -1.0
    for name, (_, u) in extremes.items():
        spreads = u if isinstance(u, list) else [u]
        for index, spread in enumerate(spreads):
            if spread is not None and spread / c_scale > worst:
                where = f" of {problem.layers[index].name}" if isinstance(u, list) else ""
                worst_name, worst = name.removesuffix("_layers") + where, spread / c_scale
    if worst < 0.0:
        return
    outcome.check_at_most(
        "cross_check.extremes", worst, check_limit(problem, "cross_check.extremes"),
        f"{label}: true minimum and maximum of each solution, over the body and in each layer "
        f"(bounded search on the continuous solution), worst {worst_name}, difference relative "
        f"to {c_scale:.4g} {problem.concentration_unit}")


def _cross_check_totals(outcome: Outcome, problem: Problem, second: _Figures,
                        t_scale: float) -> None:
    """Every reported total against the same total formed by
    :func:`~worker.engine.steady_totals.totals_by_second_route` from the second route, relative
    to the throughput scale in that total's own measure."""
    again = second.totals
    if not again:
        return
    worst_name, worst = "", 0.0
    for name, value in again.items():
        reported = outcome.quantities.get(name, {}).get("value")
        scale = _total_scale(problem, name, t_scale)
        error = math.inf if reported is None else abs(reported - value) / scale
        if not error <= worst:
            worst_name, worst = name, error
    outcome.check_at_most(
        "cross_check.totals", worst, check_limit(problem, "cross_check.totals"),
        f"reported totals vs the same totals from {second.route} with the shell measures "
        f"written out again; worst {worst_name or 'none'}, relative to the throughput")


def _total_scale(problem: Problem, name: str, t_scale: float) -> float:
    """The throughput scale (r^n-weighted) in the measure of total ``name``."""
    factor = problem.measure_factor
    if name in ("rate_inner", "rate_outer", "consumption"):
        extent = {"slab": problem.area, "cylinder": problem.length, "sphere": 1.0}
        factor *= extent[problem.geometry] or 1.0
    return factor * t_scale


def _cross_check_dimensionless(outcome: Outcome, problem: Problem,
                               independent: Problem) -> None:
    """Thiele moduli and Biot numbers in the record against their definitions evaluated on the
    independent reading of the case (:mod:`worker.engine.dimensionless`)."""
    pairs: list[tuple[str, float | None, float | None]] = []
    thiele = outcome.quantities["thiele_modulus"]["value"]
    for i, value in enumerate(thiele):
        pairs.append((f"thiele_modulus[{i}]", value, thiele_by_definition(independent, i)))
    for side in ("inner", "outer"):
        value = outcome.quantities.get(f"biot_{side}", {}).get("value")
        pairs.append((f"biot_{side}", value, biot_by_definition(independent, side)))
    worst_name, worst = "", 0.0
    for name, a, b in pairs:
        if a is None and b is None:
            continue
        error = (math.inf if a is None or b is None
                 else abs(a - b) / max(abs(a), abs(b), 1e-300))
        if not error <= worst:
            worst_name, worst = name, error
    if all(a is None and b is None for _, a, b in pairs):
        return
    outcome.check_at_most(
        "cross_check.dimensionless", worst, check_limit(problem, "cross_check.dimensionless"),
        f"Thiele moduli and Biot numbers vs their definitions on the independent reading of the "
        f"case; worst {worst_name or 'none'} (relative; one side without a value fails)")


def _cross_check_probes(outcome: Outcome, problem: Problem, other: SteadySolution,
                        c_scale: float, label: str) -> None:
    reported = np.asarray(outcome.series["probes"]["concentration"], dtype=float)
    probes = np.asarray(problem.probes, dtype=float)
    again = np.asarray(other.concentration_at(probes), dtype=float)
    diff = np.abs(reported - again) / c_scale
    j = int(np.argmax(diff))
    outcome.check_at_most(
        "cross_check.probes", float(diff[j]), check_limit(problem, "cross_check.probes"),
        f"{label}: probe concentrations, worst at r = {probes[j]:.6g} m ({reported[j]:.6g} vs "
        f"{again[j]:.6g} {problem.concentration_unit}), relative to {c_scale:.4g}")


def _cross_check_front(outcome: Outcome, problem: Problem, reported: float | None,
                       other: float | None, label: str, routes: list[str]) -> None:
    """The depletion front of the record against the other route's: one route with a front and
    the other without fails."""
    if reported is None and other is None:
        return
    value = (abs(reported - other) / problem.total_thickness
             if reported is not None and other is not None else math.inf)
    if reported is not None and other is not None:
        entry = outcome.quantities["depletion_front"]
        entry["uncertainty"] = abs(reported - other)
        entry["verified_by"] = "cross_check.depletion_front"
        entry["routes"] = routes
    outcome.check_at_most(
        "cross_check.depletion_front", value,
        check_limit(problem, "cross_check.depletion_front"),
        f"{label}: front {reported} m vs {other} m, relative to the total thickness")


def run_steady(problem: Problem, independent: Problem | None = None) -> Outcome:
    """Solve a steady case by every applicable method and check the results.

    ``independent`` is the independent reading of the same case (its own units route and
    problem build); the methods compared with the primary read it. None: ``problem`` itself.
    """
    independent = problem if independent is None else independent
    outcome = Outcome()
    positions = _profile_positions(problem)
    exact = exact_steady.solve_exact(problem, sample_at=positions)
    grids = convergence.refined_solutions(independent if exact is not None else problem)
    fine = grids[0]
    studies = convergence.run_grid_study(
        problem, solutions=grids,
        quantities=[f"flux_{side}" for side in _faces(problem)] + ["consumption"])
    cells = [sum(g.diagnostics["cells"]) if isinstance(g.diagnostics["cells"], list | tuple)
             else g.diagnostics["cells"] for g in grids]
    if not fine.success:
        outcome.add_check("numerical.converged", None, None, False,
                          f"finite-volume solution did not converge: {fine.message}")
    independent_solution = None
    if exact is None:
        independent_solution = bvp_steady.solve_bvp_reference(independent)
    primary = exact if exact is not None else fine

    outcome.methods.append(_method("primary", primary))
    fv_route = f"{fine.method} (three-grid study, Richardson extrapolation)"
    outcome.methods.append(_method("independent", fine) | {"name": fv_route})
    if independent_solution is not None:
        outcome.methods.append(_method("independent", independent_solution))

    solutions = [s for s in (primary, fine, independent_solution) if s is not None and s.success]
    samples = {id(s): _Sampled.of(s, positions) for s in solutions}
    c_scale = _concentration_scale(problem, list(samples.values()))
    t_scale = _throughput_scale(problem, primary, c_scale)

    primary_samples = samples.get(id(primary)) or _Sampled.of(primary, positions)
    compared = fine if exact is not None else independent_solution
    other_samples = samples.get(id(compared)) if compared is not None else None
    layer_of_point: list[int] = []
    for i, r in enumerate(positions):
        layer_of_point += [i] * len(r)
    outcome.series["profile"] = {
        "position": np.concatenate(positions).tolist(),
        "concentration": np.concatenate(primary_samples.concentration).tolist(),
        "layer": layer_of_point,
        "units": {"position": "m", "concentration": problem.concentration_unit},
    }
    if problem.probes:
        probe_r = np.asarray(problem.probes, dtype=float)
        outcome.series["probes"] = {
            "position": probe_r.tolist(),
            "concentration": np.asarray(primary.concentration_at(probe_r), dtype=float).tolist(),
            "units": {"position": "m", "concentration": problem.concentration_unit},
        }

    numerical_values = _grid_checks(outcome, problem, studies, cells, t_scale)
    fv_best, fv_bands = _fv_figures(problem, studies, fine, fv_route)
    second: _Figures | None
    if exact is not None:
        best, second, bands = _figures_of(exact, problem, exact.method), fv_best, {}
    else:
        best, bands = fv_best, fv_bands
        second = (_figures_of(independent_solution, independent, independent_solution.method)
                  if independent_solution is not None and independent_solution.success
                  else None)
    extremes = _extremes(problem, primary_samples, other_samples)
    _add_quantities(outcome, problem, primary_samples, best, second, bands, extremes,
                    other_samples)

    if exact is not None:
        _cross_check_fluxes(outcome, problem, exact, numerical_values, t_scale,
                            "finite volumes (extrapolated) vs exact")
        _cross_check_profiles(outcome, problem, samples, fine, exact, c_scale,
                              "finite volumes (fine grid) vs exact")
        label = "finite volumes (fine grid) vs exact"
    elif independent_solution is not None:
        label = "solve_bvp vs finite volumes (fine grid)"
        if not independent_solution.success:
            outcome.add_check("cross_check.independent", None, None, False,
                              "independent method did not converge: "
                              f"{independent_solution.message}")
        else:
            _cross_check_fluxes(outcome, problem, independent_solution, numerical_values,
                                t_scale, "finite volumes (extrapolated) vs solve_bvp")
            _cross_check_profiles(outcome, problem, samples, fine, independent_solution,
                                  c_scale, "finite volumes (fine grid) vs solve_bvp")
    if second is not None:
        _cross_check_totals(outcome, problem, second, t_scale)
    if other_samples is not None:
        _cross_check_extremes(outcome, problem, extremes, c_scale, label)
        if problem.probes:
            _cross_check_probes(outcome, problem, other_samples.solution, c_scale, label)
    _cross_check_dimensionless(outcome, problem, independent)
    if compared is not None and compared.success:
        _cross_check_front(outcome, problem, primary.depletion_front, compared.depletion_front,
                           label, [primary.method, compared.method])

    imbalance = [(s.method, _mass_imbalance(problem, s, t_scale)) for s in solutions]
    name, value = _worst(imbalance)
    outcome.check_at_most(
        "mass_balance", value, check_limit(problem, "mass_balance"),
        f"(in - out - consumed)/throughput, worst of {len(imbalance)} methods: {name}")

    residuals = []
    for s in solutions:
        residuals += [(f"{s.method}: {k}", v) for k, v in
                      _boundary_residuals(problem, samples[id(s)], c_scale, t_scale)]
    name, value = _worst(residuals)
    outcome.check_at_most("boundary_residual", value, check_limit(problem, "boundary_residual"),
                          f"worst face condition: {name}")
    if len(problem.layers) > 1:
        residuals = []
        for s in solutions:
            residuals += [(f"{s.method}: {k}", v) for k, v in
                          _interface_residuals(problem, samples[id(s)], c_scale, t_scale)]
        name, value = _worst(residuals)
        outcome.check_at_most("interface_residual", value,
                              check_limit(problem, "interface_residual"),
                              f"worst interface condition: {name}")

    lowest = min([sample.lowest for sample in samples.values()]
                 + [extremes["concentration_min"][0]])
    outcome.check_at_most(
        "non_negativity", max(0.0, -lowest) / c_scale, check_limit(problem, "non_negativity"),
        f"lowest concentration {lowest:.4g} {problem.concentration_unit} (every method, and the "
        "true minimum of the reported profile)")

    if any(ly.reaction.law.has_bracket for ly in problem.layers) and fine.success:
        _bracket_check(outcome, problem, samples[id(fine)], c_scale)

    outcome.mark_verified([primary.method] + ([compared.method] if compared is not None else []),
                          {"profile": "cross_check.profile", "probes": "cross_check.probes"})
    _regime_notes(problem, primary, outcome)
    return outcome


def _bracket_check(outcome: Outcome, problem: Problem, fine: _Sampled,
                   c_scale: float) -> None:
    bracket = mm_bracket.michaelis_menten_bracket(problem)
    if bracket is None:
        outcome.warnings.append(
            "Michaelis-Menten comparison bracket not applicable to these boundaries "
            "(no bound on the surface concentration)")
        return
    lower, upper = bracket
    outcome.methods.append({"role": "bracket", "name": f"{lower.method} / {upper.method}",
                            "reference": lower.reference})
    worst, where = 0.0, problem.inner
    for i, (r, c) in enumerate(zip(fine.positions, fine.concentration, strict=True)):
        below = np.asarray(lower.concentration_at(r, layer=i)) - c
        above = c - np.asarray(upper.concentration_at(r, layer=i))
        violation = np.maximum(below, above) / c_scale
        j = int(np.argmax(violation))
        if violation[j] > worst:
            worst, where = float(violation[j]), float(r[j])
    outcome.check_at_most(
        "bracket", worst, check_limit(problem, "bracket"),
        f"finite-volume solution inside the maximum-principle bracket (Aris 1975; Protter & "
        f"Weinberger 1967); largest excursion at r = {where:.5g} m")


@dataclass(frozen=True)
class PrimaryFigures:
    """The record's primary figures of a steady case, without the routes that check them:
    ``scalars`` by quantity name (as ``run_steady`` reports them; ``depletion_front`` NaN
    without a front) and, per layer, the true minimum and maximum of the primary solution."""

    scalars: dict[str, float]
    layer_min: list[float]
    layer_max: list[float]


def primary_figures(problem: Problem) -> PrimaryFigures:
    """The primary figures of :func:`run_steady` alone: the exact solution where a closed form
    exists, else the finite volumes' three-grid study (Richardson-extrapolated face fluxes and
    consumption where the grids converge monotonically, profile and extremes of the fine grid),
    by the same functions ``run_steady`` uses. For many trials of one case
    (``worker.engine.design.trials``); a failed solve gives NaN figures."""
    positions = _profile_positions(problem)
    exact = exact_steady.solve_exact(problem, sample_at=positions)
    if exact is not None:
        primary = exact
        best = _figures_of(exact, problem, exact.method)
    else:
        grids = convergence.refined_solutions(problem)
        primary = grids[0]
        studies = convergence.run_grid_study(
            problem, solutions=grids,
            quantities=[f"flux_{side}" for side in _faces(problem)] + ["consumption"])
        best, _ = _fv_figures(problem, studies, primary, primary.method)
    count = len(problem.layers)
    if not primary.success:
        nan = math.nan
        return PrimaryFigures({}, [nan] * count, [nan] * count)
    sample = _Sampled.of(primary, positions)
    scalars = {"flux_inner": best.flux_inner, "flux_outer": best.flux_outer,
               "surface_inner": sample.face_concentration("inner"),
               "surface_outer": sample.face_concentration("outer")}
    lows = sample.extremes(problem, lowest=True)
    highs = sample.extremes(problem, lowest=False)
    scalars["concentration_min"] = true_extreme(lows, lowest=True).value
    scalars["concentration_max"] = true_extreme(highs, lowest=False).value
    front = primary.depletion_front
    scalars["depletion_front"] = math.nan if front is None else float(front)
    for side in ("inner", "outer"):
        biot = _biot(problem, side)
        if biot is not None:
            scalars[f"biot_{side}"] = biot
    scalars.update({name: float(value) for name, (value, _) in _totals(problem, best).items()})
    return PrimaryFigures(scalars, [e.value for e in lows], [e.value for e in highs])
