"""The result document (check record): marshmallow schemas.

The top level is closed: an unknown key is an error. Quantity entries, series and provenance
are open, since solvers and the check module may add keys (``diagnostics``, extra series).
Every number is a JSON number or ``null`` (where a figure does not exist, e.g. the Thiele modulus
of a layer without reaction): NaN and infinity are not JSON and are refused.
"""

from __future__ import annotations

import math
from enum import StrEnum
from typing import Any

from marshmallow import (
    INCLUDE,
    Schema,
    ValidationError,
    fields,
    post_dump,
    validate,
    validates_schema,
)

from schemas.case import PlainInteger, PlainNumber, StrictSchema, WholeMatch
from schemas.credibility import CredibilitySchema


class RunStatus(StrEnum):
    """The one enumeration of a run's states, as the record and the store spell them."""

    QUEUED = "queued"
    RUNNING = "running"
    SUCCEEDED = "succeeded"
    FAILED = "failed"


class Verdict(StrEnum):
    """The calculation's verdict: every check passed, or one failed."""

    PASS = "pass"
    FAIL = "fail"


class Decision(StrEnum):
    """A reviewer's decision on a succeeded run (the record's sign-off)."""

    APPROVED = "approved"
    REJECTED = "rejected"


STATUSES = tuple(s.value for s in RunStatus)
#: Statuses of one requirement and of the design as a whole (``none_stated``: no requirement).
REQUIREMENT_STATUSES = ("met", "not_met", "indeterminate")
DESIGN_STATUSES = (*REQUIREMENT_STATUSES, "none_stated")
VERDICTS = tuple(v.value for v in Verdict)
METHOD_ROLES = ("primary", "independent", "bracket", "reference")
SHA256_PATTERN = r"^[0-9a-f]{64}$"


def _is_number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)


class NumberOrList(fields.Field):
    """A finite number, ``null``, or a list of finite numbers and nulls."""

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> Any:
        if value is None or _is_number(value):
            return value
        if isinstance(value, list) and all(v is None or _is_number(v) for v in value):
            return list(value)
        raise ValidationError("must be a finite number, null, or a list of those")

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        return value

    def json_schema(self) -> dict:
        scalar = {"type": ["number", "null"]}
        return {"anyOf": [scalar, {"type": "array", "items": scalar}]}


class NumbersOrRows(fields.Field):
    """A list of finite numbers (or nulls), or a list of such lists (one row per time)."""

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> Any:
        def row_ok(row: Any) -> bool:
            return isinstance(row, list) and all(v is None or _is_number(v) for v in row)

        if row_ok(value) or (isinstance(value, list) and all(row_ok(r) for r in value)):
            return value
        raise ValidationError("must be a list of finite numbers, or a list of such rows")

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        return value

    def json_schema(self) -> dict:
        row = {"type": "array", "items": {"type": ["number", "null"]}}
        return {"anyOf": [row, {"type": "array", "items": row}]}


class StrictBoolean(fields.Boolean):
    """``true`` or ``false`` only."""

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> bool:
        if value is True or value is False:
            return value
        raise self.make_error("invalid", input=value)

    def json_schema(self) -> dict:
        return {"type": "boolean"}


def _numbers(**kwargs: Any) -> fields.List:
    return fields.List(PlainNumber(allow_none=True), **kwargs)


class OpenSchema(Schema):
    """Takes keys it does not know (solvers may add their own), and gives them back on dump."""

    class Meta:
        unknown = INCLUDE

    @post_dump(pass_original=True)
    def _keep_unknown(self, data: dict, original: Any, **kwargs: Any) -> dict:
        if isinstance(original, dict):
            for key, value in original.items():
                if key not in self.fields:
                    data[key] = value
        return data


class QuantitySchema(OpenSchema):
    """One reported figure in SI."""

    value = NumberOrList(required=True, allow_none=True)
    unit = fields.String(required=True)
    uncertainty = NumberOrList(
        allow_none=True,
        metadata={"description": "numerical uncertainty of the value, same unit: the larger of "
                  "the disagreement of the routes that produced it and the grid band where "
                  "the value is numerical"})
    routes = fields.List(fields.String(), metadata={
        "description": "the independent routes (methods, or readings of the case) compared"})
    verified_by = fields.String(metadata={"description": "the check that compared the routes"})


class AxisUnitsSchema(OpenSchema):
    """Units of a profile's axes."""

    position = fields.String(required=True)
    concentration = fields.String(required=True)


class ProfileSchema(OpenSchema):
    """Concentration against position (material side), with the layer of each point."""

    position = _numbers(required=True)
    concentration = NumbersOrRows(required=True)
    layer = fields.List(PlainInteger())
    units = fields.Nested(AxisUnitsSchema, required=True)
    routes = fields.List(fields.String(), metadata={
        "description": "the independent routes that produced and compared it"})
    verified_by = fields.String(metadata={"description": "the check that compared the routes"})


class ValuesSchema(OpenSchema):
    """A series of values aligned with ``series.time``."""

    values = _numbers(required=True)
    unit = fields.String(required=True)
    uncertainty = _numbers(metadata={
        "description": "numerical uncertainty at each time, same unit: the largest difference "
                       "between the primary route and another"})
    routes = fields.List(fields.String(), metadata={
        "description": "the independent routes that produced and compared it"})
    verified_by = fields.String(metadata={"description": "the check that compared the routes"})


class MinimumSchema(ValuesSchema):
    """The body's true minimum concentration at each requested time (a bounded search on the
    continuous solution, not the smallest sampled point), where it lies and its layer."""

    position = _numbers(metadata={"description": "where the minimum lies, m"})
    layer = fields.List(PlainInteger(), metadata={"description": "the layer it lies in"})
    uncertainty = _numbers(metadata={
        "description": "numerical uncertainty of each value, same unit: the larger of the "
                       "routes' disagreement and the primary's grid band; null where no "
                       "second route was compared"})


class LayerMinimaSchema(OpenSchema):
    """Each layer's true minimum at each requested time: one row per time (aligned with
    ``series.time``), one value per layer (in the order of ``layers``)."""

    values = NumbersOrRows(required=True)
    unit = fields.String(required=True)
    layers = fields.List(fields.String(), metadata={"description": "the layers' names"})
    uncertainty = NumbersOrRows(metadata={
        "description": "numerical uncertainty of each value, rows as ``values``"})
    routes = fields.List(fields.String(), metadata={
        "description": "the independent routes that produced and compared it"})
    verified_by = fields.String(metadata={"description": "the check that compared the routes"})


class LayerRowsSchema(OpenSchema):
    """A value per listed layer at each requested time: one row per time (aligned with
    ``series.time``), one value (or null) per layer named in ``layers``."""

    values = NumbersOrRows(required=True)
    unit = fields.String(required=True)
    layers = fields.List(fields.String(), required=True,
                         metadata={"description": "the layers the columns belong to"})
    uncertainty = NumbersOrRows(metadata={
        "description": "numerical uncertainty of each value, rows as ``values``"})
    routes = fields.List(fields.String(), metadata={
        "description": "the independent routes that produced and compared it"})
    verified_by = fields.String(metadata={"description": "the check that compared the routes"})


class AxialSchema(OpenSchema):
    """Profiles along a lumen with flow (a ``flow`` inner boundary), from the inlet."""

    position = _numbers(required=True, metadata={"description": "distance from the inlet, m"})
    mixing_cup = _numbers(required=True, metadata={
        "description": "flow-weighted mean concentration of the fluid"})
    wall = _numbers(required=True, metadata={
        "description": "fluid concentration at the lumen wall"})
    wall_flux = _numbers(required=True, metadata={
        "description": "flux density out of the lumen into the layers"})
    concentration_min = _numbers(required=True, metadata={
        "description": "lowest concentration at each position, fluid and layers (material "
                       "side)"})
    units = fields.Dict(keys=fields.String(), values=fields.String(), required=True)


class AxialFieldSchema(OpenSchema):
    """Concentration over (position along the lumen, radius): the fluid's cells, then the
    layers (material side), at some of the lumen's axial positions."""

    position = _numbers(required=True, metadata={"description": "distance from the inlet, m"})
    radius = _numbers(required=True, metadata={
        "description": "radii, m: the fluid's cell centres, then the layers' points"})
    fluid_cells = PlainInteger(required=True, metadata={
        "description": "how many of the radii are the fluid's"})
    concentration = fields.List(fields.List(PlainNumber()), required=True, metadata={
        "description": "one row per position, one value per radius"})
    units = fields.Dict(keys=fields.String(), values=fields.String(), required=True)


class SeriesSchema(OpenSchema):
    """Profiles and, for transient cases, time series."""

    profile = fields.Nested(ProfileSchema)
    probes = fields.Nested(ProfileSchema)
    time = fields.Nested(ValuesSchema)
    released_inner = fields.Nested(ValuesSchema)
    released_outer = fields.Nested(ValuesSchema)
    release_fraction = fields.Nested(ValuesSchema, metadata={
        "description": "released / initial load; only for a body that holds an initial load "
                       "and that no face feeds"})
    uptake = fields.Nested(ValuesSchema, metadata={
        "description": "net amount taken in through the faces, -(released_inner + "
                       "released_outer); instead of release_fraction where a face feeds the "
                       "body or it holds no initial load"})
    remaining = fields.Nested(ValuesSchema)
    concentration_min = fields.Nested(MinimumSchema)
    axial_field = fields.Nested(AxialFieldSchema, metadata={
        "description": "the picture of a lumen case: concentration over position and radius"})
    axial = fields.Nested(AxialSchema, metadata={
        "description": "along the lumen of a flow case: mixing cup, wall, wall flux, minimum"})
    concentration_min_layers = fields.Nested(LayerMinimaSchema)
    front_position = fields.Nested(LayerRowsSchema, metadata={
        "description": "position (m) of the front of each layer loaded above its solubility: "
                       "the edge of its undissolved region that has left its starting layer "
                       "edge (the outer one where both have moved); null once that layer's "
                       "undissolved solute is gone"})
    front_position_inner = fields.Nested(LayerRowsSchema, metadata={
        "description": "the inner edge of the undissolved region where both edges have moved"})
    compartment_inner = fields.Nested(ValuesSchema, metadata={
        "description": "concentration of the stirred compartment at the inner face"})
    compartment_outer = fields.Nested(ValuesSchema, metadata={
        "description": "concentration of the stirred compartment at the outer face"})


class MethodSchema(StrictSchema):
    """A solution method used for the record and its published source."""

    noun = "a method"
    role = fields.String(required=True, validate=validate.OneOf(METHOD_ROLES))
    name = fields.String(required=True)
    reference = fields.String(required=True)


class CheckSchema(StrictSchema):
    """One check: its value, its limit and whether it passed."""

    noun = "a check"
    name = fields.String(required=True)
    value = PlainNumber(required=True, allow_none=True)
    limit = PlainNumber(required=True, allow_none=True)
    passed = StrictBoolean(required=True)
    detail = fields.String(required=True)


class ProvenanceSchema(OpenSchema):
    """What produced the record, where and when."""

    engine_version = fields.String()
    schema_version = PlainInteger()
    python = fields.String()
    numpy = fields.String()
    scipy = fields.String()
    pint = fields.String()
    platform = fields.String()
    worker = fields.String(allow_none=True)
    started_at = fields.String(allow_none=True)
    finished_at = fields.String(allow_none=True)
    case_sha256 = fields.String(validate=WholeMatch(SHA256_PATTERN))


class RequirementResultSchema(OpenSchema):
    """One requirement judged on the record's figures (SI). ``margin`` > 0 means met."""

    id = fields.String(required=True)
    quantity = fields.String(required=True)
    layer = fields.String()
    at = PlainNumber(metadata={"description": "time of a series requirement, s"})
    value = PlainNumber(required=True, allow_none=True)
    bound = NumberOrList(required=True, allow_none=True)
    margin = PlainNumber(required=True, allow_none=True)
    relative_margin = PlainNumber(required=True, allow_none=True)
    numerical_uncertainty = PlainNumber(required=True, allow_none=True)
    status = fields.String(required=True, validate=validate.OneOf(REQUIREMENT_STATUSES))
    unit = fields.String()
    source = fields.String()
    reason = fields.String()
    beyond = PlainNumber(metadata={"description": "an event time not reached: it exceeds this "
                                                  "duration, s"})


class DesignSchema(OpenSchema):
    """The design verdict, beside the calculation's ``verdict``: are the requirements met."""

    status = fields.String(required=True, validate=validate.OneOf(DESIGN_STATUSES))
    requirements = fields.List(fields.Nested(RequirementResultSchema), required=True)


class CoverageSchema(OpenSchema):
    """One figure's distribution under the input uncertainty (SI)."""

    mean = PlainNumber(required=True, allow_none=True)
    standard_uncertainty = PlainNumber(required=True, allow_none=True)
    interval = _numbers(required=True, metadata={
        "description": "probabilistically symmetric coverage interval [low, high]"})
    coverage = PlainNumber(required=True)
    unit = fields.String()


class ProbabilityMetSchema(OpenSchema):
    """The probability that a requirement is met under the input uncertainty."""

    probability_met = PlainNumber(required=True, allow_none=True)
    standard_error = PlainNumber(required=True, allow_none=True)


class SubsetVerificationSchema(OpenSchema):
    """The trials checked in full: worst for each requirement, the median, random ones."""

    trials_checked = PlainInteger(required=True)
    all_passed = StrictBoolean(required=True)
    largest_numerical_uncertainty = fields.Dict(keys=fields.String(), values=PlainNumber())
    numerical_small_against_spread = StrictBoolean()


class UncertaintyResultSchema(OpenSchema):
    """Input uncertainty propagated by Monte Carlo (JCGM 101:2008) or, with ``propagation``
    ``law_of_propagation``, by the law of propagation of uncertainty (JCGM 100:2008)."""

    propagation = fields.String(metadata={
        "description": "monte_carlo or law_of_propagation: the case's uncertainty.method"})
    reference = fields.String(metadata={"description": "the standard and clauses applied"})
    evaluations = PlainInteger(metadata={
        "description": "law of propagation: model evaluations, 2k + 1 for k inputs"})
    coverage_factor = PlainNumber(metadata={
        "description": "law of propagation: k of U = k u_c, from the normal distribution"})
    warnings = fields.List(fields.String(), metadata={
        "description": "law of propagation: a curvature term that is not negligible, a figure "
                       "not propagated, coefficients not resolved above the solver's error"})
    trials = PlainInteger()
    seed = PlainInteger()
    sampler = fields.String()
    converged = StrictBoolean()
    quantities = fields.Dict(keys=fields.String(), values=fields.Nested(CoverageSchema))
    requirements = fields.Dict(keys=fields.String(), values=fields.Nested(ProbabilityMetSchema))
    sensitivity = fields.Dict(keys=fields.String(), values=fields.Dict(), metadata={
        "description": "per figure, per input field: elasticity, first_index, total_index"})
    verification = fields.Nested(SubsetVerificationSchema)
    error = fields.String(metadata={"description": "why the run could not be made"})


class DesignLimitResultSchema(OpenSchema):
    """The value of one input at which a requirement's margin is zero (SI)."""

    vary = fields.String()
    value = PlainNumber(allow_none=True)
    unit = fields.String()
    requirement = fields.String()
    met_side = fields.String(allow_none=True, validate=validate.OneOf(["below", "above"]))
    bracket = _numbers()
    verdict = fields.String(allow_none=True, validate=validate.OneOf(VERDICTS))
    reason = fields.String()
    error = fields.String()


class SweepResultSchema(OpenSchema):
    """Full checks at several values of one input (SI)."""

    vary = fields.String()
    unit = fields.String()
    values = _numbers()
    quantities = fields.Dict(keys=fields.String(), values=_numbers())
    requirements = fields.Dict(keys=fields.String(), values=fields.List(fields.String()))
    verdicts = fields.List(fields.String(validate=validate.OneOf(VERDICTS)))
    error = fields.String()


class FittedInputSchema(OpenSchema):
    """One input fitted to the calibration data (SI)."""

    field = fields.String(required=True)
    estimate = PlainNumber(required=True, allow_none=True)
    unit = fields.String()
    standard_error = PlainNumber(allow_none=True)
    interval = fields.List(PlainNumber(allow_none=True), metadata={
        "description": "the confidence interval [low, high] (interval_method says how)"})
    interval_method = fields.String()


class CalibrationResultSchema(OpenSchema):
    """Inputs fitted by weighted least squares to the measurement sets marked calibration;
    the record's figures are those of the case with the estimates."""

    parameters = fields.List(fields.Nested(FittedInputSchema))
    correlation = fields.List(fields.List(PlainNumber(allow_none=True)))
    chi_square = PlainNumber(allow_none=True)
    degrees_of_freedom = PlainInteger()
    residuals = fields.List(fields.Dict())
    warnings = fields.List(fields.String())
    fitted_inputs = fields.List(fields.String())
    error = fields.String()


class ValidationPointSchema(OpenSchema):
    """One comparison of simulation and measurement (ASME V&V 20-2009), SI."""

    time = PlainNumber(required=True)
    simulated = PlainNumber(required=True, allow_none=True)
    measured = PlainNumber(required=True)
    comparison_error = PlainNumber(required=True, allow_none=True)
    u_num = PlainNumber(allow_none=True)
    u_input = PlainNumber(allow_none=True)
    u_D = PlainNumber(allow_none=True)
    u_val = PlainNumber(allow_none=True)


class ValidationSetSchema(OpenSchema):
    """One validation set's comparison."""

    id = fields.String(required=True)
    quantity = fields.String()
    unit = fields.String()
    points = fields.List(fields.Nested(ValidationPointSchema))
    agrees = StrictBoolean()


class ValidationResultSchema(OpenSchema):
    """Simulation against the validation data (ASME V&V 20-2009)."""

    coverage_factor = PlainNumber()
    sets = fields.List(fields.Nested(ValidationSetSchema))
    agrees = StrictBoolean()
    error = fields.String()


class DeviationSchema(StrictSchema):
    """A default limit the case loosens: the check, its default and the case's value."""

    noun = "a deviation"
    check = fields.String(required=True)
    default = PlainNumber(required=True)
    value = PlainNumber(required=True)


class ResultSchema(StrictSchema):
    """A check record: figures, checks, warnings and provenance of one run of one case."""

    noun = "a result document"
    run_id = fields.String(allow_none=True)
    case_id = fields.String(allow_none=True)
    case_sha256 = fields.String(required=True, validate=WholeMatch(SHA256_PATTERN))
    status = fields.String(required=True, validate=validate.OneOf(STATUSES))
    verdict = fields.String(allow_none=True, validate=validate.OneOf(VERDICTS))
    error = fields.String(allow_none=True)
    quantities = fields.Dict(keys=fields.String(), values=fields.Nested(QuantitySchema))
    series = fields.Nested(SeriesSchema)
    methods = fields.List(fields.Nested(MethodSchema))
    checks = fields.List(fields.Nested(CheckSchema))
    warnings = fields.List(fields.String())
    provenance = fields.Nested(ProvenanceSchema)
    design = fields.Nested(DesignSchema)
    uncertainty = fields.Nested(UncertaintyResultSchema)
    design_limit = fields.Nested(DesignLimitResultSchema)
    sweep = fields.Nested(SweepResultSchema)
    calibration = fields.Nested(CalibrationResultSchema)
    validation = fields.Nested(ValidationResultSchema)
    credibility = fields.Nested(CredibilitySchema)
    inputs = fields.Dict()
    caution = fields.String()
    deviations = fields.List(fields.Nested(DeviationSchema), metadata={
        "description": "default limits the case loosens (its tolerances above the defaults); "
                       "approving such a record needs a justification"})

    #: The status rules below, for the JSON Schema export.
    json_schema_extra = {
        "allOf": [
            {
                "if": {"properties": {"status": {"const": RunStatus.SUCCEEDED.value}},
                       "required": ["status"]},
                "then": {
                    "required": ["verdict", "quantities", "checks"],
                    "properties": {"verdict": {"enum": list(VERDICTS)}},
                },
            },
            {
                "if": {"properties": {"status": {"const": RunStatus.FAILED.value}},
                       "required": ["status"]},
                "then": {"required": ["error"], "properties": {"error": {"type": "string"}}},
            },
        ]
    }

    @validates_schema
    def _status_rules(self, data: dict, **kwargs: Any) -> None:
        errors: dict[str, list[str]] = {}
        if data.get("status") == RunStatus.SUCCEEDED:
            if data.get("verdict") is None:
                errors["verdict"] = ["a succeeded run has a verdict, pass or fail"]
            for key in ("quantities", "checks"):
                if key not in data:
                    errors[key] = [f"a succeeded run reports its {key}"]
        if data.get("status") == RunStatus.FAILED and not isinstance(data.get("error"), str):
            errors["error"] = ["a failed run says why in 'error'"]
        if errors:
            raise ValidationError(errors)


_RESULT_SCHEMA = ResultSchema()


def validate_result(doc: Any) -> dict:
    """Check a result document; raises ``marshmallow.ValidationError`` listing every problem."""
    if not isinstance(doc, dict):
        raise ValidationError({"_schema": ["a result document is a JSON object"]})
    return _RESULT_SCHEMA.load(doc)


__all__ = ["ResultSchema", "validate_result"]
