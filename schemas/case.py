"""The case document, schema version 1: marshmallow schemas and the cross-field rules.

Field-level rules (types, required fields, units and dimensions, signs, lengths, unknown keys)
live on the fields below; rules that tie several fields together are in :func:`case_rule_errors`.
Both sets are reported together, every error with its path (``layers[1].reaction.vmax``).

Dimensional values load into :class:`SIValue` (SI magnitude, kind, basis); building the solver's
``Problem`` and the normalised document from the loaded data is :mod:`schemas.build`'s job.

A bare number is accepted for one dimensional field only: ``inner`` may be given as ``0`` (the
centre of a solid cylinder or sphere, or a slab starting at x = 0), because a zero length needs
no unit. Every other dimensional value needs its unit.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass
from typing import Any, cast

from marshmallow import RAISE, Schema, ValidationError, fields, validate

from worker.engine.boundaries import BOUNDARIES, SYMMETRY, BoundaryKind
from worker.engine.design.request import MONTE_CARLO, PROPAGATION_METHODS
from worker.engine.design.targets import COMPARTMENT, FLOW
from worker.engine.parameters import Parameter
from worker.engine.reactions import REACTIONS, ReactionKind
from worker.engine.units import (
    KINDS,
    MAX_QUANTITY_STRING_LENGTH,
    MAX_UNIT_LENGTH,
    QUANTITY_STRING_PATTERN,
    UnitError,
    parse_with_basis,
    si_unit,
)

SCHEMA_VERSION = 1
GEOMETRIES = ("slab", "cylinder", "sphere")
RADIAL_GEOMETRIES = ("cylinder", "sphere")

#: Limits of a case document.
MAX_TITLE_LENGTH = 200
MAX_REFERENCE_LENGTH = 500
MAX_TAGS = 20
MAX_TAG_LENGTH = 64
TAG_PATTERN = r"^[A-Za-z0-9._-]+$"
MAX_LAYERS = 20
MAX_LAYER_NAME_LENGTH = 100
MAX_PROBES = 200
MAX_TIMES = 500

#: Checks whose limits a case may override in ``tolerances``; a key is a check name, optionally
#: followed by ``.<quantity>`` (``cross_check.flux_outer``).
CHECK_NAMES = (
    "inputs",
    "cross_check",
    "mass_balance",
    "boundary_residual",
    "interface_residual",
    "gci",
    "non_negativity",
    "bracket",
    "convergence",
    "compartment",
)
#: Quantity names include digits (``t50``), so the part after the dot may hold them.
TOLERANCE_KEY_PATTERN = r"^[a-z_]+(\.[a-z0-9_]+)?$"
_TOLERANCE_KEY_RE = re.compile(TOLERANCE_KEY_PATTERN)


def portable_end(pattern: str) -> str:
    """Make a final ``$`` mean end of string under both Python's and ECMA-262's rules.

    Python's ``$`` (and so the ``jsonschema`` library's) also matches before a final newline;
    the negative look-ahead ``(?![\\s\\S])`` after it rules that out in both dialects.
    """
    return pattern + r"(?![\s\S])" if pattern.endswith("$") else pattern


class WholeMatch(validate.Regexp):
    """``validate.Regexp`` that must match the whole string.

    Python's ``$`` also matches before a final newline, JSON Schema's (ECMA-262) does not; a full
    match makes both read ``^...$`` the same way.
    """

    @property
    def pattern_text(self) -> str:
        """The regular expression's text (a ``WholeMatch`` is built from a str)."""
        pattern = self.regex.pattern
        if not isinstance(pattern, str):
            raise TypeError(f"WholeMatch: expected a str pattern, got {pattern!r}")
        return pattern

    def __call__(self, value: Any) -> Any:
        pattern = cast("re.Pattern[str]", self.regex)  # built from a str
        if not isinstance(value, str) or pattern.fullmatch(value) is None:
            raise ValidationError(self._format_error(value))
        return value


@dataclass(frozen=True)
class SIValue:
    """A loaded dimensional value: ``value`` in the SI unit of ``kind`` on ``basis``."""

    value: float
    kind: str
    basis: str | None = None


def _describe(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


# --------------------------------------------------------------------------------------- fields


class _CheckedInDeserialize(fields.Field):
    """A field whose rules all run in ``_deserialize``: validation adds nothing unless
    validators were given (marshmallow builds a combined validator on every call)."""

    def _validate(self, value: Any) -> None:
        if self.validators:
            super()._validate(value)


class Quantity(_CheckedInDeserialize):
    """A dimensional value, ``"<number> <unit>"`` or ``{"value": number, "unit": str}``.

    Parameters
    ----------
    kind : str
        A key of ``worker.engine.units.KINDS``: the dimension expected.
    minimum : float, optional
        Smallest SI value allowed; ``exclusive`` makes it a strict bound.
    bare_zero : bool
        Accept the plain number 0 (used for ``inner`` only).
    """

    def __init__(
        self,
        kind: str,
        *,
        minimum: float | None = None,
        exclusive: bool = False,
        bare_zero: bool = False,
        **kwargs: Any,
    ) -> None:
        super().__init__(**kwargs)
        if kind not in KINDS:
            raise ValueError(f"unknown quantity kind {kind!r}")
        self.kind = kind
        self.minimum = minimum
        self.exclusive = exclusive
        self.bare_zero = bare_zero

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> SIValue:
        if (
            self.bare_zero
            and type(value) in (int, float)
            and value == 0
        ):
            return SIValue(0.0, self.kind, None)
        try:
            magnitude, basis = parse_with_basis(value, self.kind)
        except UnitError as exc:
            hint = ""
            if self.bare_zero and type(value) in (int, float):
                hint = " (only 0 may be given without a unit)"
            raise ValidationError(exc.message + hint) from None
        if self.minimum is not None:
            too_small = magnitude <= self.minimum if self.exclusive else magnitude < self.minimum
            if too_small:
                relation = "greater than" if self.exclusive else "at least"
                unit = si_unit(self.kind, basis)
                raise ValidationError(
                    f"must be {relation} {self.minimum:g} {unit}, got {magnitude!r} {unit}"
                )
        return SIValue(magnitude, self.kind, basis)

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        return value

    def _value_bound(self) -> dict:
        # Every accepted unit has a positive factor to SI, so the sign bound carries over.
        if self.minimum is None:
            return {"type": "number"}
        key = "exclusiveMinimum" if self.exclusive else "minimum"
        return {"type": "number", key: self.minimum}

    def json_schema(self) -> dict:
        spec = KINDS[self.kind]
        examples = list(spec.examples)
        bound = ""
        if self.minimum is not None:
            bound = f"; {'>' if self.exclusive else '≥'} {self.minimum:g} in SI units"
        forms: list[dict] = [
            {
                "type": "string",
                "pattern": QUANTITY_STRING_PATTERN,
                "maxLength": MAX_QUANTITY_STRING_LENGTH,
                "description": '"<number> <unit>"',
            },
            {
                "type": "object",
                "properties": {
                    "value": self._value_bound(),
                    "unit": {"type": "string", "minLength": 1, "maxLength": MAX_UNIT_LENGTH},
                },
                "required": ["value", "unit"],
                "additionalProperties": False,
            },
        ]
        if self.bare_zero:
            forms.append({"type": "number", "minimum": 0, "maximum": 0,
                          "description": "zero needs no unit"})
        return {
            "description": f"{spec.expected[len('expected '):]}{bound}",
            "examples": examples,
            "oneOf": forms,
        }


class PlainNumber(fields.Float):
    """A JSON number: not a boolean, not a string, finite."""

    default_error_messages = {
        "invalid": "must be a plain number",
        "special": "must be a finite number",
    }

    def _validated(self, value: Any) -> float:
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise self.make_error("invalid")
        return super()._validated(value)

    def json_schema(self) -> dict:
        return {"type": "number"}


class PlainInteger(fields.Integer):
    """A JSON integer: not a boolean, not a string, not 1.5."""

    default_error_messages = {"invalid": "must be an integer"}

    def _validated(self, value: Any) -> int:
        if isinstance(value, bool) or not isinstance(value, int):
            raise self.make_error("invalid")
        return super()._validated(value)

    def json_schema(self) -> dict:
        return {"type": "integer"}


class ByKind(_CheckedInDeserialize):
    """An object whose ``kind`` picks the schema that loads it (reactions, boundaries, regimes)."""

    def __init__(self, choices: Mapping[str, type[Schema]], noun: str, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.choices = dict(choices)
        self.noun = noun
        self._schemas = {kind: cls() for kind, cls in self.choices.items()}
        self._kinds = ", ".join(self.choices)
        # Kinds whose schema holds nothing but the kind itself ({"kind": "steady"}): a document
        # with that one key loads to itself, without a nested schema load.
        self._kind_only = frozenset(
            kind for kind, schema in self._schemas.items() if set(schema.load_fields) == {"kind"}
        )

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> dict:
        if not (type(value) is dict or isinstance(value, Mapping)):
            raise ValidationError(
                f"expected {self.noun} object with a 'kind' ({self._kinds}), "
                f"got {_describe(value)}"
            )
        kind = value.get("kind")
        if not isinstance(kind, str) or kind not in self.choices:
            message = (
                f"missing: {self.noun} needs a 'kind' ({self._kinds})"
                if "kind" not in value
                else f"must be one of {self._kinds}; got {_describe(kind)}"
            )
            raise ValidationError({"kind": [message]})
        if kind in self._kind_only and len(value) == 1:
            return {"kind": kind}
        return self._schemas[kind].load(value)

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        return value


class Tolerances(_CheckedInDeserialize):
    """``{"<check>[.<quantity>]": positive finite number}``."""

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> dict:
        if not isinstance(value, Mapping):
            raise ValidationError(
                f"expected an object of check names to limits, got {_describe(value)}"
            )
        loaded: dict[str, float] = {}
        errors: dict[str, list[str]] = {}
        for key, limit in value.items():
            if not isinstance(key, str) or not _TOLERANCE_KEY_RE.fullmatch(key):
                errors[str(key)] = [
                    "not a check name: expected '<check>' or '<check>.<quantity>' "
                    "(lower case letters, digits after the dot, underscores)"
                ]
                continue
            if key.split(".", 1)[0] not in CHECK_NAMES:
                errors[key] = [f"unknown check {key.split('.', 1)[0]!r}; known: "
                               + ", ".join(CHECK_NAMES)]
                continue
            if (
                isinstance(limit, bool)
                or not isinstance(limit, int | float)
                or not math.isfinite(limit)
                or limit <= 0
            ):
                errors[key] = [f"must be a positive finite number, got {_describe(limit)}"]
                continue
            loaded[key] = float(limit)
        if errors:
            raise ValidationError(errors)
        return loaded

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        return value

    def json_schema(self) -> dict:
        names = "|".join(CHECK_NAMES)
        return {
            "type": "object",
            "description": "overrides of the default limits of the checks, by check name",
            "propertyNames": {"pattern": portable_end(rf"^({names})(\.[a-z0-9_]+)?$")},
            "additionalProperties": {"type": "number", "exclusiveMinimum": 0},
        }


# -------------------------------------------------------------------------------------- schemas


class StrictSchema(Schema):
    """Refuses unknown keys, naming the ones it takes."""

    #: What the object is, for messages ("a flux boundary").
    noun = "this object"

    class Meta:
        unknown = RAISE

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        taken = ", ".join(self.fields)
        self.error_messages = {
            **self.error_messages,
            "unknown": f"unknown field: {self.noun} takes {taken}",
        }


def _about(description: str, **extra: Any) -> dict:
    """Field metadata carried into the JSON Schema export (``description``, ``default``)."""
    return {"description": description, **extra}


def _kind_field(kind: str) -> fields.String:
    return fields.String(required=True, validate=validate.OneOf([kind], error="must be {choices}"))


def _non_negative(kind: str, **kwargs: Any) -> Quantity:
    return Quantity(kind, minimum=0.0, **kwargs)


def _positive(kind: str, **kwargs: Any) -> Quantity:
    return Quantity(kind, minimum=0.0, exclusive=True, **kwargs)


def _parameter_field(parameter: Parameter) -> fields.Field:
    """The marshmallow field of one parameter a reaction or boundary kind declares."""
    extra: dict[str, Any] = {"required": True} if parameter.required else {}
    if parameter.dimension is None:
        bounds = {
            "any": None,
            "non_negative": validate.Range(min=0.0),
            "positive": validate.Range(min=0.0, min_inclusive=False),
        }[parameter.sign]
        return PlainNumber(validate=bounds, **extra) if bounds else PlainNumber(**extra)
    if parameter.sign == "positive":
        return _positive(parameter.dimension, **extra)
    if parameter.sign == "non_negative":
        return _non_negative(parameter.dimension, **extra)
    return Quantity(parameter.dimension, **extra)


def _kind_schema(kind: ReactionKind | BoundaryKind) -> type[Schema]:
    """The strict schema of one kind: its ``kind`` string, then its parameters in order."""
    name = f"{kind.schema_name}Schema"
    attributes: dict[str, Any] = {
        "__module__": __name__,
        "__qualname__": name,
        "noun": kind.noun,
        "kind": _kind_field(kind.name),
    }
    attributes.update((p.name, _parameter_field(p)) for p in kind.parameters)
    return type(name, (StrictSchema,), attributes)


#: One schema per reaction kind of ``worker.engine.reactions`` (``NoReactionSchema``...).
REACTION_SCHEMAS: Mapping[str, type[Schema]] = {
    name: _kind_schema(kind) for name, kind in REACTIONS.items()
}


class LayerSchema(StrictSchema):
    noun = "a layer"
    name = fields.String(
        validate=validate.Length(
            min=1, max=MAX_LAYER_NAME_LENGTH, error="1 to {max} characters"
        )
    )
    thickness = _positive("length", required=True)
    diffusivity = _positive("diffusivity", required=True)
    partition = PlainNumber(
        validate=validate.Range(min=0.0, min_inclusive=False),
        metadata=_about("equilibrium partition coefficient against the reference fluid "
                        "(C_layer = partition x C_fluid)", default=1.0),
    )
    reaction = ByKind(
        REACTION_SCHEMAS,
        "a reaction",
        metadata=_about("consumption in the layer", default={"kind": "none"}),
    )
    initial = _non_negative(
        "concentration",
        # No JSON Schema "default": a bare 0 has no unit, which the field itself refuses.
        metadata=_about("concentration in the layer at t = 0 (transient cases); absent: zero"),
    )
    loading = _non_negative(
        "concentration",
        metadata=_about("solute per volume of layer at t = 0, dissolved and undissolved "
                        "together (transient cases; instead of `initial`); above `solubility` "
                        "the excess is undissolved and dissolves as the layer empties"),
    )
    solubility = _positive(
        "concentration",
        metadata=_about("saturation concentration of the dissolved solute in the layer "
                        "(transient cases); absent: no limit"),
    )


#: One schema per boundary kind of ``worker.engine.boundaries`` (``FluxBoundarySchema``...).
BOUNDARY_SCHEMAS: Mapping[str, type[Schema]] = {
    name: _kind_schema(kind) for name, kind in BOUNDARIES.items()
}


class SteadyRegimeSchema(StrictSchema):
    noun = "a steady regime"
    kind = _kind_field("steady")


class TransientRegimeSchema(StrictSchema):
    noun = "a transient regime"
    kind = _kind_field("transient")
    duration = _positive("time", required=True)
    times = fields.List(
        _positive("time"),
        required=True,
        validate=validate.Length(min=1, max=MAX_TIMES, error="1 to {max} output times"),
    )


REGIME_SCHEMAS: Mapping[str, type[Schema]] = {
    "steady": SteadyRegimeSchema,
    "transient": TransientRegimeSchema,
}
REGIME_NAMES = tuple(REGIME_SCHEMAS)


def _at_most(limit: int, what: str) -> validate.Length:
    return validate.Length(max=limit, error=f"at most {{max}} {what}; got {{input!r:.40}}")


def _not_blank(text: str) -> None:
    if not text.strip():
        raise ValidationError("must not be blank")


_not_blank.json_schema = {"pattern": r"\S"}  # type: ignore[attr-defined]


# ------------------------------------------------------------------- design (second release)

MAX_REQUIREMENTS = 50
MAX_REQUIREMENT_ID_LENGTH = 64
REQUIREMENT_ID_PATTERN = r"^[A-Za-z0-9][A-Za-z0-9._:/-]*$"
MAX_UNCERTAIN_INPUTS = 20
MAX_SWEEP_VALUES = 50
MAX_FIELD_PATH_LENGTH = 120
FIELD_PATH_PATTERN = r"^[a-z_]+(\[[0-9]{1,2}\])?(\.[a-z_]+){0,2}$"
#: Largest ``max_trials`` a case may ask for: memory stays bounded (trials run in blocks), the
#: time is bounded by the service's budgets.
MAX_TRIALS_LIMIT = 10_000_000
DISTRIBUTIONS = ("normal", "lognormal", "uniform", "triangular")


class LooseValue(_CheckedInDeserialize):
    """A number, ``"<number> <unit>"`` or ``{"value": number, "unit": str}`` whose dimension
    depends on another field (the quantity a requirement names, the input an uncertainty
    varies); it is converted by the design rules (:mod:`schemas.design_rules`) once the case is
    read."""

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> Any:
        if isinstance(value, bool):
            raise ValidationError("expected a number or a value with its unit, got a boolean")
        if isinstance(value, int | float):
            if not math.isfinite(value):
                raise ValidationError("must be a finite number")
            return float(value)
        if isinstance(value, str):
            if len(value) > MAX_QUANTITY_STRING_LENGTH:
                raise ValidationError(f"at most {MAX_QUANTITY_STRING_LENGTH} characters")
            return value
        if isinstance(value, Mapping) and set(value) == {"value", "unit"}:
            return dict(value)
        raise ValidationError('expected a number, "<number> <unit>" or {"value": number, '
                              f'"unit": "..."}}, got {_describe(value)}')

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        return value

    def json_schema(self) -> dict:
        return {
            "description": "a number (dimensionless quantities) or a value with its unit, in "
                           "the dimension of the quantity or input it bounds",
            "oneOf": [
                {"type": "number"},
                {"type": "string", "pattern": QUANTITY_STRING_PATTERN,
                 "maxLength": MAX_QUANTITY_STRING_LENGTH},
                {"type": "object", "properties": {
                    "value": {"type": "number"},
                    "unit": {"type": "string", "minLength": 1, "maxLength": MAX_UNIT_LENGTH}},
                 "required": ["value", "unit"], "additionalProperties": False},
            ],
        }


def _field_path(**kwargs: Any) -> fields.String:
    return fields.String(
        validate=[_at_most(MAX_FIELD_PATH_LENGTH, "characters"),
                  WholeMatch(FIELD_PATH_PATTERN,
                             error="a field path such as layers[0].diffusivity, "
                                   "layers[1].reaction.rate or outer_boundary.bulk")],
        **kwargs)


def _requirement_id(**kwargs: Any) -> fields.String:
    return fields.String(
        validate=[_at_most(MAX_REQUIREMENT_ID_LENGTH, "characters"),
                  WholeMatch(REQUIREMENT_ID_PATTERN,
                             error="an id is a letter or digit followed by letters, digits, "
                                   "'.', '_', ':', '/' or '-'")],
        **kwargs)


class RequirementSchema(StrictSchema):
    """A design requirement on one figure of the record: exactly one of ``at_least``,
    ``at_most``, ``between``, in that figure's dimension."""

    noun = "a requirement"
    id = _requirement_id(required=True, metadata=_about("unique in the case"))
    quantity = fields.String(
        required=True, validate=_at_most(64, "characters"),
        metadata=_about("a quantity of the record; a series quantity needs `at`"))
    layer = fields.String(
        validate=_at_most(MAX_LAYER_NAME_LENGTH, "characters"),
        metadata=_about("a layer's name: limits concentration_min/concentration_max to it"))
    at = _positive("time", metadata=_about("the time at which a series quantity is bounded"))
    at_least = LooseValue()
    at_most = LooseValue()
    between = fields.List(LooseValue(), validate=validate.Length(
        equal=2, error="two values: [lowest, highest]"))
    source = fields.String(validate=_at_most(MAX_REFERENCE_LENGTH, "characters"),
                           metadata=_about("where the requirement comes from (design input)"))


class UncertainInputSchema(StrictSchema):
    """One uncertain numeric input of the case and its distribution."""

    noun = "an uncertain input"
    field = _field_path(required=True)
    distribution = fields.String(
        required=True,
        validate=validate.OneOf(DISTRIBUTIONS, error="must be one of {choices}; got {input!r}"))
    sd = LooseValue()
    relative_sd = PlainNumber(validate=validate.Range(min=0.0, min_inclusive=False))
    low = LooseValue()
    mode = LooseValue()
    high = LooseValue()


class CorrelationSchema(StrictSchema):
    """A correlation coefficient between two uncertain inputs (Gaussian copula)."""

    noun = "a correlation"
    fields_ = fields.List(_field_path(), data_key="fields", attribute="fields", required=True,
                          validate=validate.Length(equal=2, error="two field paths"))
    coefficient = PlainNumber(required=True, validate=validate.Range(
        min=-1.0, max=1.0, min_inclusive=False, max_inclusive=False))


class UncertaintySchema(StrictSchema):
    """Input uncertainty propagated by Monte Carlo (JCGM 101:2008, the default) or by the law of
    propagation of uncertainty (JCGM 100:2008)."""

    noun = "an uncertainty block"
    method = fields.String(
        validate=validate.OneOf(PROPAGATION_METHODS, error="must be one of {choices}; got "
                                                           "{input!r}"),
        metadata=_about("monte_carlo: adaptive Monte Carlo (JCGM 101:2008); "
                        "law_of_propagation: the GUM's first-order law (JCGM 100:2008), 2k + 1 "
                        "evaluations for k inputs, the output taken as normal",
                        default=MONTE_CARLO))
    inputs = fields.List(fields.Nested(UncertainInputSchema), required=True,
                         validate=validate.Length(min=1, max=MAX_UNCERTAIN_INPUTS,
                                                  error="1 to {max} inputs"))
    correlations = fields.List(fields.Nested(CorrelationSchema),
                               validate=_at_most(100, "correlations"))
    coverage = PlainNumber(validate=validate.Range(min=0.5, max=0.999),
                           metadata=_about("coverage probability", default=0.95))
    significant_digits = PlainInteger(validate=validate.Range(min=1, max=3), metadata=_about(
        "digits of the standard uncertainties the adaptive stopping aims at", default=2))
    seed = PlainInteger(validate=validate.Range(min=0, max=2**63 - 1),
                        metadata=_about("monte_carlo only; absent: one is drawn and recorded"))
    max_trials = PlainInteger(validate=validate.Range(min=100, max=MAX_TRIALS_LIMIT),
                              metadata=_about("monte_carlo only: trials at most",
                                              default=1_000_000))


class DesignLimitSchema(StrictSchema):
    """The value of one input at which a requirement's margin is zero."""

    noun = "a design limit"
    vary = _field_path(required=True)
    requirement = _requirement_id(required=True)
    range = fields.List(LooseValue(), required=True, validate=validate.Length(
        equal=2, error="two values: [lowest, highest]"))


class SweepSchema(StrictSchema):
    """A full check at each of several values of one input."""

    noun = "a sweep"
    vary = _field_path(required=True)
    values = fields.List(LooseValue(), required=True, validate=validate.Length(
        min=1, max=MAX_SWEEP_VALUES, error="1 to {max} values"))


MAX_MEASUREMENT_SETS = 20
MAX_POINTS_PER_SET = 200
MAX_CALIBRATED_INPUTS = 5
MEASUREMENT_USES = ("calibration", "validation")
SCALES = ("linear", "log")


class MeasurementSchema(StrictSchema):
    """Measured values of one series quantity of the record over time, with the standard
    uncertainty of each value, for calibration or for validation."""

    noun = "a measurement set"
    id = _requirement_id(required=True, metadata=_about("unique among the measurement sets"))
    quantity = fields.String(
        required=True, validate=_at_most(64, "characters"),
        metadata=_about("a series quantity of the record (release_fraction, released_outer, "
                        "compartment_outer, probe_concentration, ...)"))
    layer = fields.String(validate=_at_most(MAX_LAYER_NAME_LENGTH, "characters"),
                          metadata=_about("a layer's name, where the quantity takes one"))
    probe = PlainInteger(validate=validate.Range(min=0, max=MAX_PROBES - 1),
                         metadata=_about("the probe (index into probes) of probe_concentration"))
    times = fields.List(_positive("time"), required=True, validate=validate.Length(
        min=1, max=MAX_POINTS_PER_SET, error="1 to {max} times"))
    values = fields.List(PlainNumber(), required=True, validate=validate.Length(
        min=1, max=MAX_POINTS_PER_SET, error="1 to {max} values"))
    unit = fields.String(validate=_at_most(MAX_UNIT_LENGTH, "characters"), metadata=_about(
        "the unit of values and standard_uncertainty; absent: plain numbers (dimensionless "
        "quantities)"))
    standard_uncertainty = fields.List(
        PlainNumber(validate=validate.Range(min=0.0, min_inclusive=False)),
        validate=validate.Length(min=1, max=MAX_POINTS_PER_SET),
        metadata=_about("the standard uncertainty of each value, in unit"))
    relative_uncertainty = PlainNumber(
        validate=validate.Range(min=0.0, min_inclusive=False),
        metadata=_about("standard uncertainty as a fraction of each value"))
    use = fields.String(required=True, validate=validate.OneOf(
        MEASUREMENT_USES, error="must be one of {choices}; got {input!r}"),
        metadata=_about("calibration: fitted; validation: compared, never fitted"))
    source = fields.String(validate=_at_most(MAX_REFERENCE_LENGTH, "characters"),
                           metadata=_about("where the data come from (study, report)"))


class CalibratedInputSchema(StrictSchema):
    """One numeric input fitted to the calibration data."""

    noun = "a calibrated input"
    field = _field_path(required=True)
    bounds = fields.List(LooseValue(), required=True, validate=validate.Length(
        equal=2, error="two values: [lowest, highest]"))
    scale = fields.String(validate=validate.OneOf(
        SCALES, error="must be one of {choices}; got {input!r}"),
        metadata=_about("fit the value or its logarithm", default="linear"))


class CalibrationSchema(StrictSchema):
    """Inputs fitted by weighted least squares to the measurement sets marked calibration."""

    noun = "a calibration block"
    parameters = fields.List(fields.Nested(CalibratedInputSchema), required=True,
                             validate=validate.Length(min=1, max=MAX_CALIBRATED_INPUTS,
                                                      error="1 to {max} inputs"))


class CaseSchema(StrictSchema):
    """A transport case, schema version 1."""

    noun = "a case document"
    schema_version = PlainInteger(
        required=True,
        validate=validate.OneOf(
            [SCHEMA_VERSION], error=f"this service reads schema_version {SCHEMA_VERSION}"
        ),
    )
    title = fields.String(
        required=True, validate=[_at_most(MAX_TITLE_LENGTH, "characters"), _not_blank]
    )
    reference = fields.String(validate=_at_most(MAX_REFERENCE_LENGTH, "characters"))
    tags = fields.List(
        fields.String(
            validate=[
                _at_most(MAX_TAG_LENGTH, "characters"),
                WholeMatch(
                    TAG_PATTERN, error="a tag is one or more letters, digits, '.', '_' or '-'"
                ),
            ]
        ),
        validate=_at_most(MAX_TAGS, "tags"),
    )
    geometry = fields.String(
        required=True,
        validate=validate.OneOf(GEOMETRIES, error="must be one of {choices}; got {input!r}"),
    )
    inner = _non_negative(
        "length",
        required=True,
        bare_zero=True,
        metadata=_about("position of the inner face: x for a slab, the radius otherwise; 0 for "
                        "a solid cylinder or sphere"),
    )
    length = _positive(
        "length", metadata=_about("cylinder length; with it, totals in amount/s are reported")
    )
    area = _positive(
        "area", metadata=_about("slab area; with it, totals in amount/s are reported")
    )
    layers = fields.List(
        fields.Nested(LayerSchema),
        required=True,
        validate=validate.Length(min=1, max=MAX_LAYERS, error="1 to {max} layers, inner to outer"),
    )
    inner_boundary = ByKind(BOUNDARY_SCHEMAS, "a boundary", required=True)
    outer_boundary = ByKind(BOUNDARY_SCHEMAS, "a boundary", required=True)
    regime = ByKind(REGIME_SCHEMAS, "a regime", required=True)
    probes = fields.List(
        _non_negative("length"),
        validate=_at_most(MAX_PROBES, "probes"),
        metadata=_about("positions at which the concentration is reported"),
    )
    tolerances = Tolerances()
    requirements = fields.List(
        fields.Nested(RequirementSchema),
        validate=_at_most(MAX_REQUIREMENTS, "requirements"),
        metadata=_about("design requirements: the record's design block judges each"))
    uncertainty = fields.Nested(UncertaintySchema)
    design_limit = fields.Nested(DesignLimitSchema)
    sweep = fields.Nested(SweepSchema)
    measurements = fields.List(
        fields.Nested(MeasurementSchema),
        validate=validate.Length(min=1, max=MAX_MEASUREMENT_SETS, error="1 to {max} sets"),
        metadata=_about("measured data: calibration sets are fitted, validation sets compared"))
    calibration = fields.Nested(CalibrationSchema)


# --------------------------------------------------------------------------- cross-field rules


def _value(data: Mapping, key: str) -> float | None:
    item = data.get(key) if isinstance(data, Mapping) else None
    return item.value if isinstance(item, SIValue) else None


#: Leaf types of a loaded document, told apart without the slower abstract Mapping check.
_LEAF_TYPES = frozenset({SIValue, str, float, int, bool, type(None)})


def _is_container(item: Any) -> bool:
    kind = type(item)
    if kind is dict or kind is list:  # what a loaded document is made of
        return True
    return kind not in _LEAF_TYPES and isinstance(item, Mapping | list)


def iter_si_values(data: Any, path: str = "") -> Iterator[tuple[str, SIValue]]:
    """Every loaded dimensional value with its path, in document order."""
    found: list[tuple[str, SIValue]] = []
    _collect_si_values(data, path, found)
    return iter(found)


def _collect_si_values(data: Any, path: str, found: list[tuple[str, SIValue]]) -> None:
    if type(data) is dict or isinstance(data, Mapping):
        for key, item in data.items():
            if isinstance(item, SIValue):
                found.append((f"{path}.{key}" if path else key, item))
            elif _is_container(item):
                _collect_si_values(item, f"{path}.{key}" if path else key, found)
    elif isinstance(data, list):
        for index, item in enumerate(data):
            if isinstance(item, SIValue):
                found.append((f"{path}[{index}]", item))
            elif _is_container(item):
                _collect_si_values(item, f"{path}[{index}]", found)


def _consumes(reaction: Any) -> bool:
    """True when the layer's reaction removes solute at some concentration."""
    if not isinstance(reaction, Mapping):
        return False
    name = reaction.get("kind")
    key = REACTIONS[name].consumption_parameter if name in _REACTION_NAMES else None
    return key is not None and (_value(reaction, key) or 0.0) > 0.0


#: Kind names as tuples: a membership test that also takes an unhashable ``kind``.
_REACTION_NAMES = tuple(REACTIONS)
_LEVEL_SETTING_BOUNDARIES = tuple(name for name, kind in BOUNDARIES.items() if kind.sets_level)


def _size_rules(data: Mapping) -> Iterator[tuple[str, str]]:
    geometry = data.get("geometry")
    if geometry not in GEOMETRIES:
        return
    if "length" in data and geometry != "cylinder":
        yield "length", f"only a cylinder takes a length; this case is a {geometry}"
    if "area" in data and geometry != "slab":
        yield "area", f"only a slab takes an area; this case is a {geometry}"


def _symmetry_rules(data: Mapping) -> Iterator[tuple[str, str]]:
    geometry, inner = data.get("geometry"), _value(data, "inner")
    boundary = data.get("inner_boundary")
    if geometry in RADIAL_GEOMETRIES and inner == 0.0 and isinstance(boundary, Mapping):
        if boundary.get("kind") != SYMMETRY.name:
            yield (
                "inner_boundary.kind",
                f"the centre of a solid {geometry} (inner = 0) is a symmetry point: the inner "
                f"boundary must be {{\"kind\": \"symmetry\"}}, got {boundary.get('kind')!r}",
            )


def _steady_level_rules(data: Mapping) -> Iterator[tuple[str, str]]:
    regime = data.get("regime")
    faces = [data.get("inner_boundary"), data.get("outer_boundary")]
    layers = data.get("layers")
    if not (isinstance(regime, Mapping) and regime.get("kind") == "steady"):
        return
    if not all(isinstance(f, Mapping) for f in faces) or not isinstance(layers, list):
        return
    if any(f.get("kind") in _LEVEL_SETTING_BOUNDARIES for f in faces if f is not None):
        return
    if any(isinstance(ly, Mapping) and _consumes(ly.get("reaction")) for ly in layers):
        return
    yield (
        "",
        "a steady case with flux or symmetry conditions at both faces and no consumption has no "
        "unique solution (the level is not fixed, and any net inflow has nowhere to go): give one "
        "face a concentration or mass_transfer condition, add a consuming reaction, or make the "
        "regime transient",
    )


def _bases(data: Any, found: set[str]) -> None:
    """Add to ``found`` every basis the loaded values of ``data`` carry."""
    for item in data.values() if type(data) is dict or isinstance(data, Mapping) else data:
        if isinstance(item, SIValue):
            if item.basis is not None:
                found.add(item.basis)
        elif _is_container(item):
            _bases(item, found)


def _basis_rules(data: Mapping) -> Iterator[tuple[str, str]]:
    bases: set[str] = set()
    if isinstance(data, Mapping | list):
        _bases(data, bases)
    if len(bases) < 2:  # one basis, or none: nothing to report (paths are built only if needed)
        return
    first_path, first = None, None
    for path, item in iter_si_values(data):
        if item.basis is None:
            continue
        if first is None:
            first_path, first = path, item
        elif item.basis != first.basis:
            yield (
                path,
                f"uses the {item.basis} basis ({si_unit(item.kind, item.basis)}) but "
                f"{first_path} set the {first.basis} basis ({si_unit(first.kind, first.basis)}): "
                "one concentration basis (molar or mass) per case",
            )


def _time_rules(data: Mapping) -> Iterator[tuple[str, str]]:
    regime = data.get("regime")
    if not (isinstance(regime, Mapping) and regime.get("kind") == "transient"):
        return
    duration = _value(regime, "duration")
    previous = None
    for index, item in enumerate(regime.get("times") or []):
        if not isinstance(item, SIValue):
            continue
        path = f"regime.times[{index}]"
        if duration is not None and item.value > duration:
            yield path, f"{item.value!r} s is after the end of the run (duration {duration!r} s)"
        if previous is not None and item.value <= previous:
            yield path, f"times must increase strictly: {item.value!r} s follows {previous!r} s"
        previous = item.value


def _probe_rules(data: Mapping) -> Iterator[tuple[str, str]]:
    inner, layers = _value(data, "inner"), data.get("layers")
    if inner is None or not isinstance(layers, list) or not layers:
        return
    thicknesses = [_value(ly, "thickness") for ly in layers]
    if any(t is None for t in thicknesses):
        return
    outer = inner + sum(cast(list[float], thicknesses))
    for index, item in enumerate(data.get("probes") or []):
        if isinstance(item, SIValue) and not (inner <= item.value <= outer):
            yield (
                f"probes[{index}]",
                f"{item.value!r} m lies outside the body, which spans [{inner!r}, {outer!r}] m",
            )


def _is_transient(data: Mapping) -> bool | None:
    """True or False by the regime's kind; None when the regime did not load."""
    regime = data.get("regime")
    if not (isinstance(regime, Mapping) and regime.get("kind") in REGIME_NAMES):
        return None
    return bool(regime.get("kind") == "transient")


def _loading_rules(data: Mapping) -> Iterator[tuple[str, str]]:
    """A layer's ``initial`` and ``loading`` are alternatives; an ``initial`` above the
    layer's ``solubility`` is refused (the solute beyond saturation is undissolved: state it as
    ``loading``); ``loading`` and ``solubility`` belong to transient cases."""
    layers = data.get("layers")
    if not isinstance(layers, list):
        return
    transient = _is_transient(data)
    for index, layer in enumerate(layers):
        if not isinstance(layer, Mapping):
            continue
        path = f"layers[{index}]"
        if "initial" in layer and "loading" in layer:
            yield (f"{path}.loading", "initial and loading are alternatives (both are the "
                                      "solute per volume of layer at t = 0): give one")
        initial, solubility = _value(layer, "initial"), _value(layer, "solubility")
        same_basis = (isinstance(layer.get("initial"), SIValue)
                      and isinstance(layer.get("solubility"), SIValue)
                      and layer["initial"].basis == layer["solubility"].basis)
        if same_basis and initial is not None and solubility is not None \
                and initial > solubility:  # across bases the basis rule speaks
            yield (f"{path}.initial", f"{initial!r} is above the layer's solubility "
                                      f"{solubility!r} (SI units): a layer loaded beyond "
                                      "saturation is stated with `loading` (dissolved and "
                                      "undissolved together)")
        if transient is False:
            for key in ("loading", "solubility"):
                if key in layer:
                    yield (f"{path}.{key}", f"{key} is read only in transient cases (a steady "
                                            "case has no initial content); remove it or make "
                                            "the regime transient")


def _compartment_rules(data: Mapping) -> Iterator[tuple[str, str]]:
    """A compartment holds a finite fluid volume in time: transient cases only; its face area
    must be known (a slab's ``area``, a cylinder's ``length``). A solid centre takes only
    ``symmetry`` (:func:`_symmetry_rules`), so no compartment sits there."""
    geometry, transient = data.get("geometry"), _is_transient(data)
    for side in ("inner", "outer"):
        face = data.get(f"{side}_boundary")
        if not (isinstance(face, Mapping) and face.get("kind") == COMPARTMENT):
            continue
        path = f"{side}_boundary"
        if transient is False:
            yield (f"{path}.kind", "a compartment (a finite stirred volume) is read only in "
                                   "transient cases; make the regime transient or use a "
                                   "concentration or mass_transfer boundary")
        if geometry == "slab" and "area" not in data:
            yield ("area", f"{path} is a compartment: a slab case needs its `area` (the face "
                           "area through which the compartment exchanges solute)")
        if geometry == "cylinder" and "length" not in data:
            yield ("length", f"{path} is a compartment: a cylinder case needs its `length` "
                             "(the face area is 2 pi r length)")


def _flow_rules(data: Mapping) -> Iterator[tuple[str, str]]:
    """A flow face is the wall of a lumen along a cylinder: the inner face of a hollow
    cylinder (``inner`` > 0 is the lumen radius) of known ``length``, in a steady case (the
    transient lumen is not offered yet)."""
    outer = data.get("outer_boundary")
    if isinstance(outer, Mapping) and outer.get("kind") == FLOW:
        yield ("outer_boundary.kind", "a flow boundary is the wall of a lumen inside the body: "
                                      "it is offered for the inner boundary only")
    face = data.get("inner_boundary")
    if not (isinstance(face, Mapping) and face.get("kind") == FLOW):
        return
    geometry = data.get("geometry")
    if geometry in GEOMETRIES and geometry != "cylinder":
        yield ("geometry", f"inner_boundary is a flow (a lumen): expected geometry 'cylinder', "
                           f"got {geometry!r}")
    inner = _value(data, "inner")
    if inner is not None and not inner > 0.0:
        yield ("inner", "inner_boundary is a flow: expected `inner` > 0, the lumen radius")
    if geometry == "cylinder" and "length" not in data:
        yield ("length", "inner_boundary is a flow: a cylinder case needs its `length` (the "
                         "length of the lumen along which the fluid flows)")
    if _is_transient(data):
        yield ("regime.kind", "a flow boundary is offered for steady cases only; the transient "
                              "lumen is not offered yet: make the regime steady")
    if data.get("probes"):
        yield ("probes", "probes are not read in a flow case yet (the concentration varies "
                         "along the lumen): remove them; the record gives the axial series and "
                         "the lowest concentration with its position")


CASE_RULES = (
    _size_rules,
    _symmetry_rules,
    _steady_level_rules,
    _basis_rules,
    _time_rules,
    _probe_rules,
    _loading_rules,
    _compartment_rules,
    _flow_rules,
)


def case_rule_errors(data: Mapping) -> list[tuple[str, str]]:
    """Cross-field errors of a (possibly partly) loaded case, as ``(path, message)`` pairs.

    Each rule reads only what loaded cleanly, so these errors add to the field errors rather
    than repeating them.
    """
    return [error for rule in CASE_RULES for error in rule(data)]


def case_basis(data: Mapping) -> str:
    """The concentration basis of a loaded case: that of its first basis-bearing value."""
    basis = _first_basis(data)
    return "molar" if basis is None else basis


def _first_basis(data: Any) -> str | None:
    """The basis of the first basis-bearing value in document order (the order of
    ``iter_si_values``), searched no further than that value."""
    items: Iterable[Any]
    if type(data) is dict or isinstance(data, Mapping):
        items = data.values()
    elif isinstance(data, list):
        items = data
    else:
        return None
    for item in items:
        if isinstance(item, SIValue):
            if item.basis is not None:
                return item.basis
        elif _is_container(item):
            basis = _first_basis(item)
            if basis is not None:
                return basis
    return None
