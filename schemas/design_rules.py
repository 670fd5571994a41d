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
from worker.engine.design.request import (
    DesignRequest,
    LimitRequest,
    SweepRequest,
    UncertainInput,
    UncertaintyRequest,
)
from worker.engine.design.requirements import Requirement
from worker.engine.design.sampling import default_block_size
from worker.engine.design.targets import quantities
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
    offered = quantities(problem)
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
    least = 2 * default_block_size(coverage)
    if int(block.get("max_trials", 1_000_000)) < least:
        reader.fail("uncertainty.max_trials",
                    f"at least {least} trials: two blocks of {least // 2} (JCGM 101:2008 §7.9.4 "
                    f"with coverage {coverage:g}), the fewest that adaptive stopping can judge")
    if len(inputs) != len(block["inputs"]):
        return None
    return UncertaintyRequest(
        inputs=tuple(inputs), correlations=tuple(correlations),
        coverage=float(block.get("coverage", 0.95)),
        significant_digits=int(block.get("significant_digits", 2)),
        seed=block.get("seed"), max_trials=int(block.get("max_trials", 1_000_000)))


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
    if reader.errors:
        raise DesignRuleError(reader.errors)
    return DesignRequest(requirements=tuple(requirements), uncertainty=uncertainty,
                         limit=limit, sweep=sweep,
                         requirement_times=tuple(sorted(set(times))))


def rule_errors(errors: list[tuple[str, str]]) -> Iterator[dict]:
    """The errors as case-error items."""
    for path, message in errors:
        yield {"path": path, "message": message}
