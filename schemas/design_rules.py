"""The design fields of a case read against its problem: requirements, uncertainty, design
limit and sweep.

These rules need the case as a ``Problem`` (a field path is checked against the layers, the
reaction and boundary kinds and the geometry; a bound takes the dimension of the quantity it
bounds), so they run once the rest of the case is valid. Every error names its path, as the
other case errors do. :func:`design_request` returns what the engine's design runner answers.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Mapping
from typing import Any

from worker.engine.design.paths import (
    FieldPathError,
    FieldRef,
    field_dimension,
    field_domain,
    resolve,
    value_of,
)
from worker.engine.design.propagation_law import input_estimate
from worker.engine.design.request import (
    LAW_OF_PROPAGATION,
    MONTE_CARLO,
    CalibratedInput,
    CalibrationRequest,
    DesignRequest,
    LimitRequest,
    MeasurementSet,
    SweepRequest,
    UncertainInput,
    UncertaintyRequest,
)
from worker.engine.design.requirements import Requirement
from worker.engine.design.sampling import default_block_size
from worker.engine.design.targets import PROBE, quantities
from worker.engine.model import Problem
from worker.engine.units import UnitError, parse_with_basis, si_unit

__all__ = ["DesignRuleError", "design_request"]

_BOUND_KEYS = ("at_least", "at_most", "between")


class DesignRuleError(Exception):
    """The design fields broke rules; ``errors`` lists ``(path, message)``."""

    def __init__(self, errors: list[tuple[str, str]]):
        super().__init__("; ".join(f"{p}: {m}" for p, m in errors))
        self.errors = errors


class _Reader:
    """Converts the loose values of the design fields, collecting errors by path."""

    def __init__(self, basis: str):
        self.basis = basis
        self.errors: list[tuple[str, str]] = []

    def fail(self, path: str, message: str) -> None:
        self.errors.append((path, message))

    def value(self, raw: Any, kind: str | None, path: str) -> float | None:
        """SI value of ``raw`` in dimension ``kind`` (None: a plain number)."""
        if kind is None or kind == "dimensionless":
            if isinstance(raw, float | int) and not isinstance(raw, bool):
                return float(raw)
            if kind is None:
                self.fail(path, f"expected a plain number (the quantity is dimensionless), "
                                f"got {raw!r:.40}")
                return None
        try:
            magnitude, basis = parse_with_basis(raw, kind)
        except UnitError as exc:
            self.fail(path, exc.message)
            return None
        if basis is not None and basis != self.basis:
            self.fail(path, f"uses the {basis} basis ({si_unit(kind, basis)}) but the case is "
                            f"on the {self.basis} basis ({si_unit(kind, self.basis)})")
            return None
        return magnitude

    def unit(self, kind: str | None) -> str:
        if kind is None or kind == "dimensionless":
            return "1"
        return si_unit(kind, self.basis)

    def field(self, problem: Problem, path: str, where: str) -> FieldRef | None:
        try:
            return resolve(problem, path)
        except FieldPathError as exc:
            self.fail(where, exc.message)
            return None


def _layer_index(problem: Problem, name: str) -> int | None:
    for index, layer in enumerate(problem.layers):
        if layer.name == name:
            return index
    return None


def _requirements(items: list[Mapping], problem: Problem, reader: _Reader
                  ) -> tuple[list[Requirement], list[float]]:
    regime = problem.regime.kind
    offered = {name: spec for name, spec in quantities(problem).items() if name != PROBE}
    seen: set[str] = set()
    found: list[Requirement] = []
    times: list[float] = []
    for index, item in enumerate(items):
        path = f"requirements[{index}]"
        rid = item["id"]
        if rid in seen:
            reader.fail(f"{path}.id", f"{rid!r} is used by an earlier requirement: ids are "
                                      "unique in the case")
        seen.add(rid)
        name = item["quantity"]
        spec = offered.get(name)
        if spec is None:
            reader.fail(f"{path}.quantity", f"{name!r} is not a quantity this {regime} case "
                                            f"reports; one of: {', '.join(offered)}")
            continue
        given = [k for k in _BOUND_KEYS if k in item]
        if len(given) != 1:
            reader.fail(path, "exactly one of at_least, at_most, between is required; got "
                              + (", ".join(given) or "none"))
            continue
        layer = layer_name = None
        if "layer" in item:
            if not spec.per_layer:
                reader.fail(f"{path}.layer", f"{name} is not reported per layer; only "
                            + ", ".join(q.quantity for q in offered.values() if q.per_layer)
                            + " take a layer")
                continue
            layer_name = item["layer"]
            layer = _layer_index(problem, layer_name)
            if layer is None:
                reader.fail(f"{path}.layer", f"no layer is named {layer_name!r}; the layers "
                            "are " + ", ".join(repr(ly.name) for ly in problem.layers))
                continue
        wrong_layer = spec.layer_error(problem, layer)
        if wrong_layer is not None:
            reader.fail(f"{path}.layer", wrong_layer)
            continue
        at = item["at"].value if "at" in item else None
        if spec.at_time and at is None:
            reader.fail(f"{path}.at", f"{name} is a series: give the time `at` it is bounded at")
            continue
        if not spec.at_time and at is not None:
            reader.fail(f"{path}.at", f"{name} is one figure of the run, not a series: "
                                      "remove `at`")
            continue
        if at is not None and problem.regime.duration is not None \
                and at > problem.regime.duration:
            reader.fail(f"{path}.at", f"{at!r} s is after the end of the run (duration "
                                      f"{problem.regime.duration!r} s)")
            continue
        kind = spec.dimension
        key = given[0]
        if key == "between":
            low = reader.value(item[key][0], kind, f"{path}.between[0]")
            high = reader.value(item[key][1], kind, f"{path}.between[1]")
            if low is not None and high is not None and not low < high:
                reader.fail(f"{path}.between", "the first value must be below the second")
                continue
        else:
            bound = reader.value(item[key], kind, f"{path}.{key}")
            low, high = (bound, None) if key == "at_least" else (None, bound)
        if low is None and high is None:
            continue
        found.append(Requirement(id=rid, quantity=name, low=low, high=high, layer=layer,
                                 layer_name=layer_name, at=at, source=item.get("source"),
                                 unit=reader.unit(kind)))
        if at is not None:
            times.append(at)
    return found, times


_DISTRIBUTION_PARAMETERS = {
    "normal": ({"sd", "relative_sd"}, "sd or relative_sd"),
    "lognormal": ({"relative_sd"}, "relative_sd (the coefficient of variation)"),
    "uniform": ({"low", "high"}, "low and high"),
    "triangular": ({"low", "mode", "high"}, "low, mode and high"),
}
_PARAMETER_KEYS = ("sd", "relative_sd", "low", "mode", "high")


def _uncertain_input(item: Mapping, path: str, problem: Problem, reader: _Reader
                     ) -> UncertainInput | None:
    ref = reader.field(problem, item["field"], f"{path}.field")
    if ref is None:
        return None
    kind = field_dimension(problem, ref)
    nominal = value_of(problem, ref)
    domain = field_domain(problem, ref)
    distribution = item["distribution"]
    allowed, wording = _DISTRIBUTION_PARAMETERS[distribution]
    given = {k for k in _PARAMETER_KEYS if k in item}
    needed = allowed if distribution != "normal" else allowed & given or allowed
    if distribution == "normal" and len(given & allowed) != 1 or \
            distribution != "normal" and given != allowed or given - allowed:
        reader.fail(path, f"a {distribution} distribution takes {wording}; got "
                          + (", ".join(sorted(given)) or "none"))
        return None
    values: dict[str, float | None] = {}
    for key in needed & given:
        if key == "relative_sd":
            values[key] = float(item[key])
        else:
            values[key] = reader.value(item[key], kind, f"{path}.{key}")
    if any(v is None for v in values.values()):
        return None
    low, mode, high = values.get("low"), values.get("mode"), values.get("high")
    if distribution == "normal" and "relative_sd" in values:
        if nominal == 0.0:
            reader.fail(f"{path}.relative_sd", f"the case's {ref.path} is 0: give sd instead")
            return None
        values = {"sd": abs(nominal) * float(values["relative_sd"] or 0.0)}
    if distribution == "normal" and not (values.get("sd") or 0.0) > 0.0:
        reader.fail(f"{path}.sd", "must be positive")
        return None
    if distribution == "lognormal" and not nominal > 0.0:
        reader.fail(f"{path}.distribution", f"a lognormal needs a positive value; the case's "
                                            f"{ref.path} is {nominal!r}")
        return None
    if low is not None and high is not None:
        if not low < high:
            reader.fail(f"{path}.high", "must be above low")
            return None
        if mode is not None and not low <= mode <= high:
            reader.fail(f"{path}.mode", "must lie between low and high")
            return None
        floor, open_ = domain
        if low < floor or (open_ and low == floor):
            reader.fail(f"{path}.low", f"{ref.path} must be {'>' if open_ else '≥'} {floor:g}")
            return None
    return UncertainInput(field=ref, distribution=distribution, nominal=nominal, domain=domain,
                          sd=values.get("sd"), relative_sd=values.get("relative_sd"),
                          low=low, mode=mode, high=high, unit=reader.unit(kind))


def _uncertainty(block: Mapping, problem: Problem, reader: _Reader) -> UncertaintyRequest | None:
    inputs: list[UncertainInput] = []
    paths: dict[str, int] = {}
    for index, item in enumerate(block["inputs"]):
        path = f"uncertainty.inputs[{index}]"
        found = _uncertain_input(item, path, problem, reader)
        if found is None:
            continue
        if found.field.path in paths:
            reader.fail(f"{path}.field", f"{found.field.path} is already uncertain in "
                                         f"uncertainty.inputs[{paths[found.field.path]}]")
            continue
        paths[found.field.path] = len(inputs)
        inputs.append(found)
    correlations: list[tuple[int, int, float]] = []
    pairs: set[frozenset[int]] = set()
    for index, item in enumerate(block.get("correlations", [])):
        path = f"uncertainty.correlations[{index}].fields"
        ends = []
        for j, name in enumerate(item["fields"]):
            ref = reader.field(problem, name, f"{path}[{j}]")
            if ref is not None and ref.path not in paths:
                reader.fail(f"{path}[{j}]", f"{ref.path} is not among the uncertain inputs")
            elif ref is not None:
                ends.append(paths[ref.path])
        if len(ends) != 2:
            continue
        if ends[0] == ends[1]:
            reader.fail(path, "two different inputs are needed")
            continue
        if frozenset(ends) in pairs:
            reader.fail(path, "this pair is correlated already")
            continue
        pairs.add(frozenset(ends))
        correlations.append((ends[0], ends[1], float(item["coefficient"])))
    coverage = float(block.get("coverage", 0.95))
    method = block.get("method", MONTE_CARLO)
    if method == LAW_OF_PROPAGATION:
        for key in ("seed", "max_trials"):
            if key in block:
                reader.fail(f"uncertainty.{key}", "applies to method monte_carlo only; the law "
                                                  "of propagation draws no trials: remove it")
        for index, found in enumerate(inputs if len(inputs) == len(block["inputs"]) else []):
            try:
                input_estimate(found)
            except ValueError as exc:
                reader.fail(f"uncertainty.inputs[{index}]", str(exc))
    else:
        least = 2 * default_block_size(coverage)
        if int(block.get("max_trials", 1_000_000)) < least:
            reader.fail("uncertainty.max_trials",
                        f"at least {least} trials: two blocks of {least // 2} (JCGM 101:2008 "
                        f"§7.9.4 with coverage {coverage:g}), the fewest that adaptive stopping "
                        "can judge")
    if len(inputs) != len(block["inputs"]):
        return None
    return UncertaintyRequest(
        inputs=tuple(inputs), correlations=tuple(correlations),
        coverage=float(block.get("coverage", 0.95)),
        significant_digits=int(block.get("significant_digits", 2)),
        seed=block.get("seed"), max_trials=int(block.get("max_trials", 1_000_000)),
        method=method)


def _varied(problem: Problem, path: str, where: str, reader: _Reader
            ) -> tuple[FieldRef, str | None] | None:
    ref = reader.field(problem, path, where)
    if ref is None:
        return None
    return ref, field_dimension(problem, ref)


def _in_domain(problem: Problem, ref: FieldRef, value: float, path: str,
               reader: _Reader) -> bool:
    floor, open_ = field_domain(problem, ref)
    if value < floor or (open_ and value == floor):
        reader.fail(path, f"{ref.path} must be {'>' if open_ else '≥'} {floor:g}; got {value!r}")
        return False
    return True


def _limit(block: Mapping, problem: Problem, requirements: list[Requirement],
           reader: _Reader) -> LimitRequest | None:
    varied = _varied(problem, block["vary"], "design_limit.vary", reader)
    if block["requirement"] not in {r.id for r in requirements}:
        reader.fail("design_limit.requirement",
                    f"no requirement has the id {block['requirement']!r}")
        return None
    if varied is None:
        return None
    ref, kind = varied
    low = reader.value(block["range"][0], kind, "design_limit.range[0]")
    high = reader.value(block["range"][1], kind, "design_limit.range[1]")
    if low is None or high is None:
        return None
    if not low < high:
        reader.fail("design_limit.range", "the first value must be below the second")
        return None
    if not _in_domain(problem, ref, low, "design_limit.range[0]", reader):
        return None
    return LimitRequest(field=ref, requirement=block["requirement"], low=low, high=high,
                        unit=reader.unit(kind))


def _sweep(block: Mapping, problem: Problem, reader: _Reader) -> SweepRequest | None:
    varied = _varied(problem, block["vary"], "sweep.vary", reader)
    if varied is None:
        return None
    ref, kind = varied
    values = []
    for index, raw in enumerate(block["values"]):
        value = reader.value(raw, kind, f"sweep.values[{index}]")
        if value is not None and _in_domain(problem, ref, value, f"sweep.values[{index}]",
                                            reader):
            values.append(value)
    if len(values) != len(block["values"]):
        return None
    return SweepRequest(field=ref, values=tuple(values), unit=reader.unit(kind))


def _measurement_target(item: Mapping, path: str, problem: Problem, reader: _Reader
                        ) -> tuple[str, int | None, str | None, int | None] | None:
    """(quantity, layer, layer name, probe) of a measurement set, or None after an error."""
    offered = {name: spec for name, spec in quantities(problem).items() if spec.at_time}
    name = item["quantity"]
    spec = offered.get(name)
    if spec is None:
        reader.fail(f"{path}.quantity", f"{name!r} is not a series this case reports; "
                                        f"measured data can be one of: {', '.join(offered)}")
        return None
    layer = layer_name = None
    if "layer" in item:
        if not spec.per_layer:
            reader.fail(f"{path}.layer", f"{name} is not reported per layer")
            return None
        layer_name = item["layer"]
        layer = _layer_index(problem, layer_name)
        if layer is None:
            reader.fail(f"{path}.layer", f"no layer is named {layer_name!r}; the layers are "
                        + ", ".join(repr(ly.name) for ly in problem.layers))
            return None
    wrong_layer = spec.layer_error(problem, layer)
    if wrong_layer is not None:
        reader.fail(f"{path}.layer", wrong_layer)
        return None
    probe = item.get("probe")
    if (name == PROBE) != (probe is not None):
        reader.fail(f"{path}.probe", f"a probe index (into probes) goes with {PROBE} and "
                                     "only with it")
        return None
    if probe is not None and probe >= len(problem.probes):
        reader.fail(f"{path}.probe", f"the case has {len(problem.probes)} probes (indices "
                                     f"from 0); got {probe}")
        return None
    return name, layer, layer_name, probe


def _unit_factor(item: Mapping, kind: str, path: str, reader: _Reader) -> tuple[float, str]:
    """The SI value of one of the set's units, and the unit as written."""
    unit = item.get("unit")
    if kind == "dimensionless":
        if unit in (None, "1"):
            return 1.0, "1"
        if unit == "%":
            return 0.01, "%"
        reader.fail(f"{path}.unit", f"the quantity is dimensionless: give plain numbers "
                                    f"(no unit, '1' or '%'), got {unit!r}")
        return math.nan, unit
    if unit is None:
        reader.fail(f"{path}.unit", f"the quantity has the dimension {kind}: give the unit of "
                                    f"the values (e.g. {si_unit(kind, reader.basis)})")
        return math.nan, ""
    try:
        factor, basis = parse_with_basis(f"1 {unit}", kind)
    except UnitError as exc:
        reader.fail(f"{path}.unit", f"{unit!r} is not a unit of this quantity "
                                    f"({kind}, e.g. {si_unit(kind, reader.basis)}): "
                                    f"{exc.message}")
        return math.nan, unit
    if basis is not None and basis != reader.basis:
        reader.fail(f"{path}.unit", f"{unit!r} is on the {basis} basis but the case is on the "
                                    f"{reader.basis} basis ({si_unit(kind, reader.basis)})")
        return math.nan, unit
    return factor, unit


def _measurement(item: Mapping, path: str, problem: Problem, reader: _Reader
                 ) -> MeasurementSet | None:
    target = _measurement_target(item, path, problem, reader)
    if target is None:
        return None
    name, layer, layer_name, probe = target
    kind = quantities(problem)[name].dimension
    factor, given_unit = _unit_factor(item, kind, path, reader)
    times = [t.value for t in item["times"]]
    values = list(item["values"])
    if len(values) != len(times):
        reader.fail(f"{path}.values", f"one value per time: {len(times)} times, "
                                      f"{len(values)} values")
        return None
    duration = problem.regime.duration or 0.0
    late = [i for i, t in enumerate(times) if t > duration]
    if late:
        reader.fail(f"{path}.times[{late[0]}]", f"{times[late[0]]!r} s is after the end of "
                                                f"the run (duration {duration!r} s)")
        return None
    given = [k for k in ("standard_uncertainty", "relative_uncertainty") if k in item]
    if len(given) != 1:
        reader.fail(path, "exactly one of standard_uncertainty (one per value) and "
                          "relative_uncertainty is required; got " + (", ".join(given) or "none"))
        return None
    if given[0] == "standard_uncertainty":
        u = list(item["standard_uncertainty"])
        if len(u) != len(values):
            reader.fail(f"{path}.standard_uncertainty", f"one per value: {len(values)} values, "
                                                        f"{len(u)} uncertainties")
            return None
    else:
        u = [abs(v) * float(item["relative_uncertainty"]) for v in values]
        zero = [i for i, x in enumerate(u) if not x > 0.0]
        if zero:
            reader.fail(f"{path}.relative_uncertainty",
                        f"gives a zero uncertainty for the value at times[{zero[0]}] (0): "
                        "give standard_uncertainty instead")
            return None
    if not math.isfinite(factor):
        return None
    unit = "1" if kind == "dimensionless" else si_unit(kind, reader.basis)
    return MeasurementSet(
        id=item["id"], quantity=name, times=tuple(times),
        values=tuple(v * factor for v in values),
        standard_uncertainty=tuple(x * factor for x in u), use=item["use"], unit=unit,
        given_unit=given_unit, layer=layer, layer_name=layer_name, probe=probe)


def _measurements(items: list[Mapping], problem: Problem, reader: _Reader
                  ) -> list[MeasurementSet]:
    if items and problem.regime.kind != "transient":
        reader.fail("measurements", "measured data are series over time: the case's regime "
                                    "must be transient")
        return []
    found: list[MeasurementSet] = []
    seen: set[str] = set()
    for index, item in enumerate(items):
        path = f"measurements[{index}]"
        if item["id"] in seen:
            reader.fail(f"{path}.id", f"{item['id']!r} is used by an earlier set: ids are "
                                      "unique among the measurement sets")
            continue
        seen.add(item["id"])
        measurement = _measurement(item, path, problem, reader)
        if measurement is not None:
            found.append(measurement)
    return found


def _reused_points(items: list[Mapping], measurements: list[MeasurementSet],
                   reader: _Reader) -> None:
    """A validation point that repeats a calibration point (same figure, time and value) is
    refused: data used for calibration never count as validation."""
    if len(measurements) != len(items):
        return  # a set was refused already; its indices no longer match
    fitted = {(t.key, value): m.id for m in measurements if m.for_calibration
              for t, value in zip(m.targets(), m.values, strict=True)}
    for index, m in enumerate(measurements):
        if m.for_calibration:
            continue
        for j, (t, value) in enumerate(zip(m.targets(), m.values, strict=True)):
            if (t.key, value) in fitted:
                reader.fail(f"measurements[{index}].values[{j}]",
                            f"the same point is in the calibration set "
                            f"{fitted[(t.key, value)]!r}: data used for calibration never "
                            "count as validation")


def _calibration(data: Mapping, problem: Problem, measurements: list[MeasurementSet],
                 reader: _Reader) -> CalibrationRequest | None:
    block = data.get("calibration")
    fitted_sets = [i for i, item in enumerate(data.get("measurements", []))
                   if item.get("use") == "calibration"]
    if block is None:
        if fitted_sets:
            reader.fail(f"measurements[{fitted_sets[0]}].use",
                        "calibration data need a calibration block naming the inputs to fit")
        return None
    if not fitted_sets:
        reader.fail("calibration", "no measurement set has use 'calibration': nothing to fit")
        return None
    parameters: list[CalibratedInput] = []
    seen: set[str] = set()
    for index, item in enumerate(block["parameters"]):
        path = f"calibration.parameters[{index}]"
        varied = _varied(problem, item["field"], f"{path}.field", reader)
        if varied is None:
            continue
        ref, kind = varied
        if ref.path in seen:
            reader.fail(f"{path}.field", f"{ref.path} is fitted already")
            continue
        seen.add(ref.path)
        low = reader.value(item["bounds"][0], kind, f"{path}.bounds[0]")
        high = reader.value(item["bounds"][1], kind, f"{path}.bounds[1]")
        if low is None or high is None:
            continue
        if not low < high:
            reader.fail(f"{path}.bounds", "the first value must be below the second")
            continue
        if not _in_domain(problem, ref, low, f"{path}.bounds[0]", reader):
            continue
        log = item.get("scale", "linear") == "log"
        if log and not low > 0.0:
            reader.fail(f"{path}.scale", "a log scale needs positive bounds")
            continue
        start = value_of(problem, ref)
        if not low <= start <= high:
            reader.fail(f"{path}.bounds", f"the case's value of {ref.path} ({start:g} "
                        f"{reader.unit(kind)}) starts the fit: it must lie within the bounds")
            continue
        parameters.append(CalibratedInput(field=ref, low=low, high=high, log=log,
                                          unit=reader.unit(kind)))
    if len(parameters) != len(block["parameters"]):
        return None
    points = sum(len(m.times) for m in measurements if m.for_calibration)
    if len(measurements) == len(data.get("measurements", [])) and points <= len(parameters):
        reader.fail("calibration.parameters", f"{len(parameters)} inputs need more than "
                    f"{len(parameters)} calibration points (at least one degree of freedom); "
                    f"the calibration sets hold {points}")
        return None
    elsewhere = [("uncertainty.inputs", [i.get("field") for i in
                                         (data.get("uncertainty") or {}).get("inputs", [])]),
                 ("sweep.vary", [(data.get("sweep") or {}).get("vary")]),
                 ("design_limit.vary", [(data.get("design_limit") or {}).get("vary")])]
    for where, paths in elsewhere:
        for path in paths:
            if path is None:
                continue
            try:
                other = resolve(problem, path).path
            except FieldPathError:
                continue
            if other in seen:
                reader.fail(where, f"{other} is calibrated: its value and uncertainty come "
                                   "from the fit, so it cannot also be varied here")
    return CalibrationRequest(parameters=tuple(parameters))


def _finite(value: float | None) -> bool:
    return value is not None and math.isfinite(value)


def design_request(data: Mapping, problem: Problem, basis: str) -> DesignRequest:
    """The design fields of a loaded, otherwise valid case, checked against its problem.

    Raises
    ------
    DesignRuleError
        Listing every ``(path, message)`` found.
    """
    reader = _Reader(basis)
    requirements, times = _requirements(list(data.get("requirements", [])), problem, reader)
    uncertainty = _uncertainty(data["uncertainty"], problem, reader) \
        if "uncertainty" in data else None
    limit = _limit(data["design_limit"], problem, requirements, reader) \
        if "design_limit" in data else None
    sweep = _sweep(data["sweep"], problem, reader) if "sweep" in data else None
    measurements = _measurements(list(data.get("measurements", [])), problem, reader)
    calibration = _calibration(data, problem, measurements, reader)
    _reused_points(list(data.get("measurements", [])), measurements, reader)
    if reader.errors:
        raise DesignRuleError(reader.errors)
    for measurement in measurements:
        times.extend(measurement.times)
    return DesignRequest(requirements=tuple(requirements), uncertainty=uncertainty,
                         limit=limit, sweep=sweep, measurements=tuple(measurements),
                         calibration=calibration,
                         requirement_times=tuple(sorted(set(times))))


def rule_errors(errors: list[tuple[str, str]]) -> Iterator[dict]:
    """The errors as case-error items."""
    for path, message in errors:
        yield {"path": path, "message": message}
